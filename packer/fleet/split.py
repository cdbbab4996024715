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
from packer.fleet.builder import plate_on, projected_height, sort_key
from packer.fleet.lowfill import order_done, order_later
from packer.fleet.records import copy_key
from packer.fleet.requeue import REQUEUE_S_PER_ITEM
from packer.fleet.scoring import copy_weight, late_orders, score_plan
from packer.fleet.timemodel import plate_time
from packer.fleet.view import FleetView, layout_height

__all__ = ["split_late_builds", "SPLIT_POINTS"]

#: split points tried per build on the time model: every one up to this many, else this many
#: evenly over its copies (re-timing a volume component's few builds is cheap)
SPLIT_POINTS = 64

#: split by whole orders: also up to this many copies of the other build's moved across
ORDER_SLACK = 16

#: packings of both builds of a split at most (the best way on the time model first)
PACKED_TRIES = 3


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
    """The plates with ``b`` split over its printer and another of its profile, or None.

    The ways to split, each judged on the time model (:func:`_estimated` heights): a prefix of
    its copies in the usual order (most urgent on ``b``), and whole orders (:func:`_by_order`).
    The best is packed; when its packed heights lose lateness the estimate promised, the
    heights' gain over the projection is raised to what the packing showed and the ways are
    judged again (at most ``PACKED_TRIES`` packings of both builds). The best packed plan that
    scores better than ``cur`` with no order later is kept."""
    before = order_done(cur)
    best = score_plan(cur, view.start)
    rest = [p for p in cur if p.id != b.id]
    urgent = sorted(b.copies, key=lambda c: sort_key(view, c, False))
    n = len(urgent)
    points = sorted({max(1, min(n - 1, round(n * k / (SPLIT_POINTS + 1)))) for k in range(1, SPLIT_POINTS + 1)}) \
        if n > SPLIT_POINTS + 1 else range(1, n)
    ways = [(urgent, k) for k in points] + _by_order(view, b, urgent)
    gain = view.height_gain.get(view.printer_of(b).profile.name, 1.0)
    kept, tried = None, set()
    for _ in range(PACKED_TRIES):
        pick = next((o for o in _options(view, budget, rest, b, ways, before, best, gain) if o[1:3] not in tried), None)
        if pick is None or not budget.affords(view.printer_of(b), n, deadline, "splitting late builds cut short"):
            break
        promised, j, w, tail = pick
        tried.add((j, w))
        seq, k = ways[w]
        lay1 = budget.timed_fits(view.printer_of(b), seq[:k])
        lay2 = budget.timed_fits(view.printers[j], seq[k:]) if lay1 is not None else None
        if lay2 is None:
            continue
        plan = _plan(view, rest, b, j, seq, k, tail, lay1, lay2)
        sc = score_plan(plan, view.start)
        if sc < best and order_later(before, plan) is None:
            kept, best = plan, sc
        if sc[0] <= promised[0] + 1e-6:
            break
        gain = max([gain] + [lay.build_height_mm / _projection(view, j_, part) for lay, j_, part in
                             ((lay1, view.index[b.printer], seq[:k]), (lay2, j, seq[k:]))])
    return kept


def _options(view: FleetView, budget: Budget, rest, b, ways, before, best, gain: float) -> list:
    """(score, printer, way, its tail) of each way to split ``b`` (:func:`_split`) that scores
    better than ``best`` with no order later, on the time model with heights ``gain`` x the
    projection; best first (between equal weighted lateness, fewer late orders first)."""
    options = []
    for j in view.same_kind_printers(b):
        if view.printers[j].name == b.printer:
            continue
        tail = _tail(view, rest, j)
        # the work clock pays the re-timing as for the plate moves: per plate and copy judged
        budget.clock.charge(REQUEUE_S_PER_ITEM * len(ways) * (len(rest) + 2 + len(b.copies)))
        for w, (seq, k) in enumerate(ways):
            plan = _plan(view, rest, b, j, seq, k, tail, None, None, gain)
            sc = score_plan(plan, view.start)
            if sc < best and order_later(before, plan) is None:
                options.append((sc, len(late_orders(plan)), j, w, tail))
    # equal weighted lateness: fewer late orders first, then the score's finish and plates
    return [(sc, j, w, tail) for sc, _, j, w, tail in sorted(options, key=lambda o: (o[0][0], o[1], o[0], o[2], o[3]))]


