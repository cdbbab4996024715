"""Strip packing: shortest length of a strip of fixed width.

A bottom-left fill gives the first feasible length.  Then, while the budget
lasts: cut the strip shorter by a ratio at a random x (shapes right of the cut
shift left, so overlap appears in one band), and run overlap minimisation
(:func:`packer.nest.search.separate`).  Success keeps the shorter layout;
failure restores the best one and shrinks the ratio.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import shapely

from packer.errors import InputError, PackerError

from packer.nest.budget import STRIP_RATE, Budget, Meter, best_of
from packer.nest.construct import Layout, fill
from packer.nest.kit import Kit, Room
from packer.nest.fastmove import TouchTable
from packer.nest.search import State, separate
from packer.nest.shapes import Container, Placement, Shape, StripResult, placed_polygon
from packer.nest.verify import verify_layout

__all__ = ["nest_strip"]

STRIKES = 100
#: restart from a new fill after this fraction of the budget without a shorter layout
RESTART_AFTER = 0.2


def _room(kit: Kit, length: float, width: float) -> Room:
    return Room(kit, shapely.box(0.0, 0.0, length, width))


def _extent(kit: Kit, orient, pos) -> float:
    return float(max(p[0] + kit.orientations[o].bbox[2] for o, p in zip(orient, pos)))


def _initial(kit: Kit, width: float, big: float, order) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    lay = Layout(_room(kit, big, width))
    left = fill(kit, lay, order, tol=kit.tol)
    if left:
        raise PackerError(f"internal error: shapes {left} found no place in an empty strip")
    return np.array(lay.items), np.array(lay.orient), np.array(lay.pos)


def run_seed(payload, seed, meter: Meter):
    """One seeded run in this process (what each worker of :func:`nest_strip` runs; the calibration runs it alone)."""
    shapes, width, seconds, clearance = payload
    meter.rates = STRIP_RATE   # the strip search's own fit of the work rates (see budget.py)
    budget = Budget(seconds, meter)
    kit = Kit(shapes, clearance=clearance, meter=meter)
    touch = TouchTable(kit)   # each move of the search is one compiled call (fastmove.py)
    rng = np.random.default_rng(seed)
    widths = [min(kit.orientations[o].bbox[2] - kit.orientations[o].bbox[0] for o in kit.options[i])
              for i in range(len(shapes))]
    big = float(sum(widths)) * 1.01 + kit.scale
    areas = np.array([s.polygon.area for s in shapes])
    base = sorted(range(len(shapes)), key=lambda i: (-areas[i], i))
    order = base
    if seed % 2:
        noise = rng.uniform(0.7, 1.3, size=len(shapes))
        order = sorted(base, key=lambda i: -areas[i] * noise[i])
    units = meter.units
    items, orient, pos = _initial(kit, width, big, order)
    fill_units = meter.units - units   # what a restart's fill costs (not checked against the budget)
    best_len = _extent(kit, orient, pos)
    best = (orient, pos)
    top = (items, orient, pos, best_len)
    kinds = np.array([kit.kind[i] for i in items])
    ratio, floor = 0.02, 0.002
    fails = 0
    improved_at = budget.used()
    while not budget.done():
        left = budget.limit * (1.0 - budget.used())
        if budget.used() - improved_at > RESTART_AFTER and left > 2.0 * fill_units:
            # stagnation: start again from a bottom-left fill in a perturbed order
            noise = rng.uniform(0.6, 1.4, size=len(shapes))
            order = sorted(base, key=lambda i: -areas[i] * noise[i])
            items, orient, pos = _initial(kit, width, big, order)
            kinds = np.array([kit.kind[i] for i in items])
            best_len = _extent(kit, orient, pos)
            best = (orient, pos)
            ratio, fails = 0.02, 0
            improved_at = budget.used()
        length = best_len * (1.0 - ratio)
        room = _room(kit, length, width)
        pos = best[1].copy()
        orient = best[0].copy()
        cut = rng.uniform(0.0, length)
        shift = pos[:, 0] > cut
        pos[shift, 0] -= best_len - length
        if fails >= 3 and len(items) > 1:
            _swap(kit, orient, pos, kinds, areas[items], rng)
        state = State(kit, room, items, orient, pos, np.zeros(len(items), dtype=np.int64), 1, rng,
                      compiled_steps=True, touch=touch)
        ok = separate(state, budget, strikes=STRIKES, worst_first=True)
        if ok:
            best_len = min(length, _extent(kit, state.orient, state.pos))
            best = (state.orient.copy(), state.pos.copy())
            fails = 0
            improved_at = budget.used()
            if best_len < top[3]:
                top = (items, best[0], best[1], best_len)
        else:
            ratio = max(floor, ratio * 0.7)
            if ratio <= floor:
                fails += 1
    return top


def _swap(kit: Kit, orient, pos, kinds, areas, rng) -> None:
    """Exchange two shapes of different outlines (bounding-box centres swap); in place."""
    p = areas / areas.sum()
    for _ in range(10):
        a, b = rng.choice(len(pos), size=2, replace=False, p=p)
        if kinds[a] != kinds[b]:
            break
    else:
        return
    ca = pos[a] + (kit.orientations[orient[a]].bbox[:2] + kit.orientations[orient[a]].bbox[2:]) / 2
    cb = pos[b] + (kit.orientations[orient[b]].bbox[:2] + kit.orientations[orient[b]].bbox[2:]) / 2
    pos[a] = cb - (kit.orientations[orient[a]].bbox[:2] + kit.orientations[orient[a]].bbox[2:]) / 2
    pos[b] = ca - (kit.orientations[orient[b]].bbox[:2] + kit.orientations[orient[b]].bbox[2:]) / 2


def nest_strip(shapes: Sequence[Shape], *, width: float, seconds: float, seed: int = 0,
               workers: int = 2, clearance: float | None = None) -> StripResult:
    """Place every shape in the strip 0 <= y <= width, minimising the used length.

    Parameters
    ----------
    shapes : sequence of Shape
    width : float
        Strip width (mm).
    seconds : float
        Budget (s, converted to deterministic work units).
    seed : int
    workers : int
        Processes with different seeds; the shortest layout wins.
    clearance : float, optional
        Gap kept between outlines; default 1e-6 of the width.

    Returns
    -------
    StripResult
        ``length`` is the largest x of any placed shape.
    """
    shapes = tuple(shapes)
    if not width > 0:
        raise InputError(f"strip width must be positive, got {width}")
    if not shapes:
        return StripResult(0.0, ())
    if clearance is None:
        clearance = 1e-6 * float(width)
    payload = (shapes, float(width), float(seconds), float(clearance))
    seeds = [seed * 1009 + k for k in range(max(1, workers))]
    items, orient, pos, _ = best_of(run_seed, payload, seeds, lambda r: r[3], workers=workers)
    out = []
    for i, o, p in zip(items, orient, pos):
        out.append((int(i), int(o), p))
    # orientation ids -> (rotation, mirror): rebuild the numbering without geometry work
    table = _orientation_table(shapes)
    placements = tuple(sorted((Placement(i, table[o][0], float(p[0]), float(p[1]), table[o][1])
                               for i, o, p in out), key=lambda q: q.index))
    length = max(placed_polygon(shapes[q.index], q).bounds[2] for q in placements)
    length = max(length, 0.0)
    problems = verify_layout(shapes, placements, Container.rectangle(max(length, 1e-12), width))
    if problems:
        raise PackerError(f"internal error: strip layout failed the exact check: {problems[:3]}")
    return StripResult(float(length), placements)


def _orientation_table(shapes):
    table, seen = [], {}
    for s in shapes:
        wkb = shapely.to_wkb(s.polygon)
        for m in ((False, True) if s.mirror else (False,)):
            for r in s.rotations:
                key = (wkb, float(r), m)
                if key not in seen:
                    seen[key] = len(table)
                    table.append((float(r), m))
    return table
