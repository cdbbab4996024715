"""Lower bounds: how many plates and how long a day must at least take.

A plan reports its distance to these bounds; none of them is a plan.

References
----------
Martello, S., Toth, P. (1990). Lower bounds and reduction procedures for the
bin packing problem. *Discrete Applied Mathematics* 28, 59-70; and
*Knapsack Problems*, Wiley 1990, ch. 8 (L1, L2).
Martello, S., Vigo, D. (1998). Exact solution of the two-dimensional finite
bin packing problem. *Management Science* 44(3) (continuous bound L0).
Martello, S., Pisinger, D., Vigo, D. (2000). The three-dimensional bin
packing problem. *Operations Research* 48(2), 256-267 (volume bound L0).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from shapely.geometry.base import BaseGeometry

from packer.errors import SizeError

__all__ = ["l1_bound", "l2_bound", "inflated_area_mm2", "bound_region_area_mm2",
           "area_bound", "volume_bound", "makespan_bound"]

_TOL = 1e-9


def _ceil(x: float) -> int:
    """Ceiling that forgives floating-point noise (2.0000000001 -> 2)."""
    return max(0, math.ceil(x - 1e-9 * max(1.0, abs(x))))


def _weights(weights: Sequence[float], capacity: float) -> np.ndarray:
    w = np.asarray(weights, dtype=float).reshape(-1)
    if capacity <= 0:
        raise SizeError(f"capacity must be positive, got {capacity}")
    if w.size and (w.min() < 0 or w.max() > capacity * (1 + _TOL)):
        raise SizeError("every weight must lie in [0, capacity]")
    return w


def l1_bound(weights: Sequence[float], capacity: float) -> int:
    """Continuous bound ``L1 = ceil(sum(w) / C)`` (Martello and Toth 1990).

    Parameters
    ----------
    weights : (n,) float
        Item sizes, each in ``[0, capacity]``.
    capacity : float
        Bin capacity.

    Examples
    --------
    >>> l1_bound([6, 6, 6, 6], 10)
    3
    """
    w = _weights(weights, capacity)
    return _ceil(float(w.sum()) / capacity)


def l2_bound(weights: Sequence[float], capacity: float) -> int:
    """Martello and Toth's bound L2 for one-dimensional bin packing.

    ``L2 = max over 0 <= a <= C/2`` of ``|J1| + |J2| + max(0, ceil((sum J3 -
    (|J2| C - sum J2)) / C))`` with ``J1 = {w > C - a}``,
    ``J2 = {C/2 < w <= C - a}``, ``J3 = {a <= w <= C/2}``. It suffices to try
    ``a = 0`` and each weight ``<= C/2`` (Martello and Toth 1990). Items of
    ``J1`` and ``J2`` need a bin each; the ``J3`` items fill the room left in
    the ``J2`` bins and then new bins. ``L2 >= L1`` always holds.

    Parameters
    ----------
    weights : (n,) float
        Item sizes, each in ``[0, capacity]``.
    capacity : float

    Examples
    --------
    >>> l2_bound([9, 8, 2, 2, 5, 4], 10)
    4
    """
    w = np.sort(_weights(weights, capacity))
    if w.size == 0:
        return 0
    c = float(capacity)
    half = c / 2
    prefix = np.concatenate(([0.0], np.cumsum(w)))
    total_sum = prefix[-1]
    n = w.size
    alphas = np.unique(np.concatenate(([0.0], w[w <= half + _TOL * c])))
    # index helpers on the sorted weights
    i_half = np.searchsorted(w, half + _TOL * c, side="right")      # w <= C/2  -> [0, i_half)
    best = 0
    for a in alphas:
        i_a = np.searchsorted(w, a - _TOL * c, side="left")            # w >= a  -> [i_a, n)
        i_big = np.searchsorted(w, c - a + _TOL * c, side="right")     # w <= C-a -> [0, i_big)
        n1 = int(n - i_big)
        n2 = int(max(0, i_big - i_half))
        s2 = prefix[i_big] - prefix[i_half] if i_big > i_half else 0.0
        s3 = prefix[i_half] - prefix[i_a] if i_half > i_a else 0.0
        extra = _ceil((s3 - (n2 * c - s2)) / c) if s3 > n2 * c - s2 else 0
        best = max(best, n1 + n2 + extra)
    return int(max(best, _ceil(total_sum / c)))


def inflated_area_mm2(footprint: BaseGeometry, spacing: float) -> float:
    """Area of a footprint grown by half the spacing (mm2).

    Two footprints at least ``spacing`` apart have disjoint half-spacing
    offsets, so these areas add up on a plate (Martello and Vigo 1998 with
    spacing folded into the items).
    """
    if spacing <= 0:
        return float(footprint.area)
    return float(footprint.buffer(spacing / 2).area)


def bound_region_area_mm2(region: BaseGeometry, spacing: float) -> float:
    """Area the inflated footprints can use (mm2).

    ``region`` is the plate already shrunk by the margin (with keep-outs
    removed); grown by ``spacing / 2`` it is the plate shrunk by
    ``margin - spacing / 2``, which holds every half-spacing offset of a part
    placed inside ``region``. A mitred offset is at least as large as the
    exact one, so the bound stays valid.
    """
    if spacing <= 0:
        return float(region.area)
    return float(region.buffer(spacing / 2, join_style="mitre").area)


def area_bound(areas_mm2: Sequence[float], plate_area_mm2: float) -> int:
    """Plates needed at least for footprints of the given (inflated) areas.

    ``max(L0, L2)``: the continuous bound ``L0 = ceil(sum a / A)`` (Martello
    and Vigo 1998) and Martello and Toth's L2 applied to the areas, which is
    valid because any packing on plates is also a packing of the areas into
    bins of capacity ``A``.

    Parameters
    ----------
    areas_mm2 : (n,) float
        Inflated footprint areas (see :func:`inflated_area_mm2`).
    plate_area_mm2 : float
        Usable plate area (see :func:`bound_region_area_mm2`).
    """
    return l2_bound(areas_mm2, plate_area_mm2)


def volume_bound(volumes_mm3: Sequence[float], container_mm3: float) -> int:
    """Builds needed at least: ``L0 = ceil(sum v / V)`` (Martello, Pisinger and Vigo 2000),
    strengthened with Martello and Toth's L2 on the volumes (valid for the same reason as
    in :func:`area_bound`)."""
    return l2_bound(volumes_mm3, container_mm3)


def makespan_bound(total_work_s: float, ready_s: Sequence[float], *,
                   longest_s: float = 0.0, plate_s: float = 0.0, plates_counted: int = 0) -> float:
    """Earliest time all work can be done on identical parallel machines (s).

    ``max(min(ready) + longest, min over k of (sum of the k earliest ready
    times + total work + extra_k) / k)``: the longest indivisible job must run on some
    machine, and the machines that take part (some k of them; a machine ready
    after the finish takes none) must supply the total work after they are
    ready (the load bound for parallel machines, Graham 1969, with machine
    release times). Work that comes in plates: each machine that takes part runs
    at least one plate, so k machines run at least k plates; with ``plate_s`` the
    least work a plate brings beyond the jobs' own and ``plates_counted`` plates of
    it already in ``total_work_s``, ``extra_k = plate_s * max(0, k - plates_counted)``.

    Parameters
    ----------
    total_work_s : float
        Sum of the work (s).
    ready_s : (m,) float
        When each machine can start (s, on the clock of the result).
    longest_s : float
        The longest indivisible piece of work (s).
    plate_s, plates_counted : float, int
        Least work of a plate beyond its jobs' (s), and how many plates of it
        ``total_work_s`` holds.

    Examples
    --------
    Two machines ready at 0, 90 s of work counted with one plate of 10 s: one machine
    alone needs 90 s, two run a second plate, (90 + 10) / 2 = 50 s.

    >>> makespan_bound(90.0, [0.0, 0.0], plate_s=10.0, plates_counted=1)
    50.0
    """
    r = np.sort(np.asarray(ready_s, dtype=float))
    if r.size == 0:
        raise SizeError("a makespan bound needs at least one machine")
    if total_work_s <= 0 and longest_s <= 0:
        return float(r[0])
    k = np.arange(1, r.size + 1)
    loads = (np.cumsum(r) + total_work_s + plate_s * np.maximum(0, k - plates_counted)) / k
    return max(float(r[0] + longest_s), float(loads.min()))
