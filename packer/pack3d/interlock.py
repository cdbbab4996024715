"""Removability of packed parts by straight moves along the axes, on conservative voxel sets.

A part is *removable* when it can slide along one of +-x, +-y, +-z to infinity
without its cells meeting another part's cells. Parts come out one after the
other (:func:`stuck_parts`): a part blocked only by parts that already left is
free. Because the cell sets cover the solids, a move the cells allow is a move
the solids allow; a part flagged stuck may in truth be free by a move that is
not a straight slide along an axis (the check errs on the safe side).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CellSet", "pair_separable", "stuck_parts", "blocks"]

_DIRECTIONS = ((0, 1), (0, -1), (1, 1), (1, -1), (2, 1), (2, -1))


@dataclass(frozen=True)
class CellSet:
    """Cells of one part on a shared grid.

    Parameters
    ----------
    origin : (3,) int
        Grid index of ``mask[0, 0, 0]``.
    mask : (a, b, c) bool
    """

    origin: np.ndarray
    mask: np.ndarray

    @property
    def hi(self) -> np.ndarray:
        return self.origin + np.array(self.mask.shape)


def _window(c: CellSet, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """The part's mask placed in the grid window ``[lo, hi)`` (cells outside dropped)."""
    out = np.zeros(tuple(hi - lo), dtype=bool)
    a = np.maximum(c.origin, lo)
    b = np.minimum(c.hi, hi)
    if (b <= a).any():
        return out
    src = tuple(slice(a[k] - c.origin[k], b[k] - c.origin[k]) for k in range(3))
    dst = tuple(slice(a[k] - lo[k], b[k] - lo[k]) for k in range(3))
    out[dst] = c.mask[src]
    return out


def _sweep(mask: np.ndarray, axis: int, sign: int) -> np.ndarray:
    """Cells the mask passes through when slid along ``sign * axis`` (within the array)."""
    if sign > 0:
        return np.logical_or.accumulate(mask, axis=axis)
    flipped = np.flip(mask, axis=axis)
    return np.flip(np.logical_or.accumulate(flipped, axis=axis), axis=axis)


def blocks(a: CellSet, b: CellSet, axis: int, sign: int) -> bool:
    """Does ``b`` stand in the way of ``a`` sliding along ``sign * axis``?"""
    others = [k for k in range(3) if k != axis]
    for k in others:  # the slide keeps a inside its own extent on the other axes
        if a.hi[k] <= b.origin[k] or b.hi[k] <= a.origin[k]:
            return False
    if sign > 0 and b.hi[axis] <= a.origin[axis]:
        return False
    if sign < 0 and b.origin[axis] >= a.hi[axis]:
        return False
    lo = np.minimum(a.origin, b.origin)
    hi = np.maximum(a.hi, b.hi)
    for k in others:
        lo[k] = max(a.origin[k], b.origin[k])
        hi[k] = min(a.hi[k], b.hi[k])
    swept = _sweep(_window(a, lo, hi), axis, sign)
    return bool((swept & _window(b, lo, hi)).any())


def pair_separable(a: CellSet, b: CellSet) -> bool:
    """True when ``a`` can slide away from ``b`` along some axis direction."""
    return any(not blocks(a, b, axis, sign) for axis, sign in _DIRECTIONS)


def stuck_parts(cells: list[CellSet], *, confirm=None) -> list[int]:
    """Parts that cannot leave by axis slides, taking free parts out one after another.

    Parameters
    ----------
    cells : list of CellSet
        All parts of one build, on one grid.
    confirm : callable, optional
        ``confirm(i, j, axis, sign) -> bool``: a finer test of "part j blocks
        part i sliding along sign * axis". Coarse cells can claim a block that
        the solids do not have (for parts closer than about two cells); when
        parts stay stuck, each block that keeps them stuck is put to
        ``confirm`` once and dropped if it is not confirmed.

    Returns
    -------
    list of int: indices of parts that stay trapped (empty when all come out).
    """
    n = len(cells)
    if n == 0:
        return []
    lo = np.array([c.origin for c in cells])
    hi = np.array([c.hi for c in cells])
    # for each part and direction: the parts in its way
    blockers: list[list[set[int]]] = []
    for i in range(n):
        row = []
        for axis, sign in _DIRECTIONS:
            others = [k for k in range(3) if k != axis]
            cand = np.ones(n, dtype=bool)
            for k in others:
                cand &= (lo[:, k] < hi[i, k]) & (hi[:, k] > lo[i, k])
            cand &= (hi[:, axis] > lo[i, axis]) if sign > 0 else (lo[:, axis] < hi[i, axis])
            cand[i] = False
            row.append({int(j) for j in np.flatnonzero(cand) if blocks(cells[i], cells[j], axis, sign)})
        blockers.append(row)
    remaining = set(range(n))
    checked: set = set()
    while True:
        changed = True
        while changed and remaining:
            changed = False
            for i in sorted(remaining):
                if any(not (row & (remaining - {i})) for row in blockers[i]):
                    remaining.discard(i)
                    changed = True
        if not remaining or confirm is None:
            break
        dropped = False
        for i in sorted(remaining):
            for d, (axis, sign) in enumerate(_DIRECTIONS):
                for j in sorted(blockers[i][d] & remaining):
                    if (i, j, d) in checked:
                        continue
                    checked.add((i, j, d))
                    if not confirm(i, j, axis, sign):
                        blockers[i][d].discard(j)
                        dropped = True
        if not dropped:
            break
    return sorted(remaining)
