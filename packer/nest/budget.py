"""Deterministic work budgets and the two-process best-of runner.

Wall-clock budgets make results depend on machine load.  The engine instead
counts *work*: every loop charges what it evaluates (points, bounding-box
tests, convex groups and halfplanes inside the compiled kernels, no-fit
polygon edges built, Python steps of a move or a bottom-left position, ...),
each kind at its own rate in work units (:data:`RATE`).  The rates were fitted
once (``python -m packer.bench.calibrate``) to the CPU time of one process on
the idle 2-core development machine, so that :data:`UNITS_PER_SECOND` units
take about one second on every instance.  The same seed, budget and worker
count therefore give the same layout on any machine; only the time taken
varies.  Work is counted on a :class:`Meter` that each call of the engine
makes (or is given) and hands to its budgets and its kit: there is no
process-wide counter, and a caller that passes its own meter reads the work
the call did from it (the layout stage converts it to seconds).  A wall-clock guard (a multiple of the budget) stops runaway runs on a
much slower machine; when it fires, determinism is lost, and the run says so
(:data:`GUARD_HIT`, :data:`LAST_RUN`).  By default the guard reads the process's own
CPU time, so other processes on a shared machine (a loaded host, parallel planner
workers) cannot trip it; a command that promises a wall-clock bound (``packer bench
nest``) switches it to the wall clock (:func:`set_wall_guard`).
"""

from __future__ import annotations

import multiprocessing as mp
import time
from typing import Callable, Sequence

import numpy as np

__all__ = ["Budget", "Meter", "UNITS_PER_SECOND", "KINDS", "RATE", "STRIP_RATE", "best_of", "set_wall_guard",
           "LAST_RUN"]

#: work units per second of budget (CPU time of one process on the development machine)
UNITS_PER_SECOND = 6.0e8

#: the kinds of charged work, in the order of :data:`RATE` and :attr:`Meter.counts`
KINDS = (
    "query",       # one compiled cost query from Python (arrays, weights, call)
    "point",       # one candidate point of a query (container halfplanes, loop setup)
    "box",         # one bounding-box test of a fixed shape for a point
    "group",       # one convex no-fit group entered (a pair of convex parts)
    "half",        # one halfplane evaluated inside a group
    "row",         # one fixed shape of a query's Python-side arrays (weights, masks)
    "move",        # one search move (Python: orientations, plates, pattern search set-up)
    "option",      # one (plate, orientation) tried by a move: sampling, candidate set
    "touch",       # one shape whose no-fit vertices a move or a fill collects
    "lookup",      # one fixed orientation checked for a stored no-fit polygon
    "nfp_pair",    # one Minkowski sum of two convex parts
    "nfp_edge",    # one edge of such a sum (halfplane built and stored)
    "orient",      # one orientation of an outline built (rotation, covering outline, parts)
    "orient_vert",  # one vertex of such an orientation
    "square",      # one entry of the search's n x (n + 1) weight and overlap tables
    "place",       # one orientation tried by the bottom-left fill (Python)
    "cand",        # one candidate point of the bottom-left fill (filtered, sorted)
    "slide",       # one ray cast or gathering of no-fit groups (numpy call)
    "slide_half",  # one halfplane of a ray cast or of the gathering
    "contact",     # one contact score of the best-fit fill (shapely boundary overlay)
    "contact_edge",  # one placed outline in the contact fill's union of touching edges
    "exact_overlay",   # one shapely overlay of the exact fill
    "exact_covers",    # one shapely covers test of the exact fill
    "exact_cand",      # one candidate of the exact fill
    "unit",        # raw work units (modules with their own measured charge)
    "pattern",     # one compiled pattern search of a strip move (call, weights; its points are counted)
    "fmove",       # one fused strip move (fastmove.py: the Python around its compiled calls)
)
_K = {k: i for i, k in enumerate(KINDS)}

#: work units per item of each kind (fitted by ``packer.bench.calibrate`` on the development
#: machine: CPU seconds per item times :data:`UNITS_PER_SECOND`).  Last fit (3 December 2026):
#: 18 shared and generated strip instances at 5 s (load about 4) plus gardeyn5 and a generated
#: 8-rotation set at 20 s (load under 1).  CPU time still rises with load on this 2-core machine
#: (shared caches), so the loaded windows lift the rates a little: at load 1.5, 10 s runs used
#: 0.79-1.04 CPU s per budget second (gardeyn5 1.04, gardeyn9 1.03, dagli 0.83), against
#: 1.37 for gardeyn5 with the previous rates.  ``group`` fits 0: entering a group is part of
#: the cost of its halfplanes and of the box test before it.  The plate-fill kinds (contact,
#: exact) were not in these runs and keep their earlier rates.
RATE = [0.0] * len(KINDS)

