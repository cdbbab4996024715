"""Moving whole plates to earlier places in the printers' queues, contents fixed.

On a large day the sequencing model (:func:`packer.fleet.improve.sequence_fixed`) stops
at a first solution, and the timeline can keep a plate waiting behind a busy printer
while another printer of the same profile stands free, or a late order's plate behind
plates whose orders have time to spare. :func:`requeue_plates` is a local search over
such moves: one plate goes to another place, before a plate of any printer of its
profile that runs its material (its own printer included) or at the end of that
printer's queue; both queues are re-timed (left shift, material changes,
post-processing: :meth:`packer.fleet.view.FleetView.retime`). A move is kept when the
plan scores better (weighted lateness, then finish: :func:`packer.fleet.scoring.score_plan`)
and no order is later past its due time than before, so no late order gets later and no
order on time becomes late. The plate keeps its layout: the printers share the profile,
hence the plate. No layout call is made; the work clock is charged per plan re-timed.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import timedelta

from packer.fleet.budget import Budget
from packer.fleet.lowfill import order_done
from packer.fleet.scoring import copy_weight, score_plan
from packer.fleet.view import FleetView

__all__ = ["requeue_plates", "order_lateness", "REQUEUE_S_PER_ITEM", "PLACES"]

#: Work-clock seconds charged per plate and per copy re-timed and re-scored by a move
#: (measured on the generated days' stand-in plans).
REQUEUE_S_PER_ITEM = 2.0e-5
#: Places tried per printer for one plate: the latest ones that start before it does now.
PLACES = 3

_EPS = timedelta(microseconds=1)


def order_lateness(plates) -> dict:
    """order -> seconds its last plate is done after its due time (0 when on time)."""
    return {o: max(0.0, (done - due).total_seconds()) for o, (done, due) in order_done(plates).items()}


def _candidates(plates, late: dict, weight: dict) -> list:
    """Plates worth moving, most weighted lateness they hold first, then the latest free."""
    last: dict = {}
    for p in plates:
        for c in p.copies:
            if late[c.order] > 0 and (c.order not in last or p.done > last[c.order].done):
                last[c.order] = p
    gain: dict = {}
    for o, p in last.items():
        gain[p.id] = gain.get(p.id, 0.0) + weight[o] * late[o]
    finish = max(plates, key=lambda p: (p.free, p.id))
    ids = sorted(gain, key=lambda i: (-gain[i], i))
    if finish.id not in gain:
        ids.append(finish.id)
    by_id = {p.id: p for p in plates}
    return [by_id[i] for i in ids]


def _places(view: FleetView, queue, i: int, p) -> list:
    """Start stamps that put ``p`` at the latest :data:`PLACES` places of printer ``i``'s
    ``queue`` (sorted, ``p`` not in it) whose printer is free before ``p`` starts now."""
    free_before = [view.ready[i]] + [q.free for q in queue]
    k_max = max((k for k in range(len(queue) + 1) if free_before[k] < p.start), default=None)
    if k_max is None:
        return []
    stamps = []
    for k in range(k_max, max(-1, k_max - PLACES), -1):
        stamps.append(queue[k].start - _EPS if k < len(queue) else
                      (queue[-1].start + _EPS if queue else p.start))
    return stamps


class _Timeline:
    """The plan as queues per printer, with each order's plates, for moves scored on the two
    queues they change (the other plates keep their times)."""

    def __init__(self, view: FleetView, plates) -> None:
        self.view = view
        self.queues: dict = {p.name: [] for p in view.printers}
        for p in sorted(plates, key=lambda p: (p.start, p.id)):
            self.queues[p.printer].append(p)
        self.by_id = {p.id: p for p in plates}
        self.plates_of: dict = {}
        self.due: dict = {}
        self.weight: dict = {}
        for p in plates:
            for c in p.copies:
                self.plates_of.setdefault(c.order, set()).add(p.id)
                self.due[c.order] = c.due
                self.weight[c.order] = max(self.weight.get(c.order, 0.0), copy_weight(c))
        self.late = {o: self._late(o, {}) for o in self.plates_of}
        self.total = sum(self.weight[o] * self.late[o] for o in self.late)

    def plates(self) -> list:
        return [p for q in self.queues.values() for p in q]

    def _late(self, o: str, new: dict) -> float:
        done = max((new.get(i) or self.by_id[i]).done for i in self.plates_of[o])
        return max(0.0, (done - self.due[o]).total_seconds())

    def finish(self, last: dict) -> float:
        """Seconds from the start until the last printer is free, with ``last`` (printer -> its
        last free moment, None when its queue is empty) for the queues a move changed."""
        ends = [last[n] if n in last else (q[-1].free if q else None) for n, q in self.queues.items()]
        return max(((t - self.view.start).total_seconds() for t in ends if t is not None), default=0.0)

    def trial(self, p, name: str, stamp):
        """(score, retimed plates by id, new order lateness, new last free per printer, size) of
        ``p`` moved to printer ``name`` at ``stamp``; None when an order would be later."""
        src = [q for q in self.queues[p.printer] if q.id != p.id]
        dst = src if name == p.printer else self.queues[name]
        moved = replace(p, printer=name, start=stamp)
        group = src + [moved] + ([] if dst is src else dst)
        retimed = self.view.retime(group)
        new = {q.id: q for q in retimed}
        orders = {c.order for q in retimed for c in q.copies}
        late = {o: self._late(o, new) for o in orders}
        if any(late[o] > self.late[o] + 1e-6 for o in orders):
            return None
        total = self.total + sum(self.weight[o] * (late[o] - self.late[o]) for o in orders)
        last = {}
        for q in retimed:
            last[q.printer] = max(last.get(q.printer, q.free), q.free)
        last.setdefault(p.printer, None)
        score = (round(total, 3), round(self.finish(last), 3), len(self.by_id))
        return score, new, late, last, len(group) + sum(len(q.copies) for q in retimed)

    def take(self, new: dict, late: dict, last: dict) -> None:
        """Make a move: ``new`` holds every plate of the changed queues (the keys of ``last``)."""
        self.by_id.update(new)
        for n in last:
            self.queues[n] = sorted((q for q in new.values() if q.printer == n), key=lambda q: (q.start, q.id))
        for o, v in late.items():
            self.total += self.weight[o] * (v - self.late[o])
            self.late[o] = v


def requeue_plates(view: FleetView, budget: Budget, plates, work_s: float) -> tuple[list, int]:
    """Plates moved to earlier places while the plan scores better (see the module docstring).

    ``work_s``: work-clock seconds the search may use. Returns (plates, moves kept).
    """
    cur = view.retime(list(plates))
    if len(cur) < 2:
        return cur, 0
    end = budget.clock.now() + work_s
    line = _Timeline(view, cur)
    best = score_plan(cur, view.start)
    moves = 0
    while not budget.past(end, "moving plates cut short"):
        got = _one_move(view, budget, line, best, end)
        if got is None:
            break
        best = got
        moves += 1
    return view.retime(line.plates()), moves


def _one_move(view: FleetView, budget: Budget, line: _Timeline, best, end: float):
    """The best move of the first candidate that has one scoring better: made, its score
    returned; None when no candidate has one (or the work ran out)."""
    for p in _candidates(line.plates(), line.late, line.weight):
        top = None
        for j in view.same_kind_printers(p):
            if not view.allowed_on(j, p.copies):
                continue
            name = view.printers[j].name
            queue = [q for q in line.queues[name] if q.id != p.id]
            for stamp in _places(view, queue, j, p):
                if budget.past(end, "moving plates cut short"):
                    return None
                got = line.trial(p, name, stamp)
                budget.clock.charge(REQUEUE_S_PER_ITEM * (got[4] if got else len(queue) + 1))
                if got is not None and got[0] < (top or (best,))[0]:
                    top = got
        if top is not None:
            line.take(*top[1:4])
            return top[0]
    return None
