"""Consolidation: empty the emptiest plates of a technology and material into others.

List scheduling cuts plates short for due times and spreads work over the printers that
are free soonest, so a day ends with plates a planner would fold into others by hand.
This step takes the plates of one technology and material, emptiest first, and shares
each one's copies out over the other plates of that group (any printer and profile that
may print them): each partner keeps its own copies and takes as many of the plate's
copies as the layouts' pool fill adds. The change is kept when every copy found a place,
no order gets later against its due time than before this step, and the day's finish
stays within ``finish_cap`` (the plate removed is what a later finish inside the cap
buys). Only layouts with a pool fill take part (filament and resin plates); powder
builds keep their contents.
"""

from __future__ import annotations

from datetime import datetime

from packer.fleet.budget import Budget
from packer.fleet.lowfill import order_done, order_later, share_out
from packer.fleet.view import FleetView

__all__ = ["consolidate", "PARTNERS"]

#: partners asked per plate (a pool fill each), those with the most room first
PARTNERS = 4


def consolidate(view: FleetView, budget: Budget, plates, *, deadline: float, finish_cap: datetime):
    """Empty plates into their group's other plates while no order gets later.

    Parameters
    ----------
    view, budget
        The planner's view of the fleet and its budget.
    plates : list of PlannedPlate
        Unique ids.
    deadline : float
        Work-clock time (s) after which no plate is tried.
    finish_cap : datetime
        The day may end no later than this (and no later than it does, when that is later).

    Returns
    -------
    plates, removed
    """
    cur = list(plates)
    before = order_done(cur)
    cap = max([finish_cap] + [p.free for p in cur])
    tried: set = set()
    removed = 0
    while not budget.past(deadline, "consolidation cut short"):
        b = _next_plate(view, cur, tried)
        if b is None:
            break
        tried.add(b.id)
        out = _empty_into(view, budget, cur, b, before, cap, deadline)
        if out is not None:
            cur = out
            removed += 1
    return cur, removed


def _next_plate(view: FleetView, cur, tried):
    """The plate holding the least footprint area (mm², so a small plate's few copies count as
    few on a larger one) not tried yet whose layouts pool-fill and that has partners, or None."""
    cands = [p for p in cur if p.id not in tried and view.traits(view.index[p.printer]).pool_fill
             and any(_partner(view, a, p) for a in cur)]
    return min(cands, key=lambda p: (_area(view, p), p.start, p.id), default=None)


def _area(view: FleetView, p) -> float:
    return sum(view.stats[c.kind].footprint_mm2 for c in p.copies)


def _partner(view: FleetView, a, b) -> bool:
    return a.id != b.id and a.material == b.material and view.tech_of[a.printer] == view.tech_of[b.printer] \
        and view.traits(view.index[a.printer]).pool_fill


def _room(view: FleetView, a, reach: dict) -> float:
    """Hint share a plate may still take: the fullest plate of its profile (what the layouts
    reached on it) less its own fill."""
    return reach.get(view.printer_of(a).profile.name, 0.0) - view.fill_of(a)


def _reach(view: FleetView, cur) -> dict:
    """Profile name -> the largest hint fill of a plate of it in ``cur``."""
    out: dict = {}
    for p in cur:
        name = view.printer_of(p).profile.name
        out[name] = max(out.get(name, 0.0), view.fill_of(p))
    return out


def _empty_into(view: FleetView, budget: Budget, cur, b, before, cap: datetime, deadline: float):
    """The plates with ``b``'s copies shared out over its partners, or None (some copy found no
    place, an order got later, the day ended after ``cap``, or the budget ran out)."""
    reach = _reach(view, cur)
    room = {a.id: _room(view, a, reach) for a in cur if _partner(view, a, b)}
    partners = sorted((a for a in cur if a.id in room and room[a.id] > 0), key=lambda a: (-room[a.id], a.start, a.id))
    partners = partners[:PARTNERS]
    # the copies b holds must have room in the partners by the hint, or the calls are wasted
    if sum(room[a.id] for a in partners) < view.fill_of(b) * _share_ratio(view, b, partners):
        return None
    changed, left, _ = share_out(view, budget, b, partners, deadline, "consolidation cut short")
    if left:
        return None
    timed = view.retime([changed.get(p.id, p) for p in cur if p.id != b.id])
    if order_later(before, timed) is not None or max(p.free for p in timed) > cap:
        return None
    return timed


def _share_ratio(view: FleetView, b, partners) -> float:
    """How much more room ``b``'s copies need on the partners' plates than on its own (a smaller
    plate holds the same copies at a larger share); 1 when there are no partners."""
    if not partners:
        return 1.0
    own = view.fill_of(b)
    if own <= 0:
        return 1.0
    i = view.index[partners[0].printer]
    return sum(view.hint1(i, c) for c in b.copies) / own