#: wall-clock guard as a multiple of the budget (plus one second)
GUARD = 4.0

#: what the guard measures: "cpu" (this process's CPU time) or "wall" (elapsed time)
GUARD_CLOCK = ["cpu"]

#: set when a wall-clock guard stopped a budget in this process
GUARD_HIT = [False]

#: what the last :func:`best_of` call measured: CPU seconds and work seconds of each seed's
#: process, and whether a wall-clock guard stopped any of them
LAST_RUN: dict = {}


#: the work rates of the strip search (:func:`packer.nest.strip.run_seed` charges at these).  The
#: same kinds cost the strip search more than the plate calls they were fitted on (more shapes per
#: query, worst-first rounds, two processes at once on the 2 cores), and re-fitting the shared table
#: would change every plan's layout budgets, so the strip search has its own fit.  Each strip move
#: is one compiled call (kind ``fmove``: the Python around it; its points, boxes and halfplanes are
#: counted as before; ``move``, ``query`` per candidate batch and ``pattern`` are not charged by the
#: strip moves).  Last fit (4 December 2026, ``python -m packer.bench.calibrate --table strip``, idle
#: 2-core machine, two calibrating processes at once as the two seed workers run, 20 shared and 9
#: generated strip instances at 8 s, seed 1, the 3- and 6-piece ones included so that the per-point
#: and per-move work a small strip pays for is charged): held out (generated seeds 80-85, seven
#: shared ones not in the fit) 0.71-1.29 CPU s per budget s; the 3-piece ``three`` 1.81 (2.45 with
#: the previous fit, which had ``point`` at 0; nest README).
STRIP_RATE = [0.0] * len(KINDS)


def _rates(**kw) -> None:
    for k, v in kw.items():
        RATE[_K[k]] = float(v)


def _strip_rates(**kw) -> None:
    STRIP_RATE[:] = RATE
    for k, v in kw.items():
        STRIP_RATE[_K[k]] = float(v)


_rates(query=5749, point=60.19, box=2.394, group=0, half=5.621, row=7.349, move=2.098e+04, option=1.067e+04,
       touch=4855, lookup=359.1, nfp_pair=2156, nfp_edge=57.03, orient=1.516e+05, orient_vert=5612,
       square=3.223, place=1.197e+04, cand=24.54, slide=2.045e+04, slide_half=9.072, contact=8.595e+05,
       contact_edge=4.404e+05, exact_overlay=4.797e+04, exact_covers=2.616e+04, exact_cand=2104, unit=1)

_strip_rates(query=4693, point=10.8, box=3.173, group=0.371, half=1.932, row=7.342, option=534.7, touch=2221,
             lookup=1956, nfp_pair=2342, nfp_edge=4.123, orient=2.377e+04, orient_vert=293.1, square=0.02991,
             place=1.422e+04, cand=55.57, slide=7383, slide_half=9.352, fmove=1.089e+04)


class Meter:
    """The work one call of the engine does: work units and the items of each kind.

    ``ops`` is the counter array (points, boxes, groups, halfplanes) the compiled
    kernels add to; :meth:`charge_ops` charges what they counted since the last call.
    ``rates`` is the table each item is charged at (:data:`RATE`; the strip search
    switches its meter to :data:`STRIP_RATE`).
    """

    def __init__(self) -> None:
        self.rates = RATE
        self.units = 0.0
        self.counts = [0.0] * len(KINDS)
        self.ops = np.zeros(4, dtype=np.int64)

    def charge(self, kind: str, n: float = 1.0) -> None:
        """Charge ``n`` items of work of ``kind`` (see :data:`KINDS`)."""
        k = _K[kind]
        self.counts[k] += n
        self.units += self.rates[k] * n

    def charge_units(self, units: float) -> None:
        """Charge raw work units (modules with their own measured charge; not counted by kind)."""
        self.units += units

    def charge_ops(self) -> None:
        """Charge what the compiled kernels counted in :attr:`ops` since the last call."""
        ops = self.ops
        p, b, g, h = int(ops[0]), int(ops[1]), int(ops[2]), int(ops[3])
        ops[:] = 0
        for k, n in ((1, p), (2, b), (3, g), (4, h)):
            self.counts[k] += n
            self.units += self.rates[k] * n


