"""Material choice by scarcity: a printer that runs several materials leaves a copy to the
printers that can run only its material when they can do that material's urgent work in time.

The list schedule (:func:`packer.fleet.builder.build_plates`) lets the printer free soonest
take the most urgent copies of one material. On a fleet where one material runs on fewer
printers than another, the printers that run both then spend the first day on the widely
run material while the printers that run only it are busy too, and the scarce material
piles up late (the 5,000-copy day: PETG-capable printers on PLA from Monday morning to
Tuesday afternoon, PETG late on Tuesday; fleet README, "Material choice by scarcity").

The rule, when printer ``i`` is free and its next plate would be of material ``M``: for
each other material ``N`` it may run (most urgent first), the *helpers* are the other live
printers that run ``M`` but not ``N``. When every remaining copy of ``M`` due by the first
copy's due time (plus one due bucket: the next half-day's work follows soon after) may go
on a helper, and their work fits, at every due time ``T`` among them, within
:data:`SPARE_MARGIN` of the helpers' capacity from when each is free up to ``T``,
``M`` is left to them and the plate is of ``N``.

Work of a copy: its additive machine time plus its plate share of the per-plate time
(as in :mod:`packer.fleet.duebounds`), on the cheapest printer it may go on. Capacity of a
printer: its shift time up to ``T`` plus :data:`NIGHT_SHARE` of each closed period it
passes (a plate may print through the night; how much of the night it fills is an
estimate). Both are estimates: the rule is one more trial on hint plates, built only
when that trial scores better (:mod:`packer.fleet.scarcetrial`).
"""

from __future__ import annotations

from datetime import datetime, timedelta

from packer.fleet.calendar import shift_windows
from packer.fleet.records import CopyRef, copy_key
from packer.fleet.view import FleetView

__all__ = ["Scarcity", "SPARE_MARGIN", "NIGHT_SHARE"]

#: The helpers take a material over when its work fits in this share of their capacity.
SPARE_MARGIN = 0.5
#: Share of a closed period a printer free before it is counted as printing.
NIGHT_SHARE = 0.25
#: Days of shifts the capacity counts.
DAYS = 21


class Scarcity:
    """The state the rule needs during one list schedule: work per copy, copies per material,
    the shift windows. :meth:`drop` removes the copies a plate took."""

    def __init__(self, view: FleetView, pool, allowed: dict) -> None:
        self.view = view
        self.allowed = allowed
        self.work = {copy_key(c): _work(view, c, allowed[copy_key(c)]) for c in pool}
        self.by_mat: dict = {}
        for c in sorted(pool, key=lambda c: (c.due, c.order, c.part, c.copy)):
            self.by_mat.setdefault(c.material, []).append(c)
        self.left = {copy_key(c) for c in pool}
        self.wins = shift_windows(view.cal, view.start, DAYS)
        self.bucket = timedelta(hours=view.settings.due_bucket_h)

    def drop(self, taken) -> None:
        self.left -= set(taken)

    def first(self, i: int, first: CopyRef, remaining, free_at, live) -> CopyRef:
        """The first copy of printer ``i``'s next plate: ``first``, or the most urgent copy of
        another material it may take when ``first``'s material can be left to the helpers."""
        others = {}
        for c in remaining:
            if c.material != first.material and c.material not in others and i in self.allowed[copy_key(c)]:
                others[c.material] = c
        for m, c in others.items():      # in the remaining order: most urgent first
            helpers = [j for j in sorted(live) if j != i and first.material in self.view.printers[j].materials
                       and m not in self.view.printers[j].materials]
            if helpers and self._covered(first, helpers, free_at):
                return c
        return first

    def _covered(self, first: CopyRef, helpers, free_at) -> bool:
        """True when the helpers can do every remaining copy of ``first``'s material due by
        its due time plus one bucket, within the margin, at every due time on the way."""
        until = first.due + self.bucket
        hs = set(helpers)
        need, at, cap = 0.0, None, 0.0
        for c in self.by_mat[first.material]:
            if c.due > until:
                break
            k = copy_key(c)
            if k not in self.left:
                continue
            if not hs & self.allowed[k]:
                return False
            if c.due != at:     # the capacity by each due time once
                at, cap = c.due, SPARE_MARGIN * sum(self._capacity(free_at[j], c.due) for j in helpers)
            need += self.work[k]
            if need > cap:
                return False
        return True

    def _capacity(self, free: datetime, until: datetime) -> float:
        """Seconds of work a printer free at ``free`` can do by ``until`` (shifts, part of nights)."""
        total, prev_end = 0.0, None
        for a, b in self.wins:
            if a >= until:
                break
            if prev_end is not None and prev_end > free:
                total += NIGHT_SHARE * (a - prev_end).total_seconds()
            lo, hi = max(a, free), min(b, until)
            if hi > lo:
                total += (hi - lo).total_seconds()
            prev_end = b
        return total


def _work(view: FleetView, c: CopyRef, allowed) -> float:
    """The least work copy ``c`` brings on a printer it may go on (s): additive time plus its
    plate share of the per-plate time."""
    best = None
    for j in allowed:
        add, per = view.parts(j, c)
        w = add + min(1.0, view.hint1(j, c)) * per
        best = w if best is None else min(best, w)
    return best or 0.0