def _by_order(view: FleetView, b, urgent) -> list:
    """Ways to split ``b`` by whole orders: (copies, k), the first ``k`` staying on ``b``.

    An order is late when any of its copies is, so one of the two builds takes whole orders,
    ranked by weight per machine second (then fewest seconds first), and the other the rest;
    every count of orders, on either printer. The copies keep their order of ``urgent``."""
    i = view.index[b.printer]
    work: dict = {}
    for c in urgent:
        w = work.setdefault(c.order, [0.0, 0.0, len(work)])
        w[0] += view.parts(i, c)[0]
        w[1] = max(w[1], copy_weight(c))
    ranks = (sorted(work, key=lambda o: (-work[o][1] / max(work[o][0], 1e-9), work[o][2])),
             sorted(work, key=lambda o: (work[o][0], work[o][2])))
    out, seen = [], set()
    for rank in ranks:
        for m in range(1, len(rank)):
            chosen = set(rank[:m])
            group = [c for c in urgent if c.order in chosen]
            others = [c for c in urgent if c.order not in chosen]
            for seq, k0 in ((group + others, len(group)), (others + group, len(others))):
                # the whole orders alone, then with a few copies of the others' build more
                # (those orders are late on it anyway; it ends sooner)
                for k in range(max(1, k0 - ORDER_SLACK), min(len(seq) - 1, k0 + ORDER_SLACK) + 1):
                    key = frozenset(copy_key(c) for c in seq[:k])
                    if key not in seen:
                        seen.add(key)
                        out.append((seq, k))
    return out


def _tail(view: FleetView, rest, j: int):
    """(when printer ``j`` is free after its last plate of ``rest``, that plate's material or None)."""
    name = view.printers[j].name
    mine = [p for p in rest if p.printer == name]
    last = max(mine, key=lambda p: p.start).material if mine else None
    return max([p.free for p in mine] + [view.ready[j]]), last


def _plan(view: FleetView, rest, b, j: int, copies, k: int, tail, lay1, lay2, gain: float = 1.0) -> list:
    """``rest`` with ``b`` holding the first ``k`` of ``copies`` and a new build of the others on
    printer ``j`` after its last plate (``tail``: :func:`_tail`), re-timed. Without layouts
    (``lay1``, ``lay2`` None) both builds are timed at :func:`_estimated` heights (``gain``)."""
    free_j, last = tail
    kept = replace(view.merged(b, copies[:k], lay1), id=b.id)
    new = replace(plate_on(view, j, copies[k:], lay2, free_j, 0, last), id=f"{b.id}s")
    if lay1 is None:
        kept = _estimated(view, b, kept, gain)
    if lay2 is None:
        new = _estimated(view, b, new, gain)
    return view.retime(rest + [kept, new])


def _projection(view: FleetView, i: int, copies) -> float:
    """The builder's projection of a build of ``copies`` on printer ``i`` (mm, at least 1e-9)."""
    prof = view.printers[i].profile
    tallest = max(view.stats[c.kind].height_mm for c in copies)
    return max(1e-9, projected_height(prof, tallest, sum(view.hint1(i, c) for c in copies)))


def _estimated(view: FleetView, b, p, gain: float):
    """Plate ``p`` (part of build ``b``) timed at the height its copies are expected to pack to:
    the builder's projection (tallest copy, volume share of the room) scaled by ``gain`` (packed
    over projected height: the profile's ``FleetView.height_gain``, or what a packing of the split
    showed), at most ``b``'s packed height (the copies are a subset of its packing)."""
    prof = view.printer_of(p).profile
    height = gain * _projection(view, view.index[p.printer], p.copies)
    packed = layout_height(b.layout)
    if packed is not None and packed > 0:
        height = min(height, packed)
    est = plate_time(prof, [view.stats[c.kind] for c in p.copies], build_height_mm=height)
    return replace(p, time=est)
