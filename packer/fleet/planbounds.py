"""Lower bounds of a fleet plan: plates per technology and material, lateness, finish.

Read off the planner's view of the fleet (:class:`packer.fleet.view.FleetView`).
"""

from __future__ import annotations

import math
from datetime import datetime, timedelta

from packer.fleet.bounds import l2_bound, makespan_bound
from packer.fleet.calendar import printer_free_after
from packer.fleet.duebounds import load_bounds
from packer.fleet.records import copy_key
from packer.fleet.scoring import copy_weight
from packer.fleet.timemodel import copy_work_bounds, plate_time
from packer.fleet.view import FleetView

__all__ = ["plan_bounds", "finish_bound"]


def plan_bounds(view: FleetView, pool, plates) -> dict:
    """Plate bounds per (technology, material) and the finishing-time bound."""
    eligible = view.eligible
    groups: dict = {}
    for c in pool:
        if not eligible[copy_key(c)]:
            continue
        tech = view.printers[eligible[copy_key(c)][0]].profile.technology
        groups.setdefault((tech, c.material), []).append(c)
    used: dict = {}
    for p in plates:
        key = (view.tech_of[p.printer], p.material)
        used[key] = used.get(key, 0) + 1
    out: dict = {"plates": {}}
    for (tech, mat), cs in sorted(groups.items()):
        profs = {}
        for c in cs:
            for i in eligible[copy_key(c)]:
                profs.setdefault(view.printers[i].profile.name, i)
        best = None
        for prof, i in sorted(profs.items()):
            w = [min(1.0, view.hint1(i, c)) for c in cs]
            b = l2_bound(w, 1.0)
            best = b if best is None else min(best, b)
        n = used.get((tech, mat), 0)
        out["plates"][f"{tech}/{mat}"] = {"bound": best, "used": n,
                                          "gap": (n - best) / best if best else 0.0}
    out["finish_bound"] = _finish_bound(view, pool, eligible, out["plates"])
    done = _earliest_done(view, pool, eligible)
    late = [(w * (t - due).total_seconds() / 3600) for t, due, w in done.values() if t > due]
    out["lateness_bound_h"], out["surely_late_orders"] = sum(late), len(late)
    out["load"] = load = load_bounds(view, pool, {o: v for o, v in done.items() if v[0] > v[1]})
    # the strongest of the two: the per-copy bounds above are valid too
    load["finish_bound"] = max(x for x in (load["finish_bound"], out["finish_bound"]) if x is not None)
    return out


def _earliest_done(view: FleetView, pool, eligible) -> dict:
    """order -> (earliest completion, due, weight) by the per-copy bound.

    An order is complete at the earliest when its slowest copy, alone on a plate of
    the best printer for it, started at that printer's first shift moment, has been
    cleared inside a shift.
    """
    done: dict = {}
    alone: dict = {}        # (printer, kind) -> when a plate of that copy alone is cleared
    for c in pool:
        best = None
        for i in eligible[copy_key(c)]:
            if (i, c.kind) not in alone:
                est = plate_time(view.printers[i].profile, [view.stats[c.kind]])
                end = view.ready[i] + timedelta(seconds=est.machine_s)
                alone[i, c.kind] = printer_free_after(view.cal, end, est.clear_s)
            free = alone[i, c.kind]
            best = free if best is None else min(best, free)
        if best is None:
            continue
        prev = done.get(c.order)
        w = copy_weight(c)
        done[c.order] = (max(best, prev[0]) if prev else best, c.due, max(w, prev[2]) if prev else w)
    return done


def _finish_bound(view: FleetView, pool, eligible, plate_bounds) -> datetime:
    """Max over technologies of the parallel-machine load bound with per-copy work lower bounds."""
    origin = view.start
    best = 0.0
    by_tech: dict = {}
    cache: dict = {}
    for c in pool:
        el = eligible[copy_key(c)]
        if el:
            by_tech.setdefault(view.printers[el[0]].profile.technology, []).append(c)
    for tech, cs in by_tech.items():
        idxs = [i for i, p in enumerate(view.printers) if p.profile.technology == tech]
        ready = [(view.ready[i] - origin).total_seconds() for i in idxs]
        total, longest, per_plate, tallest = 0.0, 0.0, math.inf, 0.0
        for c in cs:
            works = [_work_bounds(view, cache, i, c.kind) for i in eligible[copy_key(c)]]
            total += min(w[0] for w in works)
            longest = max(longest, min(w[1] for w in works))
            own = min(w[2] for w in works)
            per_plate, tallest = min(per_plate, own), max(tallest, own)
        # every plate costs at least the smallest per-plate share, the plate of the copy with
        # the largest one at least that (a plate's time is its copies' additive shares plus
        # the largest per-plate share among them); plates >= their bound, and >= the printers
        # that take part (each runs one at least)
        n_plates = max(1, sum(v["bound"] or 0 for k, v in plate_bounds.items() if k.startswith(tech + "/")))
        total += tallest + per_plate * (n_plates - 1)
        best = max(best, makespan_bound(total, ready, longest_s=longest, plate_s=per_plate,
                                        plates_counted=n_plates))
    # the last plate is cleared inside a shift: the day cannot end at night
    min_clear = min(p.profile.time.clear_s for p in view.printers)
    bound = origin + timedelta(seconds=best)
    return max(bound, printer_free_after(view.cal, bound - timedelta(seconds=min_clear), min_clear))


def _work_bounds(view: FleetView, cache: dict, i: int, kind: int) -> tuple[float, float, float]:
    """:func:`copy_work_bounds` of a kind on printer ``i``'s profile, cached by (profile, kind)."""
    prof = view.printers[i].profile
    if (prof.name, kind) not in cache:
        cache[prof.name, kind] = copy_work_bounds(prof, view.stats[kind])
    return cache[prof.name, kind]


def finish_bound(view: FleetView, pool) -> datetime:
    """The finishing bound of ``pool`` on the view's fleet, the strongest of the bounds above
    (the due-aware load bound counting the closed nights, or the per-copy one)."""
    return plan_bounds(view, pool, ())["load"]["finish_bound"]