def set_wall_guard(factor: float, clock: str | None = None) -> float:
    """Set the guard (a multiple of each budget, plus one second); returns the old factor.

    ``clock``: "cpu" (the process's CPU time, the default) or "wall" (elapsed time);
    None keeps the current one. Processes started afterwards (the seed workers) inherit
    the setting.
    """
    global GUARD
    if not factor > 0:
        raise ValueError(f"wall guard must be positive, not {factor!r}")
    if clock is not None:
        if clock not in ("cpu", "wall"):
            raise ValueError(f"guard clock must be 'cpu' or 'wall', not {clock!r}")
        GUARD_CLOCK[0] = clock
    old, GUARD = GUARD, float(factor)
    return old


def _now() -> float:
    """The guard's clock: this process's CPU time, or elapsed time (:data:`GUARD_CLOCK`)."""
    return time.process_time() if GUARD_CLOCK[0] == "cpu" else time.monotonic()


class Budget:
    """A work budget derived from seconds.

    Parameters
    ----------
    seconds : float
        Budget in seconds of the reference machine (s).
    meter : Meter, optional
        Where the work is counted (a new one by default).
    """

    def __init__(self, seconds: float, meter: Meter | None = None):
        self.meter = Meter() if meter is None else meter
        self.seconds = float(seconds)
        self.start_units = self.meter.units
        self.limit = max(0.0, float(seconds)) * UNITS_PER_SECOND
        self.wall_start = _now()
        self.deadline = self.wall_start + GUARD * max(0.0, float(seconds)) + 1.0

    def used(self) -> float:
        """Fraction of the budget used, 0..1 (may pass 1 slightly)."""
        if self.limit <= 0:
            return 1.0
        return (self.meter.units - self.start_units) / self.limit

    def done(self) -> bool:
        """True when the work budget (or the wall-clock guard) is spent."""
        if self.meter.units - self.start_units >= self.limit:
            return True
        if _now() > self.deadline:
            GUARD_HIT[0] = True
            return True
        return False

    def split(self, fraction: float) -> "Budget":
        """A sub-budget of ``fraction`` of what is left."""
        left = max(0.0, self.limit - (self.meter.units - self.start_units))
        sub = Budget(0.0, self.meter)
        sub.limit = left * fraction
        sub.deadline = min(self.deadline, _now() + GUARD * sub.limit / UNITS_PER_SECOND + 1.0)
        return sub


def _call(args, meter: Meter | None = None):
    fn, payload, seed = args
    meter = Meter() if meter is None else meter
    cpu, units = time.process_time(), meter.units
    GUARD_HIT[0] = False
    out = fn(payload, seed, meter)
    return out, time.process_time() - cpu, (meter.units - units) / UNITS_PER_SECOND, GUARD_HIT[0]


def best_of(fn: Callable, payload, seeds: Sequence[int], key: Callable, *, workers: int = 2,
            meter: Meter | None = None):
    """Run ``fn(payload, seed, meter)`` for each seed (in up to ``workers`` processes); best by ``key``.

    Ties go to the earlier seed, so the choice is deterministic.  :data:`LAST_RUN`
    receives each run's CPU seconds, work seconds and whether a guard fired.  In this
    process every run counts on ``meter``; runs in worker processes count on their own,
    and their work is added to ``meter`` afterwards.
    """
    seeds = list(seeds)
    meter = Meter() if meter is None else meter
    if workers <= 1 or len(seeds) <= 1:
        runs = [_call((fn, payload, s), meter) for s in seeds]
    else:
        try:
            ctx = mp.get_context("fork")
        except ValueError:  # pragma: no cover - platforms without fork
            ctx = mp.get_context()
        with ctx.Pool(min(workers, len(seeds))) as pool:
            runs = pool.map(_call, [(fn, payload, s) for s in seeds])
        meter.charge_units(sum(r[2] for r in runs) * UNITS_PER_SECOND)
    results = [r[0] for r in runs]
    LAST_RUN.clear()
    LAST_RUN.update(cpu=[r[1] for r in runs], work=[r[2] for r in runs], guard=any(r[3] for r in runs))
    best = min(range(len(results)), key=lambda k: (key(results[k]), k))
    return results[best]
