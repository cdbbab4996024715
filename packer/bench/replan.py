"""``packer bench replan``: replan a generated day after one failed plate and time it.

With ``--real``, the day is written as a real job (meshes, :mod:`packer.bench.day`),
planned and written by the pipeline, and replanned on disk by the same code as
``packer replan`` after a failed plate and a filament printer down for
``--down-hours``; every version is checked by ``verify_plan.py`` and the late
orders are compared with a fresh plan of the remaining work (frozen plates kept,
every copy not started planned again with the fresh plan's budget).

A day of ``--copies`` copies (:func:`packer.bench.daygen.make_day`) is planned
fresh with the fleet planner; at ``--hours`` after the start, the printing
plate with the most copies fails. The replan (events checked, frozen plates
kept, failed copies planned again, all plates not started re-sequenced) is
timed and compared with the fresh plan. Layouts come from the stand-in of
the fleet benchmark (skyline packing of rectangular footprints, exact for
them), not the nesting engine, and nothing is written to disk: the table
measures the replanning. Timings on a shared machine are noisy.
"""

from __future__ import annotations

import json
import os
import shutil
import sys
import time
from dataclasses import replace
from datetime import datetime, timedelta
from pathlib import Path

from packer.clihelp import command_parser
from packer.bench.daygen import make_day
from packer.bench.standin import ShelfLayouts
from packer.fleet.planner import plan_fleet
from packer.intake.identity import copy_key
from packer.replan.changes import compare
from packer.replan.planner import ReplanSettings, replan
from packer.replan.events import Failed
from packer.replan.state import apply_events, state_of_fleet

__all__ = ["bench_command", "bench_replan", "bench_real"]


def bench_replan(*, copies: int, printers: int, seed: int, fresh_s: float, hours: float,
                 settings: ReplanSettings) -> dict:
    """One row: plan a day, fail its fullest printing plate, replan; figures of the replan."""
    day = make_day(copies=copies, printers=printers, seed=seed)
    layouts = ShelfLayouts(day.parts)
    t0 = time.monotonic()
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar, start=day.start,
                     layouts=layouts, seconds=fresh_s, seed=seed)
    fresh = time.monotonic() - t0
    state = state_of_fleet(res.plates, res.unplaced, start=day.start)
    now = day.start + timedelta(hours=hours)
    running = [p for p in state.plates if p.start <= now < p.end]
    if not running:
        raise SystemExit(f"no plate is printing {hours:g} h after the start; try another --hours")
    victim = max(running, key=lambda p: (len(p.copies), p.id))
    t0 = time.monotonic()
    sit = apply_events(state, [Failed(victim.id, origin="bench")], now=now, printers=day.printers,
                       calendar=day.calendar, stats=day.stats)
    done = replan(sit, printers=day.printers, stats=day.stats, calendar=day.calendar, layouts=layouts,
                  settings=settings)
    wall = time.monotonic() - t0
    ch = compare(state, done.state)
    old = {p.id: {copy_key(c) for c in p.copies} for p in state.plates}
    touched = sum(1 for p in done.state.plates if p.id in old and p.id != victim.id
                  and {copy_key(c) for c in p.copies} != old[p.id])
    return {"copies": len(day.copies), "plates": len(state.plates), "failed": victim.id,
            "lost": len(victim.copies), "fresh_s": fresh, "replan_s": wall,
            "not_started": len(sit.planned), "new": len(ch.new_plates), "moved": len(ch.moved_plates),
            "removed": len(ch.removed_plates), "changed": ch.plates_changed, "touched": touched,
            "late_before": sum(1 for _, due, t, _n in ch.orders if t is None or t > due),
            "late_after": len(ch.late_now), "schedule": done.stats["schedule"].get("kept", "-")}


def _late(state) -> int:
    """Orders whose last plate ends after the due time, or with a copy not placed."""
    done, due = {}, {}
    for p in state.plates:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.end), p.end)
            due[c.order] = c.due
    short = {c.order for c, _ in state.unplaced}
    return sum(1 for o in due if o in short or done[o] > due[o]) + len(short - set(due))


def _events_of(plan: dict, *, hours: float, down_hours: float):
    """(failed plate, down printer, from, until, plates) of a written first plan: at ``hours`` after the
    start the filament or resin plate printing with the most copies fails, and the filament printer
    (another one) with the most plates waiting goes down for ``down_hours`` from 30 min later, or
    from the end of the plate it prints then."""
    start = datetime.fromisoformat(plan["start"])
    now = start + timedelta(hours=hours)
    at = lambda p, k: datetime.fromisoformat(p[k])  # noqa: E731
    running = [p for p in plan["plates"] if at(p, "start") <= now < at(p, "end") and p["technology"] != "powder"]
    if not running:
        raise SystemExit(f"no plate is printing {hours:g} h after the start; try another --hours")
    victim = max(running, key=lambda p: (len(p["items"]), p["id"]))
    waiting = {}
    for p in plan["plates"]:
        if at(p, "start") > now and p["technology"] == "filament" and p["printer"] != victim["printer"]:
            waiting[p["printer"]] = waiting.get(p["printer"], 0) + 1
    down = max(sorted(waiting), key=lambda n: waiting[n]) if waiting else victim["printer"]
    busy = [at(p, "end") for p in plan["plates"] if p["printer"] == down and at(p, "start") <= now]
    a = max([now + timedelta(minutes=30)] + [t + timedelta(minutes=2) for t in busy]).replace(second=0, microsecond=0)
    return f"{victim['id']} ({len(victim['items'])})", down, a, a + timedelta(hours=down_hours), len(plan["plates"])


