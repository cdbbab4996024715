"""No plate that a merge could remove: empty under-filled plates into others, or say why not.

After the plan is built, each plate below a fill threshold (flat plates: area share of
the plate; powder builds: volume density of the build) is tried, emptiest first:

1. moved whole onto one partner plate of the same technology and material (on the
   partner's printer or its own, across printers and profiles), confirmed by ``fits``;
2. spread over several partners: each partner keeps its copies and takes as many of
   the plate's copies as the pool fill adds (where the layouts have one: filament and resin).

A change is kept only when no order gets later against its due time than in the plan
before this step (an order on time stays on time, a late one gets no later) and the
plate is gone; the day may end later (the plate removed is what that buys). A plate that stays gets a one-line reason: the order a merge would
make later ("kept: order BL-1044 is due at 11:00"), the partners being full, no
partner at all, or the budget.
"""

from __future__ import annotations

import math
from dataclasses import replace
from datetime import datetime

from packer.fleet.budget import Budget
from packer.fleet.records import PlannedPlate, copy_key
from packer.fleet.view import FleetView

__all__ = ["LOW_FILL", "LOW_DENSITY", "BUDGET_NOTE", "plate_fill", "fill_threshold", "empty_low_plates", "order_done", "order_later", "plate_area", "share_out"]

#: flat plates below this share of the plate's area are emptied into others or explained
LOW_FILL = 0.30

#: powder builds below this volume density (part volume over the used build volume) likewise;
#: our own threshold, well below the 10-20 % of a well-packed build (common practice, no source)
LOW_DENSITY = 0.03

#: the reason a plate stays when the budget stopped the step before every way was tried
BUDGET_NOTE = "kept: the planning budget ran out before it could be merged"

#: partners tried for a whole-plate move (the cheapest ones by hint room first)
MOVE_PARTNERS = 3


def plate_area(profile) -> float:
    """Area of the profile's plate (mm²): rectangle, circle or polygon."""
    x, y = profile.build_volume[:2]
    if profile.plate_shape == "circle":
        return math.pi * min(x, y) ** 2 / 4
    if profile.plate_shape == "polygon":
        pts = profile.plate_points
        return abs(sum(a[0] * b[1] - b[0] * a[1] for a, b in zip(pts, pts[1:] + pts[:1]))) / 2
    return x * y


def plate_fill(profile, plate: PlannedPlate, stats, *, packs_volume: bool = False) -> float:
    """Area share of the plate (flat) or, when the layouts pack a volume (powder), volume
    density of the build (over the layout's build height), 0..1."""
    if packs_volume:
        x, y, _ = profile.build_volume
        height = plate.layout.build_height_mm or max(stats[c.kind].height_mm for c in plate.copies)
        return sum(stats[c.kind].volume_mm3 for c in plate.copies) / (x * y * height)
    return sum(stats[c.kind].footprint_mm2 for c in plate.copies) / plate_area(profile)


def fill_threshold(packs_volume: bool) -> float:
    """:data:`LOW_DENSITY` for builds packed in a volume, :data:`LOW_FILL` for flat plates."""
    return LOW_DENSITY if packs_volume else LOW_FILL


def order_done(plates) -> dict[str, tuple[datetime, datetime]]:
    """Order -> (completion, due): an order is done when its last plate's parts are through
    post-processing."""
    out: dict = {}
    for p in plates:
        t = p.done
        for c in p.copies:
            prev = out.get(c.order)
            out[c.order] = (t if prev is None else max(prev[0], t), c.due)
    return out


def order_later(before: dict, plates) -> str | None:
    """The order whose lateness grows most (late, or later past its due time), or None."""
    worst, name = 0.0, None
    for order, (done, due) in order_done(plates).items():
        was = max(0.0, (before[order][0] - due).total_seconds())
        d = max(0.0, (done - due).total_seconds()) - was
        if d > 0.5 and d > worst:
            worst, name = d, order
    return name


def _due_note(order: str, before: dict, origin: datetime) -> str:
    """The reason a merge was refused: the order it would make late (or later past its due
    time), which may be on the partner plate rather than on the plate kept."""
    due = before[order][1]
    when = f"{due:%H:%M}" if due.date() == origin.date() else f"{due:%a %H:%M}"
    return f"kept: order {order} is due at {when} (a merge would make it late)"


def empty_low_plates(view: FleetView, budget: Budget, plates, *, deadline: float):
    """Empty under-filled plates into others where no order gets later; note why the rest stay.

    Parameters
    ----------
    view, budget
        The planner's view of the fleet and its budget (:mod:`packer.fleet.view`,
        :mod:`packer.fleet.budget`).
    plates : list of PlannedPlate
    deadline : float
        Work-clock time (s) after which no more layouts are tried.

    Returns
    -------
    plates, notes, removed
        The new plates, ``{plate id: reason}`` for every plate still below its threshold,
        and how many plates were removed.
    """
    prof = {p.name: p.profile for p in view.printers}
    cur = list(plates)
    before = order_done(cur)
    traits = {p.name: view.layouts.traits(p) for p in view.printers}

    def low_fills(plates) -> dict:
        """Plate id -> fill of those of ``plates`` under their threshold."""
        volume = {p.id: traits[p.printer].packs_volume for p in plates}
        fills = {p.id: plate_fill(prof[p.printer], p, view.stats, packs_volume=volume[p.id]) for p in plates}
        return {k: f for k, f in fills.items() if f < fill_threshold(volume[k])}

    notes: dict = {}
    decided: dict = {}      # plate id -> its copies when it was last tried
    removed = 0
    while True:
        # emptiest first; a plate that took copies (or moved to a larger plate) is tried again
        low = low_fills([p for p in cur if decided.get(p.id) != p.copies])
        if not low:
            break
        b = min((p for p in cur if p.id in low), key=lambda p: (low[p.id], p.start, p.id))
        decided[b.id] = b.copies
        notes[b.id], out = _decide(view, budget, cur, b, prof, traits, before, deadline)
        if out is not None:
            cur = out
            removed += 1
    still_low = low_fills(cur)
    notes = {p.id: notes[p.id] for p in cur if notes.get(p.id) and p.id in still_low}
    return cur, notes, removed


