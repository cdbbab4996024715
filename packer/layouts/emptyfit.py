"""Whether one copy fits an empty plate: by plain geometry when the answer is clear.

Screening (``can_print`` of the flat layouts) and the parts table ask this for every part
and plate profile; the nesting engine answers it in about 20 ms a time, so a day of a
hundred parts on three profiles spent seconds on it. Most answers are clear from the
shape's extent alone, exactly:

- **Rectangular region** (the plate shrunk by its margin): a shape turned by r fits by
  translation exactly when its bounding box at r does (the shape lies in its box; a
  translated box inside the rectangle carries the shape with it; a shape inside the
  rectangle has its box inside it too). With rectangular keep-out zones, the box test is
  still necessary (zones only take room); it is sufficient in a rectangle of the region
  beside one zone (left, right, below or above it) that overlaps no zone.
- **Any other region without holes or zones** (round, polygon plates): a shape fits, in
  any turn, when its smallest enclosing circle is no larger than the largest circle about
  the region's centroid that stays inside it; it cannot fit when that circle is larger than
  the region's own smallest enclosing circle (a subset has the smaller enclosing circle).

An answer is taken from geometry only with :data:`CLEAR_MM` to spare either way, so that
rounding and the engine's own clearance (1e-6 of the plate) cannot decide it; nearer
cases, and round or polygon plates with keep-out zones, go to the engine as before. So the answer is the
engine's on every case, and the same on every machine.
"""

from __future__ import annotations

from typing import Sequence

import shapely
from shapely import affinity
from shapely.geometry import Polygon

__all__ = ["CLEAR_MM", "clear_fit"]

#: Room to spare (or lack), mm, for an answer by geometry alone (our choice: far above the
#: engine's clearance and rounding, far below any part's size).
CLEAR_MM = 0.01


def _is_box(region: Polygon) -> bool:
    minx, miny, maxx, maxy = region.bounds
    box_area = (maxx - minx) * (maxy - miny)
    return abs(box_area - region.area) <= 1e-9 * box_area


def _free_boxes(region: Polygon, zones: Sequence[Polygon]) -> list[tuple[float, ...]] | None:
    """Axis-aligned rectangles of the region that overlap no zone: the whole region without
    zones, else the region's parts beside each zone; None when a zone is not a rectangle."""
    minx, miny, maxx, maxy = region.bounds
    if not zones:
        return [(minx, miny, maxx, maxy)]
    if not all(_is_box(z) for z in zones):
        return None
    boxes = []
    for z in zones:
        zx0, zy0, zx1, zy1 = z.bounds
        boxes += [(minx, miny, min(zx0, maxx), maxy), (max(zx1, minx), miny, maxx, maxy),
                  (minx, miny, maxx, min(zy0, maxy)), (minx, max(zy1, miny), maxx, maxy)]
    return [b for b in boxes if b[2] > b[0] and b[3] > b[1] and not any(_overlap(b, z.bounds) for z in zones)]


def _overlap(a, b) -> bool:
    """Whether two axis-aligned rectangles share interior points."""
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _box_fit(grown: Polygon, rotations: Sequence[float], region: Polygon,
             zones: Sequence[Polygon]) -> bool | None:
    minx, miny, maxx, maxy = region.bounds
    free = _free_boxes(region, zones)
    every_no = True
    for r in rotations:
        x0, y0, x1, y1 = affinity.rotate(grown, r, origin=(0, 0)).bounds
        w, h = x1 - x0, y1 - y0
        if any(w <= b[2] - b[0] - CLEAR_MM and h <= b[3] - b[1] - CLEAR_MM for b in free or ()):
            return True
        if w <= maxx - minx + CLEAR_MM and h <= maxy - miny + CLEAR_MM:
            every_no = False            # near the edge, or beside a zone, in this turn: not clear
    return False if every_no else None


def _circle_fit(grown: Polygon, region: Polygon) -> bool | None:
    radius = float(shapely.minimum_bounding_radius(grown))
    centre = region.centroid
    if region.contains(centre) and radius <= float(region.exterior.distance(centre)) - CLEAR_MM:
        return True
    if radius > float(shapely.minimum_bounding_radius(region)) + CLEAR_MM:
        return False
    return None


def clear_fit(grown: Polygon, rotations: Sequence[float], region: Polygon,
              keep_out: Sequence[Polygon] = ()) -> bool | None:
    """Whether ``grown`` (a footprint grown for spacing) fits the empty ``region`` turned by
    one of ``rotations`` (degrees about (0, 0)), clear of the ``keep_out`` zones, when geometry
    alone makes that clear; None when it does not (a case near an edge, a region with holes,
    zones on a plate that is not rectangular)."""
    if region.interiors or not rotations:
        return None
    if _is_box(region):
        return _box_fit(grown, rotations, region, keep_out)
    return None if keep_out else _circle_fit(grown, region)
