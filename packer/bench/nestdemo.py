"""A filament-plate benchmark: copies of a dozen invented part footprints on one plate size.

The footprints are made here (brackets, rings, clips, plates with slots...), sized
like small printed parts (15-70 mm), offset by half a spacing as the planner
would do, and nested on a 244 x 198 mm plate (the fil-bench-244 profile's) with a 4 mm margin.
"""

from __future__ import annotations

import math

import shapely
from shapely import affinity

from packer.nest.shapes import Container, Shape

__all__ = ["demo_footprints", "demo_plate"]


def _regular(n: int, r: float) -> shapely.Polygon:
    return shapely.Polygon([(r * math.cos(2 * math.pi * k / n), r * math.sin(2 * math.pi * k / n))
                            for k in range(n)])


def demo_footprints() -> list[shapely.Polygon]:
    """Twelve distinct footprints (mm), several non-convex, two with holes."""
    ell = shapely.Polygon([(0, 0), (60, 0), (60, 14), (14, 14), (14, 45), (0, 45)])
    tee = shapely.Polygon([(0, 30), (50, 30), (50, 42), (31, 42), (31, 0), (19, 0), (19, 30)])
    ring = shapely.Polygon(_regular(32, 28).exterior, [_regular(32, 18).exterior.coords[::-1]])
    washer = shapely.Polygon(_regular(24, 12).exterior, [_regular(24, 6).exterior.coords[::-1]])
    clip = shapely.Polygon([(0, 0), (30, 0), (30, 6), (6, 6), (6, 18), (30, 18), (30, 24), (0, 24)])
    hexagon = _regular(6, 20)
    slot_plate = shapely.box(0, 0, 70, 35).difference(shapely.box(10, 12, 60, 23))
    knob = shapely.Point(0, 0).buffer(15, quad_segs=8)
    wedge = shapely.Polygon([(0, 0), (55, 0), (0, 25)])
    gear = shapely.Polygon([((22 if k % 2 == 0 else 17) * math.cos(math.pi * k / 10),
                             (22 if k % 2 == 0 else 17) * math.sin(math.pi * k / 10)) for k in range(20)])
    channel = shapely.Polygon([(0, 0), (40, 0), (40, 30), (30, 30), (30, 10), (10, 10), (10, 30), (0, 30)])
    tab = shapely.box(0, 0, 45, 20).union(shapely.box(15, 20, 30, 30))
    return [ell, tee, ring, washer, clip, hexagon, slot_plate, knob, wedge, gear, channel, tab]


def demo_plate(*, copies: int = 5, spacing: float = 6.0, margin: float = 4.0):
    """(shapes, container): ``copies`` of each footprint, offset by spacing / 2, on 244 x 198 mm."""
    shapes = []
    for poly in demo_footprints():
        grown = poly.buffer(spacing / 2.0, quad_segs=4, join_style="round")
        grown = shapely.Polygon(grown.exterior, [h for h in grown.interiors])
        # footprints in their own coordinates, lower-left corner at the origin
        minx, miny, _, _ = grown.bounds
        grown = affinity.translate(grown, -minx, -miny)
        shapes += [Shape(grown) for _ in range(copies)]
    container = Container.rectangle(244.0 - 2 * margin, 198.0 - 2 * margin)
    return shapes, container
