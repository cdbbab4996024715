"""``python -m packer.bench.whylate OUT/plan.json``: where a written plan's lateness comes from.

Reads a plan.json (and the job file it names, for the printers' materials and free
times) and prints: the late orders by the technology and material of their last plate
and by priority; per technology the machine hours against its printers, the hours
printers stand finished waiting for a shift to clear them (plates that end outside a
shift), and the plates that run across a closed period; how the planner spent its work
clock per phase and what its CP-SAT steps reached; the due-aware load bounds per printer group
(``bounds.load``, :mod:`packer.fleet.duebounds`). Nothing is planned; it only reads.
Used for the diagnosis "Why large days go late" in packer/fleet/README.md.
"""

from __future__ import annotations

import json
import sys
from collections import defaultdict
from datetime import datetime
from pathlib import Path

import yaml

__all__ = ["main", "late_by_group", "technology_load"]

#: A plate whose printer is free more than this long after its end waited for a shift (h).
WAIT_H = 1.0


def _hours(start: datetime):
    return lambda t: (datetime.fromisoformat(str(t).replace(" ", "T")) - start).total_seconds() / 3600


def late_by_group(plan: dict) -> dict:
    """(technology, material) of each late order's last plate -> {priority: [hours late]}."""
    last: dict = {}
    for p in plan["plates"]:
        for it in p["items"]:
            if it["order"] not in last or p["free"] > last[it["order"]]["free"]:
                last[it["order"]] = p
    out: dict = defaultdict(lambda: defaultdict(list))
    for o in plan["orders"]:
        if o["late_minutes"] > 0 and o["order"] in last:
            p = last[o["order"]]
            out[(p["technology"], p["material"])][o["priority"]].append(o["late_minutes"] / 60)
    return out


def technology_load(plan: dict, fleet: list) -> dict:
    """Per technology: printers, mean first free hour, plates, machine hours, hours spent waiting
    for a shift after a plate ended, plates across a closed period and their machine hours, last free."""
    h = _hours(datetime.fromisoformat(plan["start"]))
    tech_of = {p["profile"]: p["technology"] for p in plan["plates"]}
    out: dict = {}
    for f in fleet:
        t = tech_of.get(f["profile"], f["profile"])
        row = out.setdefault(t, {"printers": 0, "ready_h": 0.0, "plates": 0, "machine_h": 0.0, "wait_h": 0.0,
                                 "across": [], "last_free_h": 0.0})
        row["printers"] += 1
        row["ready_h"] += h(f.get("available_from", plan["start"])) if "available_from" in f else 0.0
    for p in plan["plates"]:
        row = out[p["technology"]]
        machine, wait = h(p["end"]) - h(p["start"]), h(p["free"]) - h(p["end"])
        row["plates"] += 1
        row["machine_h"] += machine
        row["last_free_h"] = max(row["last_free_h"], h(p["free"]))
        if wait > WAIT_H:
            row["wait_h"] += wait
            row["across"].append(machine)
    for row in out.values():
        row["ready_h"] /= max(1, row["printers"])
    return out


def _print_late(plan: dict, out) -> None:
    groups = late_by_group(plan)
    n = sum(len(v) for g in groups.values() for v in g.values())
    out.write(f"late orders: {n} of {len(plan['orders'])}, by the group of their last plate and priority "
              "(count, mean / max hours late)\n")
    for g, by_prio in sorted(groups.items(), key=lambda x: -sum(len(v) for v in x[1].values())):
        cells = ", ".join(f"priority {k}: {len(v)} ({sum(v) / len(v):.1f} / {max(v):.1f} h)"
                          for k, v in sorted(by_prio.items()))
        out.write(f"  {g[0]}/{g[1]}: {cells}\n")
    prio: dict = defaultdict(lambda: [0, 0])
    for o in plan["orders"]:
        prio[o["priority"]][0] += 1
        prio[o["priority"]][1] += o["late_minutes"] > 0
    out.write("  late / orders per priority: " + ", ".join(f"{k}: {v[1]} / {v[0]}" for k, v in sorted(prio.items()))
              + "\n")


