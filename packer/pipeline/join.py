"""Component plans joined into one fleet plan (:mod:`packer.pipeline.components`).

What is fleet-wide is computed again over the joined plan, not added up: weighted
lateness, late orders (an order may have copies in two components: it is late when
its last plate is), the finish (the last plate of all), and the bounds (read off a
view of the whole fleet, as the planner reads them). Counts of work (layout calls,
merges, work-clock seconds) are sums; cuts and safety nets are listed with their
component. Each component's own statistics are kept under ``components``.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import timedelta
from typing import Sequence

from packer.fleet.check import check_plan
from packer.fleet.planbounds import plan_bounds
from packer.fleet.planner import FleetResult
from packer.fleet.records import PlannerSettings, copy_key
from packer.fleet.scoring import late_orders, score_plan
from packer.fleet.view import FleetView

__all__ = ["join_results", "SUMMED_STATS"]

#: Statistics of the component plans that add up to the whole plan's.
SUMMED_STATS = ("fits_calls", "merged_plates", "final_merged_plates", "emptied_low_plates", "kept_low_plates",
                "work_clock_s", "fits_s")


def join_results(whole, units: Sequence, results: Sequence[FleetResult], *, screened: tuple,
                 wall_s: float) -> FleetResult:
    """One :class:`~packer.fleet.records.FleetResult` from the components' results.

    ``whole`` is the unit of the whole job (all copies and printers), ``units`` and
    ``results`` the components' in the same order, ``screened`` the whole fleet's
    screening ``(eligible, unplaced, layouts)`` made with the printers sorted by name,
    ``wall_s`` the wall seconds the components took (a wall-clock figure: run.json).
    The joined plan is checked again by :func:`~packer.fleet.check.check_plan`.
    """
    eligible, unplaced, layouts = screened
    job = whole.job
    plates = _renumber([p for r in results for p in r.plates])
    unplaced = tuple(unplaced) + tuple(u for r in results for u in r.unplaced)
    printers = sorted(whole.printers, key=lambda p: p.name)
    check_plan(plates, unplaced, whole.copies, printers, calendar=job.calendar, start=job.start)
    view = FleetView(printers, whole.stats, job.calendar, job.start, PlannerSettings(), layouts, eligible)
    pool = [c for c in whole.copies if eligible.get(copy_key(c))]
    return FleetResult(plates=plates, unplaced=unplaced, bounds=plan_bounds(view, pool, plates),
                       stats=_joined_stats(whole, units, results, plates, unplaced, wall_s))


def _label(unit) -> str:
    names = [p.name for p in unit.printers]
    return ", ".join(names) if len(names) <= 3 else f"{names[0]} .. {names[-1]} ({len(names)} printers)"


def _joined_stats(whole, units, results, plates, unplaced, wall_s: float) -> dict:
    start = whole.job.start
    lat, finish, _ = score_plan(plates, start)
    out = {"copies": len(whole.copies), "printers": len(whole.printers), "plates": len(plates),
           "unplaced": len(unplaced), "weighted_lateness_h": lat / 3600.0,
           "late_orders": len(late_orders(plates)),
           "finish": start + timedelta(seconds=finish) if plates else start}
    for key in SUMMED_STATS:
        out[key] = sum(r.stats.get(key) or 0 for r in results)
    out["budget_cuts"] = [f"{_label(u)}: {c}" for u, r in zip(units, results) for c in r.stats.get("budget_cuts", [])]
    out["safety_nets"] = [f"{_label(u)}: {n}" for u, r in zip(units, results) for n in r.stats.get("safety_nets", [])]
    out["deterministic"] = all(r.stats.get("deterministic", True) for r in results)
    out["planning_s"] = wall_s
    out["components"] = [{"printer_names": [p.name for p in u.printers],
                          "budget_s": u.seconds, **r.stats} for u, r in zip(units, results)]
    return out


def _renumber(plates) -> tuple:
    """Plate ids ``P01``... over the joined plan, in (start, printer) order as the planner numbers them."""
    order = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(order))))
    return tuple(replace(p, id=f"P{k + 1:0{width}d}") for k, p in enumerate(order))
