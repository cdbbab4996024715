"""Container loading: choose and place boxes in one container to fill most of its volume.

Boxes have exact integer sizes, no spacing and need no support from below (the
powder-bed case). The method is block building on maximal empty spaces, in the
spirit of the GRASP of Parreno, Alvarez-Valdes, Oliveira and Tamarit (2008,
INFORMS J. Computing 20(3)): repeatedly take the empty space whose corner lies
nearest a container corner, fill it from that corner with the block (an
nx x ny x nz array of one box type in one orientation) of greatest volume, and
split the space. Later restarts pick randomly among blocks close to the best
one; the best loading found in the time budget is kept.
"""

from __future__ import annotations

import itertools
import time
from dataclasses import dataclass

import numpy as np

from packer.errors import InputError

__all__ = ["BoxType", "BoxPlacement", "BoxLoading", "box_orientations", "pack_boxes", "loading_problems"]


@dataclass(frozen=True)
class BoxType:
    """A kind of box: id, (l, w, h) integer sizes, how many, which sides may stand vertical."""

    id: str
    dims: tuple[int, int, int]
    quantity: int
    upright: tuple[bool, bool, bool] = (True, True, True)


@dataclass(frozen=True)
class BoxPlacement:
    """One box: its id, lowest corner (x, y, z) and extents (dx, dy, dz) after rotation."""

    box: str
    corner: tuple[int, int, int]
    dims: tuple[int, int, int]


@dataclass(frozen=True)
class BoxLoading:
    """A loading: placements, packed volume and its share of the container volume."""

    placements: tuple[BoxPlacement, ...]
    packed_volume: int
    utilisation: float


def box_orientations(t: BoxType) -> list[tuple[int, int, int]]:
    """Distinct (dx, dy, dz) a box may take: any allowed vertical side, the other two either way."""
    out = []
    for i in range(3):
        if not t.upright[i]:
            continue
        a, b = [t.dims[k] for k in range(3) if k != i]
        for d in ((a, b, t.dims[i]), (b, a, t.dims[i])):
            if d not in out:
                out.append(d)
    return out


