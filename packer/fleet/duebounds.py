"""Due-aware, calendar-aware load bounds of a fleet plan (issue 19).

For each group of printers (a technology; inside it, each material's printers) and
each due time ``d``: the machine work the copies of the orders due by ``d`` bring at
least, against the work the group's printers can have cleared by ``d``
(:class:`packer.fleet.loadbounds.Capacity`: shift hours plus, per closed period, at
most one plate's machine time). From it, by the single-machine relaxation
(the group pooled into one machine of that capacity):

- orders late in every plan: Moore's algorithm on the orders' work and due times;
- weighted lateness no plan avoids: the transportation bound;
- finish: the first moment the group's capacity reaches all its work.

Work of one copy, ``ell = add + share * per_plate`` on its cheapest profile: ``add``
is what the copy adds to any plate's time, ``per_plate`` what a plate whose tallest
copy it is costs beyond that (warm-up, clear, layer terms; see
:func:`packer.fleet.timemodel.copy_work_bounds`), ``share`` its plate share (grown
footprint over the nesting region for flat plates, the layout service's
``capacity``, which sums to at most 1 on any plate because the grown footprints are
disjoint inside the region; solid volume over the chamber for powder builds). A
plate's time is ``sum(add) + max(per_plate) >= sum(add) + sum(share * per_plate)``
since the shares on a plate sum to at most 1, so the ``ell`` of a plate's copies
add up to at most its time. An order is done when its last plate is through
post-processing, at least the profile's step durations after it is cleared, so
its copies must be cleared by ``due - post``.

The night cap of a printer is a bound on any one plate's machine time there: the
largest per-plate machine term of a copy it may print (for powder: a build as tall
as the chamber) plus Dantzig's fractional knapsack of the copies' additive terms
over a plate share of 1 (per material, since a plate holds one material).
"""

from __future__ import annotations

import math
from datetime import timedelta

from packer.fleet.calendar import shift_windows
from packer.fleet.loadbounds import (Capacity, capacity_curve, fractional_knapsack, moore_late_jobs,
                                     transport_tardiness_bound)
from packer.fleet.records import copy_key
from packer.fleet.scoring import copy_weight
from packer.fleet.view import FleetView

__all__ = ["load_bounds", "METHOD"]

METHOD = ("due-aware load per printer group: shift hours plus one plate per closed period; single-machine "
          "relaxation: Moore's algorithm (late orders), transportation bound (weighted lateness)")


def _share(view: FleetView, i: int, c) -> float:
    """Plate share of copy ``c`` on printer ``i`` that sums to at most 1 on any plate."""
    prof = view.printers[i].profile
    if prof.technology == "powder":
        x, y, z = prof.build_volume
        return min(1.0, view.stats[c.kind].volume_mm3 / (x * y * z))
    return min(1.0, view.hint1(i, c))


class _Work:
    """Per-copy work terms on each eligible printer, cached by (profile, kind)."""

    def __init__(self, view: FleetView) -> None:
        self.view = view
        self.cache: dict = {}

    def terms(self, i: int, c) -> tuple[float, float, float]:
        """(additive s, per-plate s including clear, share) of copy ``c`` on printer ``i``."""
        prof = self.view.printers[i].profile
        key = (prof.name, c.kind)
        if key not in self.cache:
            add, machine_pp = self.view.parts(i, c)
            self.cache[key] = (add, machine_pp + prof.time.clear_s, _share(self.view, i, c))
        return self.cache[key]

    def ell(self, c) -> float:
        return min(a + s * p for a, p, s in (self.terms(i, c) for i in self.view.eligible[copy_key(c)]))


def _night_caps(view: FleetView, pool, idxs) -> list[float]:
    """Upper bound on one plate's machine time on each printer of ``idxs`` (s)."""
    kinds: dict = {}
    for c in pool:
        for i in view.eligible[copy_key(c)]:
            kinds.setdefault((i, c.material), {}).setdefault(c.kind, [c, 0])[1] += 1
    out = []
    for i in idxs:
        prof = view.printers[i].profile
        best = 0.0
        for m in view.printers[i].materials:
            got = kinds.get((i, m))
            if not got:
                continue
            parts = [(view.parts(i, c), _share(view, i, c), n) for c, n in got.values()]
            per = (view.powder_per(prof, prof.build_volume[2]) if prof.technology == "powder"
                   else max(p[1] for p, _, _ in parts))
            knap = fractional_knapsack([p[0] for p, _, _ in parts], [s for _, s, _ in parts],
                                       [n for _, _, n in parts], 1.0)
            best = max(best, per + knap)
        out.append(best if best > 0 else math.inf)
    return out


def _curve(view: FleetView, idxs, nights, need_s: float) -> Capacity:
    """The group's capacity curve with enough days of shifts to hold ``need_s`` of work."""
    origin = view.start
    ready = [(view.ready[i] - origin).total_seconds() for i in idxs]
    days = 7
    while True:
        wins = [((a - origin).total_seconds(), (b - origin).total_seconds())
                for a, b in shift_windows(view.cal, origin, days)]
        cap = capacity_curve(wins, ready, nights)
        if cap.total >= need_s or days > 800:
            return cap
        days *= 2


def _groups(view: FleetView, pool) -> dict:
    """Group name -> (printer indices, copies): each technology, and each of its materials
    when it has several."""
    by_tech: dict = {}
    for c in pool:
        by_tech.setdefault(view.printers[view.eligible[copy_key(c)][0]].profile.technology, []).append(c)
    out = {}
    for tech, cs in sorted(by_tech.items()):
        out[tech] = (sorted(i for i, p in enumerate(view.printers) if p.profile.technology == tech), cs)
        mats = sorted({c.material for c in cs})
        for m in mats if len(mats) > 1 else ():
            mine = [c for c in cs if c.material == m]
            out[f"{tech}/{m}"] = (sorted({i for c in mine for i in view.eligible[copy_key(c)]}), mine)
    return out


