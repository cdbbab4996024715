"""Late builds that run into the night, split over two printers (builds packed in a volume).

List scheduling fills each build while the fill rule allows; once a build's first copy is
late even alone, every late copy may join (the ``due`` rule protects on-time copies only), so
the day's last build of a powder printer can take all the copies left and run into the next
day. Its copies are late whatever it holds, but on two printers the same copies can be done
sooner: the build's first copies stay, the others go on a new build after the last plate of
another printer of its profile. The split point is chosen on the time model (builds as high
as their tallest copy), both builds are packed, and the split is kept when the re-timed plan
scores better (weighted lateness, finish, plates) and no order is done later.
"""

from __future__ import annotations

from dataclasses import replace

from packer.fleet.budget import Budget
from packer.fleet.builder import plate_on, sort_key
from packer.fleet.lowfill import order_done, order_later
from packer.fleet.scoring import score_plan
from packer.fleet.view import FleetView

__all__ = ["split_late_builds", "SPLIT_POINTS"]

#: split points tried per build on the time model: every one up to this many, else this many
#: evenly over its copies (re-timing a volume component's few builds is cheap)
SPLIT_POINTS = 64


def split_late_builds(view: FleetView, budget: Budget, plates, *, deadline: float):
    """Split each late build that runs into the next day over two printers where that helps.

    A candidate is a build packed in a volume, of two copies or more, some of them late, whose
    printer is free only on a later day than the build starts. Returns (plates, splits).
    """
    cur = list(plates)
    splits = 0
    cands = [p for p in cur if _candidate(view, p)]
    for b in sorted(cands, key=lambda p: (p.start, p.id)):
        if budget.past(deadline, "splitting late builds cut short"):
            break
        got = _split(view, budget, cur, b, deadline)
        if got is not None:
            cur = got
            splits += 1
    return cur, splits


def _candidate(view: FleetView, p) -> bool:
    return view.traits(view.index[p.printer]).packs_volume and len(p.copies) > 1 \
        and p.free.date() > p.start.date() and any(c.due < p.done for c in p.copies)


def _split(view: FleetView, budget: Budget, cur, b, deadline: float):
    """The plates with ``b`` split over its printer and another of its profile, or None."""
    before = order_done(cur)
    best = score_plan(cur, view.start)
    rest = [p for p in cur if p.id != b.id]
    copies = sorted(b.copies, key=lambda c: sort_key(view, c, False))
    n = len(copies)
    points = sorted({max(1, min(n - 1, round(n * k / (SPLIT_POINTS + 1)))) for k in range(1, SPLIT_POINTS + 1)}) \
        if n > SPLIT_POINTS + 1 else range(1, n)
    options = []
    for j in view.same_kind_printers(b):
        if view.printers[j].name == b.printer:
            continue
        free_j, last = _tail(view, rest, j)
        for k in points:
            plan = _plan(view, rest, b, j, copies, k, (free_j, last), None, None)
            sc = score_plan(plan, view.start)
            if sc < best and order_later(before, plan) is None:
                options.append((sc, j, k, (free_j, last)))
    if not options:
        return None
    _, j, k, tail = min(options, key=lambda o: o[:3])
    first, second = copies[:k], copies[k:]
    if not (budget.affords(view.printer_of(b), n, deadline, "splitting late builds cut short")):
        return None
    lay1 = budget.timed_fits(view.printer_of(b), first)
    lay2 = budget.timed_fits(view.printers[j], second) if lay1 is not None else None
    if lay2 is None:
        return None
    plan = _plan(view, rest, b, j, copies, k, tail, lay1, lay2)
    if score_plan(plan, view.start) < best and order_later(before, plan) is None:
        return plan
    return None


def _tail(view: FleetView, rest, j: int):
    """(when printer ``j`` is free after its last plate of ``rest``, that plate's material or None)."""
    name = view.printers[j].name
    mine = [p for p in rest if p.printer == name]
    last = max(mine, key=lambda p: p.start).material if mine else None
    return max([p.free for p in mine] + [view.ready[j]]), last


def _plan(view: FleetView, rest, b, j: int, copies, k: int, tail, lay1, lay2) -> list:
    """``rest`` with ``b`` holding the first ``k`` of ``copies`` and a new build of the others on
    printer ``j`` after its last plate (``tail``: :func:`_tail`), re-timed."""
    free_j, last = tail
    kept = replace(view.merged(b, copies[:k], lay1), id=b.id)
    new = replace(plate_on(view, j, copies[k:], lay2, free_j, 0, last), id=f"{b.id}s")
    return view.retime(rest + [kept, new])
