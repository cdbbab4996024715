"""Fill a sequence of identical plates: fewest plates first, last plate compact.

With shapes allowed to touch (clearance 0), an exact-fill search
(:mod:`packer.nest.exactfill`) first tries to reach the area bound with a
share of the budget.  Phase 1 builds layouts by first-fit bottom-left fill
over plates, with the shapes in decreasing area and then in randomly
perturbed orders.  Phase 2 tries to empty the last plate: its shapes are
pushed into the other plates by overlap minimisation
(:mod:`packer.nest.search`).  Every returned plate has
passed :func:`packer.nest.verify.verify_layout`.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Sequence

import numpy as np

from packer.errors import PackerError

from packer.nest.budget import Budget, Meter, best_of
from packer.nest.construct import Layout, place_one
from packer.nest.geometry import orient_polygon
from packer.nest.kit import Kit, Room
from packer.nest.lattice import identical_fill
from packer.nest.shapes import Container, Placement, PlatesResult, Shape, placed_polygon
from packer.nest.verify import verify_layout

__all__ = ["nest_plates", "fit_on_plate", "area_bound", "default_clearance", "perturbed", "to_placements"]

#: the contact best-fit (quadratic) runs up to this many shapes
CONTACT_LIMIT = 150

#: share of the budget given to the exact-fill search (clearance 0 only) before the heuristics
EXACT_SHARE = 0.35

#: ``fit_on_plate`` tries a lattice (and the disk search) of copies of one outline from
#: this many copies on
LATTICE_MIN = 2


def default_clearance(container: Container) -> float:
    """Gap kept between outlines against floating-point noise: 1e-6 of the container size (mm)."""
    minx, miny, maxx, maxy = container.region.bounds
    return 1e-6 * max(maxx - minx, maxy - miny)


def area_bound(shapes: Sequence[Shape], container: Container) -> int:
    """Lower bound on plates: ceil(total shape area / usable container area)."""
    usable = container.usable.area
    total = sum(s.polygon.area for s in shapes)
    if total <= 0:
        return 0
    return int(math.ceil(total / usable - 1e-9))


def to_placements(kit: Kit, layout) -> tuple[Placement, ...]:
    out = []
    for i, o, p in sorted(zip(layout.items, layout.orient, layout.pos), key=lambda t: t[0]):
        ori = kit.orientations[o]
        out.append(Placement(int(i), ori.rotation, float(p[0]), float(p[1]), ori.mirror))
    return tuple(out)


def _fits_empty(kit: Kit, room: Room) -> list[bool]:
    """Per shape: does it fit the empty container in some allowed orientation?"""
    by_kind: dict[int, bool] = {}
    out = []
    for i in range(len(kit.shapes)):
        k = (kit.kind[i], kit.options[i])
        if k not in by_kind:
            by_kind[k] = place_one(kit, Layout(room), kit.options[i], tol=kit.tol) is not None
        out.append(by_kind[k])
    return out


def _first_fit(kit: Kit, room: Room, order) -> list[Layout]:
    plates: list[Layout] = []
    full: set = set()   # (plate, outline kind): that outline found no place there; plates only fill up
    for i in order:
        kind = (kit.kind[i], kit.options[i])
        for k, lay in enumerate(plates):
            if (k, kind) in full:
                continue
            got = place_one(kit, lay, kit.options[i], tol=kit.tol)
            if got is not None:
                lay.add(i, got[0], got[1])
                break
            full.add((k, kind))
        else:
            lay = Layout(room)
            got = place_one(kit, lay, kit.options[i], tol=kit.tol)
            lay.add(i, got[0], got[1])
            plates.append(lay)
    return plates


def _contact_fill(kit: Kit, room: Room, todo, budget) -> list[Layout] | None:
    """Best-fit by contact: each step places, of all remaining outlines, the one whose
    bottom-left position touches the most of its perimeter to the walls and placed shapes.

    Quadratic in the number of shapes; returns None if the budget runs out.
    """
    import shapely
    from shapely import affinity

    width = max(room.bounds[2] - room.bounds[0], room.bounds[3] - room.bounds[1])
    delta = 1e-6 * width
    walls = room.region.boundary
    areas = {i: kit.shapes[i].polygon.area for i in todo}
    remaining = sorted(todo, key=lambda i: (-areas[i], i))
    plates: list[Layout] = []
    while remaining:
        lay = Layout(room)
        edges = [walls]
        failed: set = set()
        while True:
            if budget.done():
                return None
            touch = shapely.union_all(edges).buffer(delta)
            kit.meter.charge("contact_edge", len(edges))
            best = None
            seen = set()
            for i in remaining:
                kind = (kit.kind[i], kit.options[i])
                if kind in seen or kind in failed:
                    continue
                seen.add(kind)
                got = place_one(kit, lay, kit.options[i], tol=kit.tol)
                if got is None:
                    failed.add(kind)
                    continue
                o, p = got
                ori = kit.orientations[o]
                placed = affinity.translate(orient_polygon(kit.shapes[i].polygon, ori.rotation, ori.mirror),
                                            p[0], p[1])
                frac = placed.boundary.intersection(touch).length / placed.boundary.length
                kit.meter.charge("contact")
                score = (round(frac, 6), areas[i])
                if best is None or score > best[0]:
                    best = (score, i, o, p, placed)
            if best is None:
                break
            _, i, o, p, placed = best
            lay.add(i, o, p)
            edges.append(placed.boundary)
            remaining.remove(i)
        if not lay.items:
            return None
        plates.append(lay)
    return plates


def _key(kit: Kit, plates: list[Layout]):
    if not plates:
        return (0, 0.0)
    return (len(plates), plates[-1].extent_x(kit))


def perturbed(order: list[int], areas: np.ndarray, rng: np.random.Generator) -> list[int]:
    noise = rng.uniform(0.6, 1.4, size=len(areas))
    keys = -areas[order] * noise[: len(order)]
    return [order[k] for k in np.argsort(keys, kind="stable")]


def _exact_first(shapes, container, todo, bound, budget, seed):
    """Exact-fill search at the area bound (shapes touching, clearance 0); plates or None."""
    from packer.nest.exactfill import exact_fill

    got = exact_fill([shapes[i] for i in todo], container, bins=bound, budget=budget, seed=seed)
    if not got:
        return None
    plates = [tuple(sorted((replace(q, index=todo[q.index]) for q in plate), key=lambda q: q.index))
              for plate in got]
    if any(verify_layout(shapes, plate, container) for plate in plates):
        return None   # floating-point touching beyond the checker's tolerance: leave it to the heuristics
    last = max(placed_polygon(shapes[q.index], q).bounds[2] for q in plates[-1])
    return plates, (len(plates), float(last))


def run_seed(payload, seed, meter: Meter):
    """One seeded run in this process (what each worker of :func:`nest_plates` runs; the calibration runs it alone)."""
    shapes, container, clearance, seconds, target = payload
    budget = Budget(seconds, meter)   # building the kit is work of the run too
    kit = Kit(shapes, clearance=clearance, meter=meter)
    room = Room.of(kit, container)
    fits = _fits_empty(kit, room)
    todo = [i for i in range(len(shapes)) if fits[i]]
    unplaced = [i for i in range(len(shapes)) if not fits[i]]
    areas = np.array([s.polygon.area for s in shapes])
    rng = np.random.default_rng(seed)
    base = sorted(todo, key=lambda i: (-areas[i], i))
    bound = area_bound([shapes[i] for i in todo], container) if todo else 0
    best, best_key = None, None
    attempt = 0
    extra = 0
    fit_mode = target == 1   # fit_on_plate: stop at the first one-plate layout
    if clearance == 0.0 and todo and not fit_mode:
        got = _exact_first(shapes, container, todo, max(bound, target), budget.split(EXACT_SHARE), seed)
        if got is not None:
            return got[0], unplaced, got[1]
    contact = seed % 2 == 0 and 0 < len(todo) <= CONTACT_LIMIT
    if contact and not fit_mode:
        plates = _contact_fill(kit, room, todo, budget.split(0.5))
        if plates is not None:
            best, best_key = plates, _key(kit, plates)
            if best_key[0] <= max(bound, target):
                extra = 2
    while not budget.done() or best is None:
        order = base if attempt == 0 and seed % 2 == 0 else perturbed(base, areas, rng)
        plates = _first_fit(kit, room, order)
        key = _key(kit, plates)
        if best_key is None or key < best_key:
            best, best_key = plates, key
        attempt += 1
        if fit_mode and best_key[0] <= 1:
            break
        if fit_mode and contact and attempt == 1:
            plates = _contact_fill(kit, room, todo, budget.split(0.5))
            if plates is not None and _key(kit, plates) < best_key:
                best, best_key = plates, _key(kit, plates)
                if best_key[0] <= 1:
                    break
        if best_key[0] <= max(bound, target):
            extra += 1
        if extra >= 3:
            break
    if best_key[0] > max(bound, target) and not budget.done():
        from packer.nest.search import empty_last_plate
        best = empty_last_plate(kit, room, best, budget, rng, target=max(bound, target))
    return [to_placements(kit, l) for l in best], unplaced, _key(kit, best)


def _result_key(res):
    return res[2]


def _solve(shapes, container, *, seconds, seed, workers, clearance, target, meter=None):
    """Best-of over seeds; plates as tuples of Placement, and the unplaced indices (work on ``meter``)."""
    if clearance is None:
        clearance = default_clearance(container)
    payload = (tuple(shapes), container, float(clearance), float(seconds), int(target))
    seeds = [seed * 1009 + k for k in range(max(1, workers))]
    plates, unplaced, _ = best_of(run_seed, payload, seeds, _result_key, workers=workers, meter=meter)
    return plates, unplaced


def nest_plates(shapes: Sequence[Shape], container: Container, *, seconds: float, seed: int = 0,
                workers: int = 2, clearance: float | None = None, meter: Meter | None = None) -> PlatesResult:
    """Place shapes on as few identical plates as possible.

    Parameters
    ----------
    shapes : sequence of Shape
        Footprints, already offset for spacing.
    container : Container
        One plate's usable region.
    seconds : float
        Budget (s, converted to deterministic work units, see :mod:`packer.nest.budget`).
    seed : int
    workers : int
        Processes run with different seeds; the best result wins.
    clearance : float, optional
        Gap kept between outlines (mm); default 1e-6 of the container size.
        ``0.0`` lets shapes touch exactly (jigsaw benchmarks).
    meter : Meter, optional
        Counts the work of the call (of every seed's run; see :mod:`packer.nest.budget`).

    Returns
    -------
    PlatesResult
        Plates in order (the last one packed towards x = min), and the shapes
        that fit no empty plate in any allowed orientation.
    """
    shapes = tuple(shapes)
    if not shapes:
        return PlatesResult((), ())
    plates, unplaced = _solve(shapes, container, seconds=seconds, seed=seed, workers=workers,
                              clearance=clearance, target=0, meter=meter)
    result = tuple(plates)
    for k, plate in enumerate(result):
        problems = verify_layout(shapes, plate, container)
        if problems:
            raise PackerError(f"internal error: plate {k} failed the exact check: {problems[:3]}")
    return PlatesResult(result, tuple(sorted(unplaced)))


def fit_on_plate(shapes: Sequence[Shape], container: Container, *, seconds: float,
                 seed: int = 0, clearance: float | None = None,
                 meter: Meter | None = None) -> tuple[Placement, ...] | None:
    """All shapes on one plate, or None if no such layout was found in the budget.

    Runs in the calling process (the fleet planner calls it many times) and counts its
    work on ``meter`` when given (the layout stage converts it to seconds). Many
    copies of one outline are first tried as a dense lattice
    (:func:`packer.nest.lattice.lattice_fill`), which beats the one-by-one fill
    on round and other convex parts (hexagonal against square packing).
    """
    shapes = tuple(shapes)
    if not shapes:
        return ()
    if area_bound(shapes, container) > 1:
        return None
    if len(shapes) >= LATTICE_MIN:
        gap = default_clearance(container) if clearance is None else clearance
        plate = identical_fill(shapes, container, clearance=gap, seconds=seconds / 2, seed=seed, meter=meter)
        if plate is not None and not verify_layout(shapes, plate, container):
            return plate
    plates, unplaced = _solve(shapes, container, seconds=seconds, seed=seed, workers=1,
                              clearance=clearance, target=1, meter=meter)
    if unplaced or len(plates) != 1:
        return None
    plate = plates[0]
    problems = verify_layout(shapes, plate, container)
    if problems:
        raise PackerError(f"internal error: layout failed the exact check: {problems[:3]}")
    return plate