def bench_real(folder: Path, *, copies: int, printers: int, seed: int, hours: float, down_hours: float,
               seconds: float, verify: bool = True, reuse: bool = False, verifier: Path | None = None) -> dict:
    """One row with real meshes: plan, fail a plate and take a printer down, replan on disk, compare.

    ``reuse``: a first plan already in ``folder/out`` is replanned again (its later versions removed)."""
    from packer.bench.day import verify_written_plan, write_day_job
    from packer.bench.daygen import day_budget_s
    from packer.intake.job import load_job
    from packer.output.write import write_outputs
    from packer.pipeline import PlanSettings, layout_service, plan_job
    from packer.replan.command import parser, run_replan
    from packer.replan.state import fmt_time

    budget = day_budget_s(copies)
    out = folder / "out"
    fresh = None
    if not (reuse and (out / "plan.json").is_file()):
        day = write_day_job(folder / "job", copies=copies, printers=printers, seed=seed)
        job = load_job(day.path)
        t0 = time.monotonic()
        outcome = plan_job(job, settings=PlanSettings(seconds=budget, seed=seed))
        fresh = time.monotonic() - t0
        if out.exists():
            shutil.rmtree(out)
        write_outputs(outcome, out)
    v1 = verify_written_plan(out / "plan.json", verifier=verifier) if verify else "skipped"
    victim, down, a, b, n_plates = _events_of(json.loads((out / "plan.json").read_text(encoding="utf-8")),
                                              hours=hours, down_hours=down_hours)
    for old in out.glob("v[0-9]*"):
        shutil.rmtree(old)
    stamp = lambda t: t.strftime("%Y-%m-%dT%H:%M")  # noqa: E731
    now = datetime.fromisoformat(json.loads((out / "plan.json").read_text(encoding="utf-8"))["start"]) + \
        timedelta(hours=hours)
    args = parser().parse_args([str(out), "--failed", victim.split(" ")[0], "--down", f"{down}@{stamp(a)}..{stamp(b)}",
                                 "--now", stamp(now), "--seconds", str(seconds), "--seed", str(seed)])
    r = run_replan(args)
    v2 = verify_written_plan(out / "v2" / "plan.json", verifier=verifier) if verify else "skipped"
    sit, prev = r["situation"], r["previous"]
    remaining = replace(sit, planned=(), pool=tuple(sit.pool) + tuple(c for p in sit.planned for c in p.copies))
    layouts = layout_service(prev.job, prev.parts, prev.kinds, seed=seed)
    t1 = time.monotonic()
    again = replan(remaining, printers=prev.job.fleet, stats=prev.stats, calendar=prev.job.calendar,
                   layouts=layouts, settings=ReplanSettings(seconds=budget, seed=seed))
    fresh_rest = time.monotonic() - t1
    rp, w = r["replanned"], r["written"]
    return {"copies": copies, "plates": n_plates, "failed": victim,
            "down": f"{down} {fmt_time(a)[-5:]}-{fmt_time(b)[-5:]}", "fresh_s": fresh, "replan_s": r["wall_s"],
            "planning_s": rp.stats["replan_s"],
            "copied": w["copied"], "written": w["exported"], "rewritten": w["rewritten"],
            "late_before": _late(prev.state), "late_after": _late(rp.state), "late_fresh": _late(again.state),
            "fresh_rest_s": fresh_rest, "kept": rp.stats["schedule"]["kept"], "verify": f"{v1} / {v2}",
            "work_s": sum(rp.stats["work_s"].values()), "nets": rp.stats["safety_nets"],
            "wlate_h": rp.stats["schedule"]["weighted_lateness_h"], "floor_h": rp.stats["schedule"]["floor_h"],
            "wlate_fresh_h": again.stats["schedule"]["weighted_lateness_h"]}


