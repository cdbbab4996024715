"""Lattice fill: many copies of one outline on one plate, as a regular array.

A print farm's most common plate holds copies of a single part. Placing them
one by one (bottom-left fill) tends to a square grid; the densest arrangement
of a convex outline by translations is a lattice whose neighbours touch
(for disks the hexagonal one, pi / sqrt(12) ~ 90.7 % against 78.5 % for the
square grid: Thue's theorem). This module finds a dense touching lattice of
one outline in one orientation and keeps the lattice points whose copy lies
inside the container.

Method, per allowed orientation and for the first basis vector along x and
along y: the no-fit polygon ``N = A + (-A)`` of the outline with itself (union
of the Minkowski sums of its convex parts, holes of ``N`` ignored, which is
conservative); ``u`` is the last point of the axis ray inside ``N`` (copies
touching side by side); ``v`` runs over points of the boundary of
``N u (N + u) u (N - u)`` on the far side of the ``u`` axis, and the lattice
of smallest cell area ``|u x v|`` with no point ``i u + j v`` (|i|, |j| <= 3,
not both 0) inside ``N`` wins. Copies then go at the lattice points, over a few
phase shifts, whose placed outline lies in the container and off its keep-out
zones; the phase with the most copies wins, and copies are taken from the
bottom-left corner so the free area stays in one piece. The caller verifies
the layout exactly (:func:`packer.nest.verify.verify_layout`).
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np
import shapely
from shapely import affinity

from packer.nest.budget import Budget, Meter
from packer.nest.diskfill import ROUND_ENOUGH, disk_of, pack_disks
from packer.nest.geometry import convex_parts, orient_polygon
from packer.nest.shapes import Container, Placement, Shape

__all__ = ["self_nfp", "axis_lattices", "dense_lattice", "lattice_fill", "identical_fill"]

#: lattice neighbours checked against the no-fit polygon: |i|, |j| <= this
_REACH = 3

#: work units charged per rotation tried (about 0.015 s of wall clock each on the
#: development machine; see :mod:`packer.nest.budget`)
LATTICE_WORK = 10_000_000


def self_nfp(polygon: shapely.Polygon) -> shapely.Polygon:
    """No-fit polygon of a polygon with a copy of itself: translations where they overlap.

    ``A + (-A)`` as the union of the convex hulls of the pairwise differences of
    its convex parts; holes are filled (conservative: a copy threaded through a
    hole of another is not used).
    """
    parts = convex_parts(polygon)
    hulls = []
    for p in parts:
        for q in parts:
            d = (p[:, None, :] - q[None, :, :]).reshape(-1, 2)
            hulls.append(shapely.MultiPoint(d).convex_hull)
    n = shapely.union_all(hulls)
    if n.geom_type != "Polygon":
        n = n.convex_hull
    return shapely.Polygon(n.exterior)


def _inside(nfp_core: shapely.Polygon, pts: np.ndarray) -> np.ndarray:
    return shapely.contains_xy(nfp_core, pts[:, 0], pts[:, 1])


def _feasible(nfp_core, u: np.ndarray, v: np.ndarray) -> bool:
    k = np.arange(-_REACH, _REACH + 1)
    i, j = np.meshgrid(k, k, indexing="ij")
    keep = (i != 0) | (j != 0)
    pts = i[keep][:, None] * u[None, :] + j[keep][:, None] * v[None, :]
    return not _inside(nfp_core, pts).any()


def _axis_reach(nfp: shapely.Polygon, axis: int) -> float:
    """Largest t > 0 with t * e_axis on the no-fit polygon (the touching distance)."""
    b = nfp.bounds
    far = 2.0 * max(abs(v) for v in b) + 1.0
    ray = shapely.LineString([(0.0, 0.0), (far, 0.0)] if axis == 0 else [(0.0, 0.0), (0.0, far)])
    hit = nfp.intersection(ray)
    if hit.is_empty:
        return 0.0
    coords = np.asarray(shapely.get_coordinates(hit))
    return float(coords[:, axis].max())


def axis_lattices(polygon: shapely.Polygon, *, samples: int = 400) -> list[tuple[np.ndarray, np.ndarray]]:
    """The densest touching lattice found with its first basis vector along x, and along y.

    Returns up to two bases (u, v), each (2,) float mm; an arrangement in rows and
    one in columns fill a rectangle differently, so a plate tries both.
    """
    nfp = self_nfp(polygon)
    scale = max(nfp.bounds[2] - nfp.bounds[0], nfp.bounds[3] - nfp.bounds[1])
    core = nfp.buffer(-1e-7 * scale, join_style="mitre")      # strict interior: touching is allowed
    out = []
    for axis in (0, 1):
        t = _axis_reach(nfp, axis)
        if t <= 0:
            continue
        u = np.array([t, 0.0]) if axis == 0 else np.array([0.0, t])
        union = shapely.union_all([nfp, affinity.translate(nfp, *u), affinity.translate(nfp, *(-u))])
        ring = union.exterior
        dist = np.linspace(0.0, ring.length, samples, endpoint=False)
        cand = np.asarray(shapely.get_coordinates(shapely.line_interpolate_point(ring, dist)))
        cand = np.vstack([cand, np.asarray(ring.coords)[:-1]])
        other = 1 - axis
        cand = cand[cand[:, other] > 1e-9 * scale]
        if not len(cand):
            continue
        areas = np.abs(u[0] * cand[:, 1] - u[1] * cand[:, 0])
        for k in np.argsort(areas, kind="stable"):
            if _feasible(core, u, cand[k]):
                out.append((u, cand[k].copy()))
                break
    return out


def dense_lattice(polygon: shapely.Polygon, *, samples: int = 400) -> tuple[np.ndarray, np.ndarray] | None:
    """A dense touching lattice (u, v) of translations for copies of ``polygon``.

    Returns the basis of smallest cell area found (both (2,) float, mm), or None
    when no lattice was found.
    """
    found = axis_lattices(polygon, samples=samples)
    if not found:
        return None
    return min(found, key=lambda b: abs(b[0][0] * b[1][1] - b[0][1] * b[1][0]))


def _one_outline(shapes: Sequence[Shape]) -> bool:
    first = shapes[0]
    key = shapely.to_wkb(first.polygon)
    return all((s.polygon is first.polygon or shapely.to_wkb(s.polygon) == key)
               and s.rotations == first.rotations and s.mirror == first.mirror for s in shapes)


def lattice_fill(shapes: Sequence[Shape], container: Container, *, clearance: float = 0.0,
                 phases: int = 4, at_least: int | None = None,
                 meter: Meter | None = None) -> tuple[Placement, ...] | None:
    """All ``shapes`` (copies of one outline) on the container as a lattice, or None.

    Parameters
    ----------
    shapes : sequence of Shape
        Copies of one outline with the same rotations and mirror rule.
    container : Container
    clearance : float, mm
        Gap kept between copies (each outline grown by half of it for the lattice).
    phases : int
        Lattice offsets tried along each basis vector.
    at_least : int, optional
        Accept layouts of the first ``at_least`` shapes or more (default: all).

    Returns
    -------
    tuple of Placement or None
        One placement per placed shape (indices 0..m-1, m as large as the lattice
        allows, at most n), not yet verified.
    """
    n = len(shapes)
    if n == 0:
        return ()
    first = shapes[0]
    if not _one_outline(shapes):
        return None
    (Meter() if meter is None else meter).charge_units(LATTICE_WORK * len(first.rotations))
    region = container.region
    blocked = shapely.union_all(list(container.keep_out)) if container.keep_out else None
    best: tuple | None = None
    for rotation in first.rotations:
        outline = orient_polygon(first.polygon, rotation, False)
        grown = outline.buffer(clearance / 2.0, join_style="mitre") if clearance > 0 else outline
        for u, v in axis_lattices(grown):
            best = _place_lattice(outline, u, v, region, blocked, n, phases, rotation, best,
                                  n if at_least is None else max(1, at_least))
    if best is None:
        return None
    _, rotation, chosen = best
    return tuple(Placement(index=k, rotation=float(rotation), x=float(x), y=float(y))
                 for k, (x, y) in enumerate(chosen))


def _place_lattice(outline, u, v, region, blocked, n, phases, rotation, best, need):
    """The best of ``best`` and the phases of lattice (u, v): (score, rotation, points (n, 2))."""
    rb = np.array(region.bounds)
    ob = np.array(outline.bounds)
    span = np.hypot(rb[2] - rb[0], rb[3] - rb[1])
    m = int(math.ceil(2 * span / min(np.hypot(*u), np.hypot(*v)))) + 2
    k = np.arange(-m, m + 1)
    i, j = np.meshgrid(k, k, indexing="ij")
    grid = i.ravel()[:, None] * u[None, :] + j.ravel()[:, None] * v[None, :]
    base = rb[:2] - ob[:2]          # outline's bounding box on the region's lower-left corner
    for a in range(phases):
        for b in range(phases):
            pts = base + grid + (a / phases) * u + (b / phases) * v
            lo = pts + ob[:2]
            hi = pts + ob[2:]
            near = (lo[:, 0] >= rb[0] - 1e-9) & (lo[:, 1] >= rb[1] - 1e-9) \
                & (hi[:, 0] <= rb[2] + 1e-9) & (hi[:, 1] <= rb[3] + 1e-9)
            pts = pts[near]
            if len(pts) < need:
                continue
            placed = np.array([affinity.translate(outline, x, y) for x, y in pts], dtype=object)
            ok = shapely.covers(region, placed)
            if blocked is not None:
                ok &= ~shapely.intersects(blocked, placed) | (shapely.area(
                    shapely.intersection(blocked, placed)) <= 1e-12)
            good = pts[ok]
            if len(good) < need:
                continue
            order = np.lexsort((good[:, 1], good[:, 0]))     # from x = min: free area on the right
            chosen = good[order[:n]]
            score = (-len(chosen), -len(good), float(chosen[:, 0].max()), float(chosen[:, 1].max()))
            if best is None or score < best[0]:
                best = (score, rotation, chosen)
    return best


def identical_fill(shapes: Sequence[Shape], container: Container, *, clearance: float, seconds: float,
                   at_least: int | None = None, seed: int = 0,
                   meter: Meter | None = None) -> tuple[Placement, ...] | None:
    """As many of ``shapes`` (copies of one outline) as fit, from a clipped lattice and a disk search.

    The lattice (:func:`lattice_fill`) is clipped to the plate. Where it leaves
    copies off and the outline is round enough (it fills at least
    :data:`~packer.nest.diskfill.ROUND_ENOUGH` of its enclosing disk), the last
    copies are searched for as equal disks (:func:`packer.nest.diskfill.pack_disks`):
    one more copy than the best layout so far, until all are placed or the budget
    is spent. This is what places five rings on a round plate that holds no
    lattice of five, and the best-known packings of a few equal circles.

    Parameters
    ----------
    shapes : sequence of Shape
        Copies of one outline (same rotations and mirror rule), most wanted first.
    container : Container
    clearance : float, mm
        Gap kept between copies.
    seconds : float
        Budget in seconds of work units for the disk search.
    at_least : int, optional
        Fewest copies worth returning (default: all of them).
    seed : int

    Returns
    -------
    tuple of Placement or None
        Placements of the first m shapes (m >= ``at_least``, indices 0..m-1), not yet
        verified; None when no layout of ``at_least`` copies was found.
    """
    n = len(shapes)
    need = n if at_least is None else max(1, int(at_least))
    if n == 0 or not _one_outline(shapes):
        return None if n else ()
    meter = Meter() if meter is None else meter
    lat = lattice_fill(shapes, container, clearance=clearance, at_least=1, meter=meter)
    best = lat if lat else ()
    if len(best) < n:
        disks = _disk_search(shapes[0], container, clearance, n, len(best), Budget(seconds, meter), seed)
        if disks is not None and len(disks) > len(best):
            best = disks
    return best if len(best) >= need else None


def _disk_search(shape: Shape, container: Container, clearance: float, n: int, have: int,
                 budget: Budget, seed: int) -> tuple[Placement, ...] | None:
    """The most copies (more than ``have``, up to n) placed as disks, each count tried in turn."""
    rotation = shape.rotations[0]
    outline = orient_polygon(shape.polygon, rotation, False)
    centre, radius = disk_of(outline)
    if outline.area < ROUND_ENOUGH * math.pi * radius ** 2:
        return None
    r = radius + clearance / 2.0
    # most copies worth trying: the plate's area at the hexagonal density (pi / sqrt 12, Thue),
    # an estimate (not a bound) of what the plate holds
    region = container.region.area - sum(z.intersection(container.region).area for z in container.keep_out)
    top = min(n, int(region * math.pi / math.sqrt(12) / (math.pi * r * r)))
    if top <= have:
        return None
    found = pack_disks(top, r, container.region, container.keep_out, budget=budget.split(0.5), seed=seed + top)
    if found is None:
        for k in range(have + 1, top):
            pts = pack_disks(k, r, container.region, container.keep_out, budget=budget.split(0.5), seed=seed + k)
            if pts is None:
                break
            found = pts
            if budget.done():
                break
    if found is None:
        return None
    order = np.lexsort((found[:, 1], found[:, 0]))
    return tuple(Placement(index=i, rotation=float(rotation), x=float(x - centre[0]), y=float(y - centre[1]))
                 for i, (x, y) in enumerate(found[order]))
