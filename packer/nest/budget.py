"""Deterministic work budgets and the two-process best-of runner.

Wall-clock budgets make results depend on machine load.  The engine instead
counts *work units* (matrix entries computed by the collision queries plus a
fixed charge per query, see :data:`WORK`) and converts the caller's seconds
into units at a fixed rate measured once on a 2-core development machine.  The
same seed, budget and worker count therefore give the same layout on any
machine; only the time taken varies.  A wall-clock guard (a multiple of the
budget) stops runaway runs on a much slower or heavily loaded machine; when it
fires, determinism is lost, and the result says so (``guard_hit``).
"""

from __future__ import annotations

import multiprocessing as mp
import time
from typing import Callable, Sequence

__all__ = ["Budget", "WORK", "UNITS_PER_SECOND", "best_of", "set_wall_guard"]

#: work units done so far in this process (a one-element list, shared by the queries)
WORK = [0]

#: work units per second of budget (CPU time of one process on the development machine)
UNITS_PER_SECOND = 6.0e8

#: wall-clock guard as a multiple of the budget (plus one second)
GUARD = 4.0


def set_wall_guard(factor: float) -> float:
    """Set the wall-clock guard (a multiple of each budget, plus one second); returns the old one.

    The benchmark commands set 1.0, so that a budget of S seconds is also a wall-clock
    limit of S + 1 s: a result then never took longer than its budget, and it loses
    determinism only on instances whose work units run slower than their rate.
    Processes started afterwards (the seed workers) inherit the setting.
    """
    global GUARD
    if not factor > 0:
        raise ValueError(f"wall guard must be positive, not {factor!r}")
    old, GUARD = GUARD, float(factor)
    return old


class Budget:
    """A work budget derived from seconds.

    Parameters
    ----------
    seconds : float
        Budget in seconds of the reference machine (s).
    """

    def __init__(self, seconds: float):
        self.seconds = float(seconds)
        self.start_units = WORK[0]
        self.limit = max(0.0, float(seconds)) * UNITS_PER_SECOND
        self.wall_start = time.monotonic()
        self.deadline = self.wall_start + GUARD * max(0.0, float(seconds)) + 1.0
        self.guard_hit = False

    def used(self) -> float:
        """Fraction of the budget used, 0..1 (may pass 1 slightly)."""
        if self.limit <= 0:
            return 1.0
        return (WORK[0] - self.start_units) / self.limit

    def done(self) -> bool:
        """True when the work budget (or the wall-clock guard) is spent."""
        if WORK[0] - self.start_units >= self.limit:
            return True
        if time.monotonic() > self.deadline:
            self.guard_hit = True
            return True
        return False

    def split(self, fraction: float) -> "Budget":
        """A sub-budget of ``fraction`` of what is left."""
        left = max(0.0, self.limit - (WORK[0] - self.start_units))
        sub = Budget(0.0)
        sub.limit = left * fraction
        sub.deadline = min(self.deadline, time.monotonic() + GUARD * sub.limit / UNITS_PER_SECOND + 1.0)
        return sub


def _call(args):
    fn, payload, seed = args
    return fn(payload, seed)


def best_of(fn: Callable, payload, seeds: Sequence[int], key: Callable, *, workers: int = 2):
    """Run ``fn(payload, seed)`` for each seed (in up to ``workers`` processes); best by ``key``.

    Ties go to the earlier seed, so the choice is deterministic.
    """
    seeds = list(seeds)
    if workers <= 1 or len(seeds) <= 1:
        results = [fn(payload, s) for s in seeds]
    else:
        try:
            ctx = mp.get_context("fork")
        except ValueError:  # pragma: no cover - platforms without fork
            ctx = mp.get_context()
        with ctx.Pool(min(workers, len(seeds))) as pool:
            results = pool.map(_call, [(fn, payload, s) for s in seeds])
    best = min(range(len(results)), key=lambda k: (key(results[k]), k))
    return results[best]