def _decide(view: FleetView, budget: Budget, cur, b, prof, traits, before, deadline: float):
    """(reason b stays, None) or ("", the plates with b emptied into others)."""
    if budget.past(deadline, "emptying under-filled plates cut short"):
        return BUDGET_NOTE, None
    tech = prof[b.printer].technology
    partners = [a for a in cur if a.id != b.id and a.material == b.material
                and prof[a.printer].technology == tech]
    if not partners:
        return f"kept: the only {tech} plate of {b.material}", None
    out, why = _move_whole(view, budget, cur, b, partners, before)
    if out is None and traits[b.printer].pool_fill:
        out, why2 = _spread(view, budget, cur, b, partners, before, deadline)
        why = why or why2
    if out is None:
        return why or f"kept: its copies do not fit on the other {b.material} plates", None
    return "", out


def _move_whole(view: FleetView, budget: Budget, cur, b, partners, before):
    """All of b's copies onto one partner; (plates, None) or (None, reason or None)."""
    rest_b = [p for p in cur if p.id != b.id]
    options = []
    for a in partners:
        copies = tuple(a.copies) + tuple(b.copies)
        for at in (a, b):
            if not view.allowed_on(view.index[at.printer], copies):
                continue
            hint = sum(view.hint1(view.index[at.printer], c) for c in copies)
            if hint <= view.settings.fill_target + 1e-9:
                options.append((hint, a.start, a.id, at.id, a, at, copies))
    options.sort(key=lambda o: o[:4])
    why = None
    tried = 0
    for _, _, _, _, a, at, copies in options:
        if tried >= MOVE_PARTNERS:
            break
        rest = [p for p in rest_b if p.id != a.id]
        probe = view.retime(rest + [view.merged(at, copies, None)])
        late = order_later(before, probe)
        if late is not None:
            why = why or _due_note(late, before, view.start)
            continue
        if not budget.affords(view.printer_of(at), len(copies), budget.hard_end,
                              "emptying under-filled plates cut short"):
            why = why or BUDGET_NOTE
            continue        # its layout is expected to cost more than the budget has left
        tried += 1
        layout = budget.timed_fits(view.printer_of(at), list(copies))
        if layout is None:
            continue
        timed = view.retime(rest + [replace(view.merged(at, copies, layout), id=a.id)])
        late = order_later(before, timed)
        if late is None:
            return timed, None
        why = why or _due_note(late, before, view.start)
    return None, why


def share_out(view: FleetView, budget: Budget, b, partners, deadline: float, cut: str):
    """``b``'s copies shared out over ``partners`` in the order given, by the pool fill: each
    partner keeps its copies and takes as many of ``b``'s as fit. Returns (changed, left,
    stopped): partner id -> its plate with the copies taken, the copies no partner took, and
    whether the budget stopped it before every partner was tried. ``cut`` is the note then."""
    left = list(b.copies)
    changed: dict = {}
    stopped = False
    for a in partners:
        if not left:
            break
        if budget.past(deadline, cut):
            stopped = True
            break
        mine = [c for c in left if view.allowed_on(view.index[a.printer], [c])]
        if not mine:
            continue
        if not budget.affords(view.printer_of(a), len(a.copies) + len(mine), budget.hard_end, cut):
            stopped = True
            break
        got = budget.timed_fill(view.printer_of(a), list(a.copies) + mine, must=len(a.copies))
        if got is None:
            continue
        layout, kept = got
        taken = [mine[k - len(a.copies)] for k in kept if k >= len(a.copies)]
        if not taken:
            continue
        # the layout numbers the kept copies in the order given: own copies first, then taken
        changed[a.id] = replace(view.merged(a, tuple(a.copies) + tuple(taken), layout), id=a.id)
        gone = {copy_key(c) for c in taken}
        left = [c for c in left if copy_key(c) not in gone]
    return changed, left, stopped


def _spread(view: FleetView, budget: Budget, cur, b, partners, before, deadline):
    """b's copies shared out over partners by the pool fill; (plates, None) or (None, reason)."""
    order = sorted(partners, key=lambda a: (view.fill_of(a), a.start, a.id))
    changed, left, stopped = share_out(view, budget, b, order, deadline, "emptying under-filled plates cut short")
    if left:
        return None, (BUDGET_NOTE if stopped else None)
    timed = view.retime([changed.get(p.id, p) for p in cur if p.id != b.id])
    late = order_later(before, timed)
    if late is not None:
        return None, _due_note(late, before, view.start)
    return timed, None