def _real_table(args) -> int:
    import tempfile
    print("replan on disk after a failed plate and a printer down (real meshes, nesting, files); "
          "shared machine, timings noisy")
    head = ("copies", "plates", "failed (copies)", "down", "fresh s", "replan s", "of it planning s", "work s", "copied", "written",
            "rewritten", "late before", "late after", "late fresh rest", "weighted h: replan / floor / fresh rest",
            "kept plan", "safety nets", "verify v1 / v2", "load")
    print(" | ".join(head))
    print(" | ".join("---" for _ in head))
    for n in args.copies:
        with tempfile.TemporaryDirectory(prefix="packer-replan-bench-") as tmp:
            folder = Path(args.keep) / f"day-{n}" if args.keep else Path(tmp)
            r = bench_real(folder, copies=n, printers=args.printers, seed=args.seed, hours=args.hours,
                           down_hours=args.down_hours, seconds=args.seconds, verify=not args.no_verify,
                           reuse=args.reuse, verifier=args.verifier)
        print(" | ".join(str(v) for v in (
            r["copies"], r["plates"], r["failed"], r["down"], "-" if r["fresh_s"] is None else f"{r['fresh_s']:.0f}",
            f"{r['replan_s']:.1f}", f"{r['planning_s']:.1f}", f"{r['work_s']:.1f}", r["copied"], r["written"], r["rewritten"], r["late_before"],
            r["late_after"], r["late_fresh"], f"{r['wlate_h']:.2f} / {r['floor_h']:.2f} / {r['wlate_fresh_h']:.2f}",
            r["kept"], ", ".join(r["nets"]) or "none", r["verify"], f"{os.getloadavg()[0]:.1f}")), flush=True)
    print("late: orders ending after their due time or not complete; late fresh rest: a fresh plan of the "
          "remaining work (frozen plates kept, every copy not started planned again with the fresh plan's budget); "
          "weighted h: priority-weighted hours late of the replan, its lower bound (floor) and the fresh plan of the "
          "rest; replan s: the whole command (reading the plan and its meshes, planning, writing), of it planning s: "
          "the planner alone; work s: the planner's work clock; rewritten: plates kept unchanged whose file is not byte-identical "
          "(0 expected); load: the 1-minute load average after the row (2 cores: above 2, wall times grow)")
    return 0


def bench_command(argv: list[str]) -> int:
    ap = command_parser("packer bench replan", __doc__.splitlines()[0],
                        ["packer bench replan --copies 200 --fresh-seconds 20",
                         "packer bench replan --copies 1000 --hours 3",
                         "packer bench replan --real --copies 1000 2000 --keep /tmp/replan-days "
                         "--verifier ../shared/tools/verify_plan.py"])
    ap.add_argument("--copies", type=int, nargs="+", default=[1000], help="copies per generated day (one row each)")
    ap.add_argument("--printers", type=int, default=12, help="printers in the generated fleet")
    ap.add_argument("--seed", type=int, default=0, help="seed of the day generator and the planner")
    ap.add_argument("--fresh-seconds", type=float, default=60.0, help="budget of the fresh plan")
    ap.add_argument("--hours", type=float, default=3.0, help="the failure, in hours after the start")
    ap.add_argument("--seconds", type=float, default=10.0, help="fleet-planner budget of the replan")
    ap.add_argument("--schedule-seconds", type=float, default=5.0, help="CP-SAT sequencing budget of the replan")
    ap.add_argument("--real", action="store_true", help="real meshes and files: plan, fail a plate, take a printer "
                                                         "down, replan on disk, verify every version")
    ap.add_argument("--down-hours", type=float, default=4.0, help="with --real: how long the printer is down")
    ap.add_argument("--keep", default=None, help="with --real: keep the jobs and plans in this folder")
    ap.add_argument("--no-verify", action="store_true", help="with --real: do not run verify_plan.py")
    ap.add_argument("--verifier", type=Path, default=None, metavar="VERIFY_PLAN.py",
                    help="with --real: the independent plan checker (shipped with the benchmark data, e.g. "
                         "../shared/tools/verify_plan.py); without it the versions are not checked")
    ap.add_argument("--reuse", action="store_true", help="with --real and --keep: replan the first plan already "
                                                          "kept there instead of planning the day again")
    args = ap.parse_args(argv)
    if args.real:
        if args.verifier is not None and not args.verifier.is_file():
            print(f"packer bench replan: --verifier {args.verifier}: no such file", file=sys.stderr)
            return 2
        return _real_table(args)
    print("replan after one failed plate; stand-in layouts (skyline packing of rectangles), nothing written; "
          "shared machine, timings noisy")
    head = ("copies", "plates", "failed", "lost", "fresh s", "replan s", "not started", "new", "moved", "removed",
            "changed", "touched", "late before", "late after", "sequence")
    print(" | ".join(head))
    print(" | ".join("---" for _ in head))
    for n in args.copies:
        r = bench_replan(copies=n, printers=args.printers, seed=args.seed, fresh_s=args.fresh_seconds,
                         hours=args.hours, settings=ReplanSettings(seconds=args.seconds,
                                                                   schedule_s=args.schedule_seconds, seed=args.seed))
        print(" | ".join(str(v) for v in (
            r["copies"], r["plates"], r["failed"], r["lost"], f"{r['fresh_s']:.1f}", f"{r['replan_s']:.1f}",
            r["not_started"], r["new"], r["moved"], r["removed"], r["changed"], r["touched"],
            r["late_before"], r["late_after"], r["schedule"])))
    print("changed: plates new, removed, moved to another printer or start; touched: plates kept under their id "
          "whose contents changed (0 expected)")
    return 0


if __name__ == "__main__":
    sys.exit(bench_command(sys.argv[1:]))