def _orders(view: FleetView, work: _Work, cs) -> dict:
    """order -> [work s, clear-by s on the plan clock, weight] for the copies ``cs``."""
    out: dict = {}
    for c in cs:
        post = min(sum(st.duration_s for st in view.printers[i].profile.post_processing)
                   for i in view.eligible[copy_key(c)])
        row = out.setdefault(c.order, [0.0, math.inf, 0.0])
        row[0] += work.ell(c)
        row[1] = min(row[1], (c.due - view.start).total_seconds() - post)
        row[2] = max(row[2], copy_weight(c))
    return out


def _plate_work(work: _Work, view: FleetView, cs) -> float:
    """``sum(add) + least per-plate term x ceil(sum of the least shares)`` (each plate costs at
    least the smallest per-plate term; plates >= the shares' sum, rounded up)."""
    add, per, share = 0.0, math.inf, 0.0
    for c in cs:
        t = [work.terms(i, c) for i in view.eligible[copy_key(c)]]
        add += min(x[0] for x in t)
        per = min(per, min(x[1] for x in t))
        share += min(x[2] for x in t)
    return add + (per * math.ceil(share - 1e-9) if cs else 0.0)


def _tightest(orders: dict, cap: Capacity) -> tuple[float, float, float]:
    """(clear-by time, work due by it, capacity by it) of the highest load ratio."""
    best = (0.0, 0.0, 0.0, -1.0)
    load = 0.0
    for w, d, _ in sorted(orders.values(), key=lambda r: r[1]):
        load += w
        c = cap.at(d)
        ratio = load / c if c > 0 else math.inf
        if ratio > best[3]:
            best = (d, load, c, ratio)
    return best[:3]


def _group_bounds(view: FleetView, work: _Work, pool, idxs, cs, forced: set) -> dict:
    orders = _orders(view, work, cs)
    total = max(sum(r[0] for r in orders.values()), _plate_work(work, view, cs))
    nights = _night_caps(view, pool, idxs)
    cap = _curve(view, idxs, nights, total)
    free = [o for o in sorted(orders) if o not in forced]
    late = moore_late_jobs([orders[o][0] for o in free], [cap.at(orders[o][1]) for o in free])
    rows = [orders[o] for o in sorted(orders)]
    lat = transport_tardiness_bound([r[0] for r in rows], [r[1] for r in rows], [r[2] for r in rows], cap)
    fin = cap.earliest(total)
    d, load, room = _tightest(orders, cap)
    finite = [x for x in nights if math.isfinite(x)]
    return {"printers": len(idxs), "orders": len(orders), "work_h": total / 3600,
            "night_cap_h": [min(finite) / 3600, max(finite) / 3600] if finite else None,
            "late_orders": len(late), "lateness_bound_h": lat / 3600,
            "finish_bound": None if fin is None else view.start + timedelta(seconds=fin),
            "tightest_due": view.start + timedelta(seconds=d), "due_work_h": load / 3600,
            "due_capacity_h": room / 3600, "_orders": orders, "_cap": cap}


def load_bounds(view: FleetView, pool, forced: dict) -> dict:
    """The due-aware load bounds (see the module docstring).

    Parameters
    ----------
    view, pool
        The planner's fleet view and the copies that some printer can print.
    forced
        order -> (earliest completion, due, weight) of the orders that are late in
        every plan by the per-copy bound; they count as late and are left out of
        Moore's algorithm.

    Returns
    -------
    dict
        ``surely_late_orders``, ``lateness_bound_h``, ``finish_bound`` (the strongest
        of these and the per-copy bounds), ``method`` and per group the figures.
    """
    work = _Work(view)
    groups = {}
    for name, (idxs, cs) in _groups(view, pool).items():
        groups[name] = _group_bounds(view, work, pool, idxs, cs, set(forced))
    late = len(forced) + max((g["late_orders"] for g in groups.values()), default=0)
    lat = max([sum(w * (t - d).total_seconds() / 3600 for t, d, w in forced.values())]
              + [g["lateness_bound_h"] for g in groups.values()] + [_split_sum(groups)])
    ends = [g["finish_bound"] for g in groups.values() if g["finish_bound"] is not None]
    for g in groups.values():
        g.pop("_orders")
        g.pop("_cap")
    return {"method": METHOD, "surely_late_orders": late, "lateness_bound_h": lat,
            "finish_bound": max(ends) if ends else None, "groups": groups}


def _split_sum(groups: dict) -> float:
    """Sum over technologies (disjoint printers) of the transportation bound with each
    order's weight split evenly over the technologies it needs (valid: an order's
    lateness is at least its lateness on each technology)."""
    techs = {k: g for k, g in groups.items() if "/" not in k}
    count: dict = {}
    for g in techs.values():
        for o in g["_orders"]:
            count[o] = count.get(o, 0) + 1
    if all(n == 1 for n in count.values()):
        return sum(g["lateness_bound_h"] for g in techs.values())
    total = 0.0
    for g in techs.values():
        rows = [(r[0], r[1], r[2] / count[o]) for o, r in sorted(g["_orders"].items())]
        total += transport_tardiness_bound([r[0] for r in rows], [r[1] for r in rows], [r[2] for r in rows],
                                           g["_cap"]) / 3600
    return total
