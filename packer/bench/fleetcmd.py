"""``packer bench fleet``: plan generated days and print how the plans compare with their bounds.

The benchmark uses the stand-in layout service of :mod:`packer.bench.standin`
(skyline packing of rectangular footprints, exact for them), not the nesting
engine: it measures the fleet planner, and the table header says so.
"""

from __future__ import annotations

import argparse
import sys
import time

from packer.clihelp import command_parser
from packer.bench.daygen import bound_gap, box_hint, day_budget_s, make_day
from packer.bench.standin import ShelfLayouts
from packer.fleet.planner import PlannerSettings, plan_fleet

__all__ = ["bench_command", "bench_day"]


def _parser() -> argparse.ArgumentParser:
    p = command_parser("packer bench fleet", "Plan generated production days with stand-in layouts "
                       "(rectangles) and compare with lower bounds.",
                       ["packer bench fleet --copies 200 --seconds 20",
                        "packer bench fleet --copies 200 1000 2000 --repeat   # also checks determinism",
                        "packer bench fleet --copies 1000 --small"])
    p.add_argument("--copies", type=int, nargs="+", default=[200, 1000, 2000],
                   help="copies per generated day (one row each)")
    p.add_argument("--printers", type=int, default=12, help="printers in the fleet")
    p.add_argument("--seconds", type=float, default=None,
                   help="planning budget per day (default: 60 s up to 1,000 copies, else 180 s)")
    p.add_argument("--seed", type=int, default=0, help="seed of the day generator and the solver")
    p.add_argument("--repeat", action="store_true", help="plan each day twice and check the plans are equal")
    p.add_argument("--small", action="store_true", help="only small parts (clips and knobs)")
    return p


#: Work-clock charge of one stand-in layout call (skyline packing of rectangles), per call
#: and per copy (s), of the order measured on the development machine.
STANDIN_CALL_S, STANDIN_COPY_S = 0.005, 0.0002


def bench_day(copies: int, printers: int, seconds: float, seed: int, *, small: bool = False) -> dict:
    """Generate one day, plan it and return the figures of one table row."""
    day = make_day(copies=copies, printers=printers, seed=seed, small=small)
    # the stand-in reports its work like the real engines do: a fixed charge per call and copy
    layouts = ShelfLayouts(day.parts, call_s=STANDIN_CALL_S, copy_s=STANDIN_COPY_S)
    t0 = time.monotonic()
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar,
                     start=day.start, layouts=layouts, seconds=seconds, seed=seed, settings=PlannerSettings())
    wall = time.monotonic() - t0
    pb = res.bounds["plates"]
    used = sum(v["used"] for v in pb.values())
    bound = sum(v["bound"] for v in pb.values())
    flat = {k: v for k, v in pb.items() if k.startswith(("filament", "resin"))}
    hint = box_hint(day.parts)
    by_name = {p.name: p for p in day.printers}
    flat_plates = [p for p in res.plates if by_name[p.printer].profile.technology != "powder"]
    fill = sum(hint(by_name[p.printer], p.copies) for p in flat_plates) / max(1, len(flat_plates))
    finish_h = (res.stats["finish"] - day.start).total_seconds() / 3600
    bound_h = (res.bounds["finish_bound"] - day.start).total_seconds() / 3600
    return {"copies": len(day.copies), "printers": len(day.printers), "plates": used,
            "bound": bound, "gap": bound_gap(used, bound),
            "flat_used": sum(v["used"] for v in flat.values()),
            "flat_bound": sum(v["bound"] for v in flat.values()),
            "flat_fill": fill,
            "surely_late": res.bounds["surely_late_orders"],
            "lateness_bound_h": res.bounds["lateness_bound_h"],
            "late_orders": res.stats["late_orders"],
            "orders": len({c.order for c in day.copies}),
            "lateness_h": res.stats["weighted_lateness_h"],
            "finish_h": finish_h, "finish_bound_h": bound_h,
            "unplaced": len(res.unplaced), "wall_s": wall, "fits_calls": res.stats["fits_calls"],
            "status": res.stats["schedule"].get("status"),
            "deterministic": res.stats["deterministic"], "safety_nets": res.stats["safety_nets"],
            "band_saved_h": res.stats["height_bands"]["saved_machine_h"],
            "signature": [(p.id, p.printer, p.start, tuple((c.order, c.part, c.copy) for c in p.copies))
                          for p in res.plates]}


def bench_command(argv: list[str]) -> int:
    """Run the fleet benchmark; return the exit code (0, or 1 when a repeat differed)."""
    args = _parser().parse_args(argv)
    out = sys.stdout
    out.write("fleet benchmark: generated days (rectangular footprints%s), layouts by the "
              "skyline-packing stand-in, not the nesting engine; timings on a shared 2-core machine "
              "are noisy\n" % (", small parts only" if args.small else ""))
    out.write(f"{'copies':>6} {'prn':>3} {'plates':>6} {'bound':>5} {'gap':>6} {'flat':>4} {'bound':>5} "
              f"{'gap':>6} {'fill':>5} {'late':>4} {'sure':>4} {'orders':>6} {'w.late h':>8} "
              f"{'>= h':>7} {'finish h':>8} {'>= h':>6} {'bands':>6} {'fits':>5} {'solver':>8} {'plan s':>6}\n")
    code = 0
    for n in args.copies:
        seconds = args.seconds if args.seconds is not None else day_budget_s(n)
        row = bench_day(n, args.printers, seconds, args.seed, small=args.small)
        fg = bound_gap(row["flat_used"], row["flat_bound"])
        out.write(f"{row['copies']:>6} {row['printers']:>3} {row['plates']:>6} {row['bound']:>5} "
                  f"{row['gap']:>6.1%} {row['flat_used']:>4} {row['flat_bound']:>5} {fg:>6.1%} "
                  f"{row['flat_fill']:>5.0%} {row['late_orders']:>4} {row['surely_late']:>4} "
                  f"{row['orders']:>6} {row['lateness_h']:>8.1f} {row['lateness_bound_h']:>7.1f} "
                  f"{row['finish_h']:>8.1f} {row['finish_bound_h']:>6.1f} {row['band_saved_h']:>6.1f} "
                  f"{row['fits_calls']:>5} "
                  f"{str(row['status']):>8} {row['wall_s']:>6.1f}\n")
        out.flush()
        if args.repeat:
            again = bench_day(n, args.printers, seconds, args.seed, small=args.small)
            same = again["signature"] == row["signature"]
            note = "" if row["deterministic"] and again["deterministic"] else \
                " (wall-clock safety nets fired: %s)" % "; ".join(sorted(set(row["safety_nets"] + again["safety_nets"])))
            out.write(f"       repeat with seed {args.seed}: {'same plan' if same else 'DIFFERENT plan'}{note}\n")
            code |= 0 if same else 1
    out.write("plates/bound/gap: all plates against the area (powder: volume) bound per technology and "
              "material; flat: filament and resin plates only; fill: mean capacity-hint share of the "
              "flat plates; late: late orders; sure: orders late in every plan; w.late: weighted "
              "lateness (priority x h) and its lower bound; finish: hours from the start until the "
              "last plate is cleared, and its bound; bands: machine hours saved by height bands "
              "against mixing heights (capacity-hint plates); fits: layout checks asked\n")
    return code


if __name__ == "__main__":
    raise SystemExit(bench_command(sys.argv[1:]))
