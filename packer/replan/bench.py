"""``packer bench replan``: replan a generated day after one failed plate and time it.

A day of ``--copies`` copies (:func:`packer.fleet.daygen.make_day`) is planned
fresh with the fleet planner; at ``--hours`` after the start, the printing
plate with the most copies fails. The replan (events checked, frozen plates
kept, failed copies planned again, all plates not started re-sequenced) is
timed and compared with the fresh plan. Layouts come from the stand-in of
the fleet benchmark (skyline packing of rectangular footprints, exact for
them), not the nesting engine, and nothing is written to disk: the table
measures the replanning. Timings on a shared machine are noisy.
"""

from __future__ import annotations

import time
from datetime import timedelta

from packer.clihelp import command_parser
from packer.fleet.daygen import box_can_print, box_hint, make_day, shelf_fits
from packer.fleet.planner import plan_fleet
from packer.replan.changes import compare
from packer.replan.core import ReplanSettings, replan
from packer.replan.events import Failed
from packer.replan.state import apply_events, key_of, state_of_fleet

__all__ = ["bench_command", "bench_replan"]


def bench_replan(*, copies: int, printers: int, seed: int, fresh_s: float, hours: float,
                 settings: ReplanSettings) -> dict:
    """One row: plan a day, fail its fullest printing plate, replan; figures of the replan."""
    day = make_day(copies=copies, printers=printers, seed=seed)
    fits, hint, can = shelf_fits(day.parts), box_hint(day.parts), box_can_print(day.parts)
    t0 = time.monotonic()
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar, start=day.start,
                     fits=fits, capacity_hint=hint, can_print=can, seconds=fresh_s, seed=seed)
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
    done = replan(sit, printers=day.printers, stats=day.stats, calendar=day.calendar, fits=fits,
                  capacity_hint=hint, can_print=can, settings=settings)
    wall = time.monotonic() - t0
    ch = compare(state, done.state)
    old = {p.id: {key_of(c) for c in p.copies} for p in state.plates}
    touched = sum(1 for p in done.state.plates if p.id in old and p.id != victim.id
                  and {key_of(c) for c in p.copies} != old[p.id])
    return {"copies": len(day.copies), "plates": len(state.plates), "failed": victim.id,
            "lost": len(victim.copies), "fresh_s": fresh, "replan_s": wall,
            "not_started": len(sit.planned), "new": len(ch.new_plates), "moved": len(ch.moved_plates),
            "removed": len(ch.removed_plates), "changed": ch.plates_changed, "touched": touched,
            "late_before": sum(1 for _, due, t, _n in ch.orders if t is None or t > due),
            "late_after": len(ch.late_now), "schedule": done.stats["schedule"].get("kept", "-")}


def bench_command(argv: list[str]) -> int:
    ap = command_parser("packer bench replan", __doc__.splitlines()[0],
                        ["packer bench replan --copies 200 --fresh-seconds 20",
                         "packer bench replan --copies 1000 --hours 3"])
    ap.add_argument("--copies", type=int, nargs="+", default=[1000], help="copies per generated day (one row each)")
    ap.add_argument("--printers", type=int, default=12, help="printers in the generated fleet")
    ap.add_argument("--seed", type=int, default=0, help="seed of the day generator and the planner")
    ap.add_argument("--fresh-seconds", type=float, default=60.0, help="budget of the fresh plan")
    ap.add_argument("--hours", type=float, default=3.0, help="the failure, in hours after the start")
    ap.add_argument("--seconds", type=float, default=10.0, help="fleet-planner budget of the replan")
    ap.add_argument("--schedule-seconds", type=float, default=5.0, help="CP-SAT sequencing budget of the replan")
    args = ap.parse_args(argv)
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
    import sys
    sys.exit(bench_command(sys.argv[1:]))