def _print_load(plan: dict, fleet: list, out) -> None:
    out.write(f"per technology (waiting: a printer finished, its plate ended outside a shift; more than {WAIT_H:g} h)\n")
    for t, r in sorted(technology_load(plan, fleet).items()):
        across = r["across"]
        spread = f"{min(across):.1f}-{max(across):.1f} h" if across else "-"
        out.write(f"  {t}: {r['printers']} printers (mean free from {r['ready_h']:.1f} h), {r['plates']} plates, "
                  f"{r['machine_h']:.1f} machine h = {r['machine_h'] / r['printers'] + r['ready_h']:.1f} h per printer "
                  f"from the start; waiting {r['wait_h']:.1f} printer-h after {len(across)} plates that ran into a "
                  f"closed period (their machine time {spread}); last free at {r['last_free_h']:.1f} h\n")


def _print_planner(plan: dict, out) -> None:
    """The planner's figures; for a fleet planned in components (``notes.components``), per component."""
    top = plan.get("notes", {})
    for k, notes in enumerate(top.get("components") or [top]):
        if "components" in top:
            names = notes.get("printer_names", [])
            out.write(f"component {k}: {names[0] if names else '-'} .. {names[-1] if names else '-'} "
                      f"({len(names)} printers), budget {notes.get('budget_s')} s\n")
        _print_part(plan, notes, out)


def _print_part(plan: dict, notes: dict, out) -> None:
    work = notes.get("work_phases_s", {})
    total = sum(work.values()) or 1.0
    out.write("work clock per phase: " + ", ".join(f"{k.removesuffix('_s')} {v:.1f} s ({v / total:.0%})"
                                                   for k, v in work.items()) + "\n")
    out.write(f"budget cuts: {'; '.join(notes.get('budget_cuts', [])) or 'none'}; layout calls "
              f"{notes.get('fits_calls')}; merges {notes.get('merged_plates')} + {notes.get('final_merged_plates')}; "
              f"under-filled plates kept {notes.get('kept_low_plates')}\n")
    s, c = notes.get("schedule", {}), notes.get("contents", {})
    out.write(f"sequencing (CP-SAT): {s.get('status')}, deterministic time {s.get('det_s')}, used: "
              f"{bool(s.get('used'))}; contents (CP-SAT): {c.get('status')}, rounds {c.get('rounds')}\n")
    out.write(f"weighted lateness: list schedule {notes.get('greedy_weighted_lateness_h', 0):.1f} h, plan "
              f"{notes.get('weighted_lateness_h', 0):.1f} h (bound {plan['bounds'].get('lateness_bound_h')}); "
              f"finish {notes.get('finish')} (bound {plan['bounds'].get('finish_bound')}); "
              f"deterministic: {notes.get('deterministic')}\n")


def _print_bounds(plan: dict, out) -> None:
    load = plan["bounds"].get("load")
    if not load:
        return
    h = _hours(datetime.fromisoformat(plan["start"]))
    out.write(f"due-aware load bounds: {load['surely_late_orders']} orders late in every plan, weighted lateness "
              f">= {load['lateness_bound_h']:.1f} h, finish >= {h(load['finish_bound']):.1f} h\n")
    for name, g in sorted(load["groups"].items()):
        cap = g["night_cap_h"]
        out.write(f"  {name}: {g['printers']} printers, {g['orders']} orders, work >= {g['work_h']:.1f} machine h; "
                  f"tightest due {h(g['tightest_due']):.1f} h: {g['due_work_h']:.1f} h due of "
                  f"{g['due_capacity_h']:.1f} h of capacity; a night holds <= "
                  f"{'-' if cap is None else f'{cap[0]:.1f}-{cap[1]:.1f}'} h a printer; late >= {g['late_orders']}, "
                  f"weighted lateness >= {g['lateness_bound_h']:.1f} h, finish >= "
                  f"{'-' if g['finish_bound'] is None else format(h(g['finish_bound']), '.1f')} h\n")


def main(argv: list[str]) -> int:
    """Print the diagnosis of the plan.json named in ``argv``; return the exit code."""
    if len(argv) != 1:
        sys.stderr.write("usage: python -m packer.bench.whylate OUT/plan.json\n")
        return 2
    path = Path(argv[0])
    plan = json.loads(path.read_text())
    job = yaml.safe_load((path.parent / plan["job_file"]).read_text())
    out = sys.stdout
    _print_late(plan, out)
    _print_load(plan, job["fleet"], out)
    _print_planner(plan, out)
    _print_bounds(plan, out)
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
