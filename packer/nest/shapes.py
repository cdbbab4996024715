"""Plain data of the nesting engine: shapes, containers, placements, results."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely
from shapely import affinity

from packer.errors import GeometryError, InputError

__all__ = [
    "Shape",
    "Container",
    "Placement",
    "PlatesResult",
    "StripResult",
    "placed_polygon",
]


def _check_polygon(polygon, what: str) -> shapely.Polygon:
    if not isinstance(polygon, shapely.Polygon):
        raise GeometryError(f"{what} must be a shapely Polygon, got {type(polygon).__name__}")
    if not polygon.is_valid:
        raise GeometryError(f"{what} is not a valid polygon: {shapely.is_valid_reason(polygon)}")
    if polygon.is_empty or polygon.area <= 0:
        raise GeometryError(f"{what} is empty or has no area")
    return polygon


@dataclass(frozen=True)
class Shape:
    """One footprint to place.

    Attributes
    ----------
    polygon : shapely.Polygon
        Outline (holes allowed) in its own coordinates, already offset by the
        caller for spacing (mm).
    rotations : tuple of float
        Allowed CCW rotations about the shape's own (0, 0), in degrees.
    mirror : bool
        True only if the shape may also be mirrored across the y axis.
    """

    polygon: shapely.Polygon
    rotations: tuple[float, ...] = (0.0, 90.0, 180.0, 270.0)
    mirror: bool = False

    def __post_init__(self):
        _check_polygon(self.polygon, "shape polygon")
        if not self.rotations:
            raise InputError("a shape needs at least one allowed rotation")
        rots = tuple(float(r) % 360.0 for r in self.rotations)
        object.__setattr__(self, "rotations", tuple(dict.fromkeys(rots)))


@dataclass(frozen=True)
class Container:
    """The usable region of a plate, already shrunk by the caller for margin.

    Attributes
    ----------
    region : shapely.Polygon
        Outer boundary; holes of it are keep-out zones.
    keep_out : tuple of shapely.Polygon
        Further keep-out zones (mm).
    """

    region: shapely.Polygon
    keep_out: tuple[shapely.Polygon, ...] = ()

    def __post_init__(self):
        _check_polygon(self.region, "container region")
        for k in self.keep_out:
            _check_polygon(k, "keep-out zone")
        object.__setattr__(self, "keep_out", tuple(self.keep_out))

    @classmethod
    def rectangle(cls, width: float, height: float) -> "Container":
        """The rectangle 0 <= x <= width, 0 <= y <= height (mm)."""
        if not (width > 0 and height > 0):
            raise InputError(f"rectangle container needs positive sides, got {width} x {height}")
        return cls(shapely.box(0.0, 0.0, float(width), float(height)))

    @classmethod
    def circle(cls, diameter: float, *, segments: int = 128) -> "Container":
        """A round plate centred at (d/2, d/2), as a regular polygon inscribed in the circle.

        The polygon's vertices lie on the circle, so the polygon lies inside it.
        """
        if not diameter > 0:
            raise InputError(f"circle container needs a positive diameter, got {diameter}")
        if segments < 8:
            raise InputError(f"circle container needs at least 8 segments, got {segments}")
        r = float(diameter) / 2.0
        t = np.arange(segments) * (2.0 * math.pi / segments)
        pts = np.stack([r + r * np.cos(t), r + r * np.sin(t)], axis=1)
        return cls(shapely.Polygon(pts))

    @classmethod
    def polygon(cls, points, keep_out=()) -> "Container":
        """A polygonal plate from its outline points (mm) and keep-out polygons."""
        return cls(shapely.Polygon(points), tuple(keep_out))

    @property
    def usable(self) -> shapely.Polygon:
        """Region minus keep-out zones (may be a MultiPolygon)."""
        g = self.region
        for k in self.keep_out:
            g = g.difference(k)
        return g


@dataclass(frozen=True)
class Placement:
    """Where one shape goes: mirror (optional), rotate CCW about (0, 0), translate.

    Attributes
    ----------
    index : int
        Index into the input shapes.
    rotation : float
        Degrees CCW about the shape's own (0, 0), after the optional mirror.
    x, y : float
        Translation applied last (mm).
    mirror : bool
        Mirrored across the y axis first.
    """

    index: int
    rotation: float
    x: float
    y: float
    mirror: bool = False


@dataclass(frozen=True)
class PlatesResult:
    """Placements per plate (all plates identical) and shapes that fit no empty plate."""

    plates: tuple[tuple[Placement, ...], ...]
    unplaced: tuple[int, ...]


@dataclass(frozen=True)
class StripResult:
    """A strip layout: strip spans 0 <= y <= width and 0 <= x <= length."""

    length: float
    placements: tuple[Placement, ...]


def placed_polygon(shape: Shape, placement: Placement) -> shapely.Polygon:
    """The shape's polygon moved by a placement (exact affine map)."""
    from packer.nest.geometry import orient_polygon

    g = orient_polygon(shape.polygon, placement.rotation, placement.mirror)
    return affinity.translate(g, placement.x, placement.y)


def total_area(shapes: Sequence[Shape]) -> float:
    """Sum of the shapes' areas (mm^2)."""
    return float(sum(s.polygon.area for s in shapes))