def _blocks(space_size, orients, qty):
    """Candidate blocks (volume, count tuple, orientation) of one type for a space."""
    out = []
    for o in orients:
        m = [space_size[k] // o[k] for k in range(3)]
        if min(m) == 0:
            continue
        seen = set()
        for order in itertools.permutations(range(3)):
            n = [0, 0, 0]
            left = qty
            for k in order:
                n[k] = max(1, min(m[k], left))
                left = left // n[k]
            n = tuple(n)
            if n in seen or n[0] * n[1] * n[2] > qty:
                continue
            seen.add(n)
            out.append((n[0] * n[1] * n[2] * o[0] * o[1] * o[2], n, o))
    return out


def _split(spaces: np.ndarray, block: np.ndarray, min_side: int) -> np.ndarray:
    """Maximal spaces after placing a block: split the spaces it meets, drop the dominated."""
    lo, hi = spaces[:, :3], spaces[:, 3:]
    meets = np.all((lo < block[3:]) & (hi > block[:3]), axis=1)
    keep = spaces[~meets]
    pieces = []
    for s in spaces[meets]:
        for k in range(3):
            if block[k] > s[k]:
                p = s.copy()
                p[3 + k] = block[k]
                pieces.append(p)
            if block[3 + k] < s[3 + k]:
                p = s.copy()
                p[k] = block[3 + k]
                pieces.append(p)
    if not pieces:
        return keep
    new = np.array(pieces)
    new = new[np.all(new[:, 3:] - new[:, :3] >= min_side, axis=1)]
    if len(new) == 0:
        return keep
    new = np.unique(new, axis=0)
    # drop new pieces inside an old space or inside another new piece
    allsp = np.concatenate([keep, new])
    inside = np.all(new[:, None, :3] >= allsp[None, :, :3], axis=2) & np.all(new[:, None, 3:] <= allsp[None, :, 3:], axis=2)
    inside[np.arange(len(new)), len(keep) + np.arange(len(new))] = False
    return np.concatenate([keep, new[~inside.any(axis=1)]])


def _construct(container, types, orients, rng, delta) -> tuple[list[BoxPlacement], int]:
    L = np.array(container, dtype=np.int64)
    spaces = np.array([[0, 0, 0, *container]], dtype=np.int64)
    left = [t.quantity for t in types]
    placements: list[BoxPlacement] = []
    packed = 0
    while len(spaces):
        avail = [k for k in range(len(types)) if left[k] > 0]
        if not avail:
            break
        min_side = min(min(types[k].dims) for k in avail)
        spaces = spaces[np.all(spaces[:, 3:] - spaces[:, :3] >= min_side, axis=1)]
        if not len(spaces):
            break
        # the space whose nearest container corner is closest (sorted distance vectors, lexicographic)
        d_lo, d_hi = spaces[:, :3], L - spaces[:, 3:]
        dist = np.minimum(d_lo, d_hi)
        key = np.sort(dist, axis=1)
        vol = np.prod(spaces[:, 3:] - spaces[:, :3], axis=1)
        pick = np.lexsort((-vol, key[:, 2], key[:, 1], key[:, 0]))[0]
        s = spaces[pick]
        size = s[3:] - s[:3]
        cands = []
        for k in avail:
            for v, n, o in _blocks(size, orients[k], left[k]):
                cands.append((v, k, n, o))
        if not cands:
            spaces = np.delete(spaces, pick, axis=0)
            continue
        cands.sort(key=lambda c: (-c[0], c[1], c[2], c[3]))
        if delta > 0:
            good = [c for c in cands if c[0] >= (1 - delta) * cands[0][0]]
            v, k, n, o = good[int(rng.integers(len(good)))]
        else:
            v, k, n, o = cands[0]
        ext = np.array([n[i] * o[i] for i in range(3)], dtype=np.int64)
        at_hi = d_hi[pick] < d_lo[pick]
        corner = np.where(at_hi, s[3:] - ext, s[:3])
        for i, j, l in itertools.product(range(n[0]), range(n[1]), range(n[2])):
            c = corner + np.array([i * o[0], j * o[1], l * o[2]])
            placements.append(BoxPlacement(box=types[k].id, corner=tuple(int(x) for x in c), dims=tuple(o)))
        left[k] -= n[0] * n[1] * n[2]
        packed += v
        spaces = _split(spaces, np.concatenate([corner, corner + ext]), min_side)
    return placements, packed


def pack_boxes(container: tuple[int, int, int], types: list[BoxType], *, seconds: float,
               seed: int = 0, restarts: int | None = None) -> BoxLoading:
    """Load one container with a subset of the boxes, maximising packed volume.

    Parameters
    ----------
    container : (3,) int
        Inner lengths L, W, H.
    types : list of BoxType
    seconds : float
        Time budget for the randomised restarts (the first, greedy loading always runs).
    seed : int
    restarts : int, optional
        Run exactly this many randomised restarts whatever the time (same seed,
        same loading); by default restarts run until ``seconds`` are used.

    Returns
    -------
    BoxLoading
    """
    if len(container) != 3 or min(container) <= 0:
        raise InputError(f"container must be three positive lengths, not {container!r}")
    for t in types:
        if min(t.dims) <= 0 or t.quantity < 0 or not any(t.upright):
            raise InputError(f"box {t.id}: sizes must be positive, quantity >= 0, one side may stand vertical")
    orients = [box_orientations(t) for t in types]
    rng = np.random.default_rng(seed)
    start = time.monotonic()
    best, best_v = _construct(container, types, orients, rng, 0.0)
    total = sum(t.quantity * int(np.prod(t.dims)) for t in types)
    runs = 0
    while best_v < total and (runs < restarts if restarts is not None else time.monotonic() - start < seconds):
        runs += 1
        delta = float(rng.choice([0.05, 0.1, 0.2, 0.3, 0.5]))
        pl, v = _construct(container, types, orients, rng, delta)
        if v > best_v:
            best, best_v = pl, v
    return BoxLoading(placements=tuple(best), packed_volume=int(best_v),
                      utilisation=best_v / float(np.prod(container)))


def loading_problems(container: tuple[int, int, int], types: list[BoxType],
                     placements: tuple[BoxPlacement, ...]) -> list[str]:
    """Check a loading: known boxes, quantities, allowed rotations, containment, no overlap.

    Returns
    -------
    list of str, one line per problem (empty when the loading is valid).
    """
    by_id = {t.id: t for t in types}
    problems, used = [], {}
    lo, hi = [], []
    for n, p in enumerate(placements):
        t = by_id.get(p.box)
        if t is None:
            problems.append(f"placement {n}: unknown box {p.box!r}")
            continue
        used[p.box] = used.get(p.box, 0) + 1
        if tuple(p.dims) not in box_orientations(t):
            problems.append(f"placement {n}: extents {p.dims} are not an allowed rotation of box {t.id}")
        a = np.array(p.corner)
        b = a + np.array(p.dims)
        if (a < 0).any() or (b > np.array(container)).any():
            problems.append(f"placement {n}: box {t.id} leaves the container")
        lo.append(a)
        hi.append(b)
    for key, c in used.items():
        if c > by_id[key].quantity:
            problems.append(f"box {key}: placed {c} times, only {by_id[key].quantity} available")
    if lo:
        lo, hi = np.array(lo), np.array(hi)
        for i in range(len(lo)):
            ov = np.all((np.minimum(hi[i], hi[i + 1:]) - np.maximum(lo[i], lo[i + 1:])) > 0, axis=1)
            for j in np.flatnonzero(ov) + i + 1:
                problems.append(f"placements {i} and {j} overlap")
    return problems
