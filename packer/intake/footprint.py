"""Footprints prepared for nesting: offset for spacing, simplified outward.

The nesting engine only keeps shapes from overlapping. To make "at least
``spacing`` apart" exact, every footprint grows by ``spacing / 2`` once, here,
and the plate shrinks by ``margin - spacing / 2``. Two grown shapes that do not
overlap are then at least ``spacing`` apart, and a grown shape inside the
shrunk plate keeps ``margin`` from the edge (Minkowski sums: for sets A, B,
dist(A, B) >= a + b exactly when A + disc(a) and B + disc(b) have disjoint
interiors).

Polygon offsets approximate arcs by chords. A chord lies inside its arc, so a
plain buffer would be slightly too small; we enlarge the radius by
1 / cos(pi / (4 q)) for q segments per quarter circle so that every chord lies
outside the true arc. Simplification moves edges by at most ``tolerance``
(Hausdorff distance), so the simplified outline grown by ``tolerance`` more
still covers the exact one. Every layout is still re-checked with exact
distances on the original footprints before it is written.
"""

from __future__ import annotations

import math

import shapely
from shapely.geometry import Polygon, box

from packer.errors import GeometryError
from packer.intake.profile import PlateProfile

__all__ = ["grown_footprint", "outward_radius", "nest_region", "keep_out_zones", "plate_polygon"]

QUAD_SEGS = 4


def outward_radius(radius: float, *, quad_segs: int = QUAD_SEGS) -> float:
    """Buffer radius whose polygonal arcs lie outside the true circle of ``radius``.

    A regular polygon with q segments per quarter turn has its edge midpoints at
    ``R cos(pi / (4 q))`` from the centre; setting that equal to ``radius`` gives R.
    """
    return radius / math.cos(math.pi / (4 * quad_segs))


def grown_footprint(footprint: Polygon, *, spacing: float, tolerance: float = 0.2) -> Polygon:
    """The footprint grown by ``spacing / 2`` (and simplified), covering the exact offset.

    Parameters
    ----------
    footprint
        Exact XY shadow of a part (mm), possibly with holes.
    spacing
        Minimum gap between parts (mm).
    tolerance
        Simplification tolerance (mm); the result stays conservative.

    Returns
    -------
    Polygon
        One polygon (holes that survive the offset are kept) that covers
        ``footprint.buffer(spacing / 2)``.
    """
    if footprint.is_empty or footprint.area <= 0:
        raise GeometryError("footprint is empty")
    simple = footprint.simplify(tolerance, preserve_topology=True) if tolerance > 0 else footprint
    radius = spacing / 2 + (tolerance if tolerance > 0 else 0.0)
    if radius > 0:
        grown = simple.buffer(outward_radius(radius), quad_segs=QUAD_SEGS)
    else:
        grown = shapely.make_valid(simple)
    if grown.geom_type != "Polygon":
        # islands that stay apart after growing: nest them as one outline with its hull
        grown = shapely.convex_hull(grown)
    # drop collinear and near-duplicate points, keeping the outline outside (a
    # further tiny grow covers what the removal could cut)
    return shapely.set_precision(grown.buffer(1e-6, join_style="mitre"), 0.0)


def plate_polygon(profile: PlateProfile, *, circle_segments: int = 96) -> Polygon:
    """The plate outline; a round plate becomes an inscribed polygon (inside the true circle)."""
    x, y = profile.build_volume[:2]
    if profile.plate_shape == "circle":
        return shapely.Point(x / 2, y / 2).buffer(min(x, y) / 2, quad_segs=circle_segments // 4)
    if profile.plate_shape == "polygon":
        return Polygon(profile.plate_points)
    return box(0.0, 0.0, x, y)


def keep_out_zones(profile: PlateProfile, *, grow: float) -> tuple[Polygon, ...]:
    """Keep-out rectangles grown by ``grow`` with mitred corners (a superset of the round offset)."""
    return tuple(box(*r).buffer(grow, join_style="mitre") if grow > 0 else box(*r)
                 for r in profile.keep_out)


def nest_region(profile: PlateProfile, *, spacing: float, margin: float) -> tuple[Polygon, tuple[Polygon, ...]]:
    """Container for grown footprints: the plate shrunk by ``margin - spacing / 2``.

    Returns the region and the keep-out zones grown so that a grown footprint
    clear of them keeps ``margin`` from each zone. Valid for convex plates
    (rectangles, circles, convex polygons), which is what profiles allow.
    """
    plate = plate_polygon(profile)
    shrink = margin - spacing / 2
    if shrink > 0:
        region = plate.buffer(-shrink, join_style="mitre")
    elif shrink < 0:
        # growing a convex plate: round joins (chords inside the true offset) stay conservative
        region = plate.buffer(-shrink, quad_segs=16)
    else:
        region = plate
    return region, keep_out_zones(profile, grow=max(shrink, 0.0))
