"""Due-aware load bounds: how much machine work printers can have cleared by a moment,
how many orders must be late, how much weighted lateness no plan avoids.

Everything here is on a float clock (seconds from an origin) and knows nothing of
copies or profiles: :mod:`packer.fleet.duebounds` turns a fleet into these inputs.

The capacity of a printer by time ``t`` (:class:`Capacity`) is the most work
(warm-up + print + clear, the plate's ``total_s``) of the plates it can have
*cleared* by ``t``. Claim: it is at most the shift time from the printer's first
ready moment to ``t``, plus, for every closed period (night, weekend) that has
ended by ``t``, ``min(length of the period, P)`` with ``P`` any upper bound on one
plate's machine time on that printer. Proof: the plates cleared by ``t`` occupy
disjoint intervals ``[start, free]`` inside ``[ready, t]``; each holds its machine
interval and its clearing, and clearing lies inside a shift. A plate starts only
inside a shift, so at most one machine interval meets a closed period (a second
one would have to start inside it, or end before it began), and that one covers
at most ``min(length, P)`` of it. A closed period not over by ``t`` holds no
machine time of a plate cleared by ``t`` (its clearing would lie after the
period). Material changes and waiting only use more time, so leaving them out
keeps the bound valid.

Single-machine relaxation: pooling the printers of a group into one machine whose
cumulative capacity is ``cap(t)``, the orders done by ``t`` carry at most
``cap(t)`` of work. Two standard single-machine results then give bounds:

- fewest late jobs: Moore's algorithm (Moore 1968, in Hodgson's form; Pinedo,
  *Scheduling*, section 3.3) on the due times mapped through ``cap`` (a monotone
  change of clock turns the capacity curve into a unit-rate machine);
- weighted tardiness: the transportation bound (Gelders and Kleindorfer 1974;
  Abdul-Razaq, Potts and Van Wassenhove 1990, *Discrete Applied Mathematics* 26,
  235-253): each job is split into units of work, a unit placed in a time slot
  costs ``w_j / p_j`` times the slot start's tardiness, and the cheapest placement
  within the slots' capacities is a lower bound on ``sum w_j T_j``.

References
----------
Moore, J. M. (1968). An n job, one machine sequencing algorithm for minimizing the
number of late jobs. *Management Science* 15(1), 102-109.
Dantzig, G. B. (1957). Discrete-variable extremum problems. *Operations Research*
5(2), 266-288 (the fractional knapsack bound).
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from ortools.graph.python import min_cost_flow

from packer.errors import SizeError

__all__ = ["fractional_knapsack", "Capacity", "capacity_curve", "moore_late_jobs",
           "transport_tardiness_bound"]

_SCALE = 1e6    # integer costs of the min-cost flow: micro weight-hours


def fractional_knapsack(values: Sequence[float], sizes: Sequence[float], counts: Sequence[int],
                        capacity: float) -> float:
    """Dantzig's bound: the most value items of the given sizes fit in ``capacity`` when
    items may be cut (Dantzig 1957). An upper bound on any 0/1 selection.

    Parameters
    ----------
    values, sizes : (n,) float
        Value and size of one item of each kind; sizes >= 0.
    counts : (n,) int
        How many items of each kind there are.
    capacity : float

    Examples
    --------
    >>> fractional_knapsack([60, 100, 120], [10, 20, 30], [1, 1, 1], 50)
    240.0
    """
    items = []
    total = 0.0
    for v, s, n in zip(values, sizes, counts):
        if n <= 0 or v <= 0:
            continue
        if s <= 0:
            total += v * n            # a free item always fits
            continue
        items.append((-v / s, s, n, v))
    room = float(capacity)
    for _, s, n, v in sorted(items):
        if room <= 0:
            break
        take = min(float(n), room / s)
        total += take * v
        room -= take * s
    return float(total)


@dataclass(frozen=True)
class Capacity:
    """Cumulative work capacity of a group of printers (s of work against s on the clock).

    Attributes
    ----------
    a, b : (K,) float
        Shift windows ``[a_k, b_k)``, sorted, not overlapping.
    ready : (m,) float
        Each printer's first moment (inside a shift).
    night : (m,) float
        Each printer's cap on work inside one closed period (a plate's machine-time
        bound; ``inf`` for none).
    """

    a: np.ndarray
    b: np.ndarray
    ready: np.ndarray
    night: np.ndarray

    def __post_init__(self) -> None:
        a, b, r = self.a, self.b, self.ready
        # shift time of each printer in each window, (m, K)
        length = np.clip(b[None, :] - np.maximum(a[None, :], r[:, None]), 0.0, None)
        gaps = np.append(a[1:] - b[:-1], 0.0)
        credit = np.where(r[:, None] < b[None, :], np.minimum(gaps[None, :], self.night[:, None]), 0.0)
        credit[:, -1] = 0.0
        per_window = length.sum(axis=0)
        gap_credit = credit.sum(axis=0)
        start = np.concatenate(([0.0], np.cumsum(per_window + gap_credit)[:-1]))
        object.__setattr__(self, "_start", start)        # cap at a_k (gap credit included)
        object.__setattr__(self, "_len", per_window)
        object.__setattr__(self, "_gap", gap_credit)

    def at(self, t: float) -> float:
        """Most work of plates cleared by ``t`` (right-continuous: a morning's night credit
        counts from the shift's first moment)."""
        return self._value(t, "right")

    def before(self, t: float) -> float:
        """Left limit of :meth:`at` at ``t`` (a night credit due at ``t`` left out)."""
        return self._value(t, "left")

    def _value(self, t: float, side: str) -> float:
        k = int(np.searchsorted(self.a, t, side=side)) - 1
        if k < 0:
            return 0.0
        if t >= self.b[k]:
            return float(self._start[k] + self._len[k])
        return float(self._start[k] + np.clip(t - np.maximum(self.a[k], self.ready), 0.0, None).sum())

    @property
    def total(self) -> float:
        """Capacity at the end of the last window."""
        return float(self._start[-1] + self._len[-1]) if self.a.size else 0.0

    def earliest(self, work: float) -> float | None:
        """A lower bound on the first moment with ``at(t) >= work`` (s); None when the
        windows do not reach it. Found by bisection and rounded down (to < 1 s)."""
        if work <= 0:
            return float(self.ready.min()) if self.ready.size else 0.0
        ends = self._start + self._len
        k = int(np.searchsorted(ends, work - 1e-9, side="left"))
        if k >= self.a.size:
            return None
        if self._start[k] >= work:
            return float(self.a[k])
        lo, hi = float(self.a[k]), float(self.b[k])
        while hi - lo > 0.5:
            mid = 0.5 * (lo + hi)
            lo, hi = (mid, hi) if self.at(mid) < work else (lo, mid)
        return lo


def capacity_curve(windows: Sequence[tuple[float, float]], ready: Sequence[float],
                   night: Sequence[float]) -> Capacity:
    """A :class:`Capacity` from shift windows (s) and per-printer ready times and night caps."""
    w = sorted(windows)
    if not w:
        raise SizeError("a capacity curve needs at least one shift window")
    if len(ready) != len(night) or not len(ready):
        raise SizeError("a capacity curve needs one ready time and one night cap per printer")
    return Capacity(a=np.array([x[0] for x in w], dtype=float), b=np.array([x[1] for x in w], dtype=float),
                    ready=np.asarray(ready, dtype=float), night=np.asarray(night, dtype=float))


def moore_late_jobs(work: Sequence[float], due: Sequence[float]) -> list[int]:
    """Indices of a smallest set of late jobs on one machine (Moore 1968, Hodgson's form).

    Jobs are taken by due time; when the running completion passes the job's due
    time, the longest job taken so far is dropped (late). The number dropped is the
    least possible number of late jobs, ``1 || sum U_j`` (Pinedo, *Scheduling*,
    Algorithm 3.3.1).

    Parameters
    ----------
    work : (n,) float
        Processing times.
    due : (n,) float
        Due times on the machine's clock (for a capacity curve: ``cap(due)``).

    Examples
    --------
    >>> sorted(moore_late_jobs([7, 8, 4, 6, 6], [9, 17, 18, 19, 21]))
    [0, 1]
    """
    order = sorted(range(len(work)), key=lambda j: (due[j], j))
    heap: list = []
    done = 0.0
    late = []
    for j in order:
        heapq.heappush(heap, (-work[j], j))
        done += work[j]
        if done > due[j] * (1 + 1e-12) + 1e-9:
            w, k = heapq.heappop(heap)
            done += w
            late.append(k)
    return late


def transport_tardiness_bound(work: Sequence[float], due: Sequence[float], weight: Sequence[float],
                              cap: Capacity, *, slot_s: float = 1800.0) -> float:
    """Lower bound on ``sum w_j max(0, C_j - d_j)`` (weight x s) on a capacity curve.

    The transportation bound (Gelders and Kleindorfer 1974): work is split into
    minutes; a minute of job ``j`` placed in slot ``[s_k, s_k+1)`` costs
    ``w_j / p_j * max(0, s_k - d_j)``; slot ``k`` holds ``cap.before(s_k+1) -
    cap.before(s_k)``, the last slot holds everything left. Valid: order the jobs by
    their completion in any plan and fill the slots in that order; a job's minutes
    then lie in slots starting no later than its completion (the work done by
    ``C_j`` is at most ``cap(C_j) <= cap.before(s)`` for every ``s > C_j``), so
    each costs at most ``w_j / p_j`` times its tardiness. Rounding keeps it a lower
    bound: minutes of work rounded down, slot capacities up, costs down; solved
    exactly as a min-cost flow.

    Slots: every shift window's ends, every due time, and steps of ``slot_s``.
    """
    jobs = [j for j in range(len(work)) if work[j] >= 60.0 and weight[j] > 0]
    if not jobs:
        return 0.0
    minutes = [int(work[j] // 60) for j in jobs]
    end = cap.earliest(float(sum(work[j] for j in jobs)))
    end = float(cap.b[-1]) if end is None else end
    marks = {float(x) for x in cap.a if x <= end} | {float(x) for x in cap.b if x <= end}
    marks |= {float(due[j]) for j in jobs if cap.a[0] < due[j] < end}
    marks |= set(np.arange(float(cap.a[0]), end, slot_s).tolist())
    s = np.array(sorted(marks | {end}))
    room = [math.ceil((cap.before(s[k + 1]) - cap.before(s[k])) / 60.0) for k in range(len(s) - 1)]
    room.append(sum(minutes))                     # the last slot takes what is left
    n, k_slots = len(jobs), len(s)
    flow = min_cost_flow.SimpleMinCostFlow()
    tails, heads, caps, costs = [], [], [], []
    for a, j in enumerate(jobs):
        rate = _SCALE * weight[j] / (work[j] / 60.0) / 3600.0     # per minute: micro-(weight x h) per s late
        for k in range(k_slots):
            tails.append(a)
            heads.append(n + k)
            caps.append(minutes[a])
            costs.append(int(math.floor(rate * max(0.0, s[k] - due[j]))))
    sink = n + k_slots
    for k in range(k_slots):
        tails.append(n + k)
        heads.append(sink)
        caps.append(room[k])
        costs.append(0)
    flow.add_arcs_with_capacity_and_unit_cost(np.array(tails), np.array(heads), np.array(caps), np.array(costs))
    flow.set_nodes_supplies(np.arange(n + 1 + k_slots), np.array(minutes + [0] * k_slots + [-sum(minutes)]))
    status = flow.solve()
    if status != flow.OPTIMAL:
        raise RuntimeError(f"transportation bound: min-cost flow status {status}")   # a bug: always feasible
    return flow.optimal_cost() / _SCALE * 3600.0
