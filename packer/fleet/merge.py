"""Merging pairs of plates while the plan gets no worse (see :func:`merge_plates`)."""

from __future__ import annotations

from packer.errors import PackerError
from packer.fleet.budget import Budget
from packer.fleet.records import PlannedPlate
from packer.fleet.scoring import score_plan
from packer.fleet.view import FleetView

__all__ = ["merge_plates"]

#: partners tried per plate
MERGE_PARTNERS = 3


def merge_plates(view: FleetView, budget: Budget, plates, deadline: float):
    """Merge pairs of plates (same technology and material) while the plan gets no worse.

    Emptiest plates first; each is tried against three partners: first those whose
    merged plate stays within the fill the layouts reached on that profile before (likely
    to nest), fullest first, then the others within ``fill_target``. The merged plate runs
    on the printer and in the place of either partner (so plates of two profiles of one
    technology can merge onto the profile every copy can be printed on), laid out for that
    printer. A merge is kept when the re-timed plan scores better (weighted lateness,
    finish, plates: so never when an order gets later or the day ends later) and a layout
    confirms the merged plate. Bounded by the work-clock ``deadline`` and by one pass over
    the plates. Returns (plates, merges).
    """
    cur = list(plates)
    if len({p.id for p in cur}) != len(cur):
        raise PackerError("merging needs unique plate ids (a planner bug)")
    best = score_plan(cur, view.start)
    merges = 0
    fill = {p.id: view.fill_of(p) for p in cur}
    for b_id in [p.id for p in sorted(cur, key=lambda p: (fill[p.id], p.start, p.id))]:
        if budget.past(deadline, "merging cut short"):
            break
        b = next((p for p in cur if p.id == b_id), None)
        if b is None:
            continue
        for _, _, _, _, a, copies, places in _options(view, cur, b)[:MERGE_PARTNERS]:
            got = _try_merge(view, budget, cur, a, b, copies, places, best)
            if got is not None:
                cur, best = got
                merges += 1
                break
    return cur, merges


def _fill_on(view: FleetView, at: PlannedPlate, copies) -> float | None:
    """Hint fill of ``copies`` on ``at``'s printer, or None when one of them cannot go there."""
    i = view.index[at.printer]
    if not view.allowed_on(i, copies):
        return None
    return sum(view.hint1(i, c) for c in copies)


def _options(view: FleetView, cur, b: PlannedPlate) -> list:
    """Partners of ``b``, likely to nest first, fullest first: (sort key..., partner, merged
    copies, the partners whose place and printer the merged plate may take)."""
    tech = view.tech_of[b.printer]
    options = []
    for a in cur:
        if a.id == b.id or a.material != b.material or view.tech_of[a.printer] != tech:
            continue
        first, second = sorted((a, b), key=lambda p: (p.start, p.id))
        copies = tuple(first.copies) + tuple(second.copies)
        fills = [(f, at) for at in (a, b) if (f := _fill_on(view, at, copies)) is not None
                 and f <= view.settings.fill_target + 1e-9]
        if fills:
            # likely to nest: within the fill the layouts reached on that profile before
            likely = any(f <= view.target.get(view.printer_of(at).profile.name, view.settings.fill_target) + 1e-9
                         for f, at in fills)
            options.append((not likely, -max(f for f, _ in fills), a.start, a.id, a, copies,
                            [at for _, at in fills]))
    options.sort(key=lambda o: o[:4])
    return options


def _try_merge(view: FleetView, budget: Budget, cur, a: PlannedPlate, b: PlannedPlate, copies, places, best):
    """(plates, score) with ``a`` and ``b`` merged in the better place, or None.

    The merged plate runs in one partner's place, on its printer (the earlier place, or the
    later one, which can keep an early order on time), whichever re-times better; only
    places that would score better than ``best`` with a layout are laid out.
    """
    rest = [p for p in cur if p.id not in (a.id, b.id)]
    slots = sorted(((score_plan(view.retime(rest + [view.merged(at, copies, None)]), view.start), k, at)
                    for k, at in enumerate(places)), key=lambda x: x[:2])
    if slots[0][0] >= best:
        return None
    layouts: dict = {}
    for sc0, _, at in slots:
        if sc0 >= best:
            break
        printer = view.printer_of(at)
        if printer.profile.name not in layouts:
            if not budget.affords(printer, len(copies), budget.hard_end, "merging cut short"):
                continue    # its layout is expected to cost more than the budget has left
            layouts[printer.profile.name] = budget.timed_fits(printer, list(copies))
        layout = layouts[printer.profile.name]
        if layout is None:
            continue
        timed = view.retime(rest + [view.merged(at, copies, layout)])
        sc = score_plan(timed, view.start)
        if sc < best:
            return timed, sc
    return None
