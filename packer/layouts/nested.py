"""Plate layouts for filament and resin plates: copies of parts -> verified placements.

This stage turns parts into nesting shapes (footprints grown by half the
spacing, see :mod:`packer.intake.footprint`), asks the nesting engine for a layout,
and checks the result with exact distances on the original footprints before
anyone may write it. Spacing and margin are hard constraints: a layout that
fails the exact check is a bug and raises.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import Polygon

from packer.errors import PackerError
from packer.intake.footprint import grown_footprint, keep_out_zones, nest_region, plate_polygon
from packer.nest import Container, Placement, Shape, fit_on_plate, nest_plates
from packer.nest.budget import Meter
from packer.nest.poolfill import fill_plate
from packer.intake.profile import PlateProfile
from packer.layouts.emptyfit import clear_fit

__all__ = ["PlateRule", "Layout", "ItemPlace", "layout_plates", "layout_one_plate", "layout_fill_plate",
           "place_transform", "verify_layout_exact", "fits_empty_plate"]

TOL = 1e-6  # mm: exact checks allow only rounding noise


@dataclass(frozen=True)
class PlateRule:
    """The plate a layout is for: its profile and the spacing and margin in force."""

    profile: PlateProfile
    spacing: float
    margin: float


@dataclass(frozen=True)
class ItemPlace:
    """Where one item sits: turned by ``rotation`` degrees about z, then moved by (x, y)."""

    item: int          # index into the items given to the layout function
    rotation: float
    x: float
    y: float


@dataclass(frozen=True)
class Layout:
    places: tuple[ItemPlace, ...]
    used_area: float   # sum of footprint areas on the plate, mm^2
    plate_area: float  # plate area, mm^2

    @property
    def utilization(self) -> float:
        return self.used_area / self.plate_area if self.plate_area else 0.0


def place_transform(to_print: np.ndarray, place: ItemPlace) -> np.ndarray:
    """(4, 4) transform from the source mesh to plate coordinates for one placed item."""
    a = math.radians(place.rotation)
    c, s = math.cos(a), math.sin(a)
    turn = np.array([[c, -s, 0, place.x], [s, c, 0, place.y], [0, 0, 1, 0], [0, 0, 0, 1]], dtype=float)
    return turn @ np.asarray(to_print, dtype=float)


def placed_footprint(footprint: Polygon, place: ItemPlace) -> Polygon:
    turned = affinity.rotate(footprint, place.rotation, origin=(0, 0))
    return affinity.translate(turned, place.x, place.y)


def _shapes(footprints: Sequence[Polygon], rotations: Sequence[tuple[float, ...]],
            spacing: float) -> list[Shape]:
    cache: dict[int, Polygon] = {}
    shapes = []
    for fp, rots in zip(footprints, rotations):
        grown = cache.get(id(fp))
        if grown is None:
            grown = cache[id(fp)] = grown_footprint(fp, spacing=spacing)
        shapes.append(Shape(grown, tuple(rots)))
    return shapes


def _container(rule: PlateRule) -> Container:
    region, zones = nest_region(rule.profile, spacing=rule.spacing, margin=rule.margin)
    return Container(region=region, keep_out=zones)


def _to_layout(placements, footprints, rule: PlateRule) -> Layout:
    places = tuple(ItemPlace(p.index, float(p.rotation), float(p.x), float(p.y)) for p in placements)
    problems = verify_layout_exact(footprints, places, rule)
    if problems:
        raise PackerError("nesting produced an invalid layout (a bug): " + "; ".join(problems[:5]))
    used = sum(footprints[p.item].area for p in places)
    return Layout(places, used, plate_polygon(rule.profile).area)


def fits_empty_plate(footprint: Polygon, rotations: tuple[float, ...], rule: PlateRule) -> bool:
    """Whether one copy fits an empty plate in some allowed rotation (exact, quick).

    Clear cases are decided by geometry (:func:`packer.layouts.emptyfit.clear_fit`), the
    rest by the nesting engine; the last 4,096 answers are kept per footprint, rotations and
    plate rule, as the same question comes from screening, every component's planner and
    the parts table.
    """
    return _empty_fit(footprint.wkb, tuple(rotations), rule)


@functools.lru_cache(maxsize=4096)
def _empty_fit(footprint_wkb: bytes, rotations: tuple[float, ...], rule: PlateRule) -> bool:
    shapes = _shapes([shapely.from_wkb(footprint_wkb)], [rotations], rule.spacing)
    container = _container(rule)
    known = clear_fit(shapes[0].polygon, shapes[0].rotations, container.region, container.keep_out)
    if known is None:
        known = fit_on_plate(shapes, container, seconds=2.0, seed=0) is not None
    return known


def layout_plates(footprints: Sequence[Polygon], rotations: Sequence[tuple[float, ...]], rule: PlateRule, *,
                  seconds: float, seed: int = 0) -> tuple[list[Layout], list[int]]:
    """Nest items onto as few plates as possible.

    Parameters
    ----------
    footprints
        Exact footprint of each item (mm), in the part's print frame.
    rotations
        Allowed turns about z per item (degrees).

    Returns
    -------
    layouts, unplaced
        One verified layout per plate (item indices refer to ``footprints``),
        and the indices of items that fit no empty plate.
    """
    shapes = _shapes(footprints, rotations, rule.spacing)
    result = nest_plates(shapes, _container(rule), seconds=seconds, seed=seed)
    layouts = [_to_layout(plate, footprints, rule) for plate in result.plates]
    return layouts, list(result.unplaced)


def layout_one_plate(footprints: Sequence[Polygon], rotations: Sequence[tuple[float, ...]], rule: PlateRule, *,
                     seconds: float, seed: int = 0, meter: Meter | None = None) -> Layout | None:
    """A verified layout of all items on one plate, or None if none was found in time.

    The engine's work is counted on ``meter`` when given (:class:`packer.nest.budget.Meter`).
    """
    shapes = _shapes(footprints, rotations, rule.spacing)
    placements = fit_on_plate(shapes, _container(rule), seconds=seconds, seed=seed, meter=meter)
    if placements is None:
        return None
    return _to_layout(placements, footprints, rule)


def layout_fill_plate(footprints: Sequence[Polygon], rotations: Sequence[tuple[float, ...]], rule: PlateRule, *,
                      must: int, seconds: float, seed: int = 0,
                      meter: Meter | None = None) -> tuple[Layout, list[int]] | None:
    """A verified layout of the first ``must`` items and as many of the others as fit.

    Returns the layout (item indices refer to the chosen items, in the order of
    ``chosen``) and ``chosen``, the indices into ``footprints`` placed, ascending;
    None when the first ``must`` items found no common layout in time. The engine's work
    is counted on ``meter`` when given.
    """
    shapes = _shapes(footprints, rotations, rule.spacing)
    placements = fill_plate(shapes, _container(rule), must=must, seconds=seconds, seed=seed, meter=meter)
    if placements is None:
        return None
    chosen = sorted(p.index for p in placements)
    slot = {i: k for k, i in enumerate(chosen)}
    renumbered = [Placement(slot[p.index], p.rotation, p.x, p.y, p.mirror) for p in placements]
    return _to_layout(renumbered, [footprints[i] for i in chosen], rule), chosen


def verify_layout_exact(footprints: Sequence[Polygon], places: Sequence[ItemPlace], rule: PlateRule) -> list[str]:
    """Exact checks of a layout on the original footprints.

    Every footprint must lie inside the plate shrunk by the margin, keep the
    margin from keep-out zones, and keep at least the spacing from every other
    footprint (shapely's exact distances). Returns the problems found.
    """
    problems = []
    inner = plate_polygon(rule.profile).buffer(-rule.margin, join_style="mitre") if rule.margin > 0 \
        else plate_polygon(rule.profile)
    inner = inner.buffer(TOL, join_style="mitre")
    zones = keep_out_zones(rule.profile, grow=0.0)
    shadows = [placed_footprint(footprints[p.item], p) for p in places]
    seen = set()
    for p, shadow in zip(places, shadows):
        if p.item in seen:
            problems.append(f"item {p.item} placed twice")
        seen.add(p.item)
        if not inner.covers(shadow):
            problems.append(f"item {p.item} leaves the plate area inside the margin")
        for z in zones:
            if shadow.distance(z) < rule.margin - TOL:
                problems.append(f"item {p.item} is closer than the margin to a keep-out zone")
    if len(shadows) > 1:
        tree = shapely.STRtree(shadows)
        left, right = tree.query(shadows, predicate="dwithin", distance=max(rule.spacing, TOL))
        for i, j in zip(left, right):
            if i < j:
                d = shadows[i].distance(shadows[j])
                if d < rule.spacing - TOL:
                    problems.append(f"items {places[i].item} and {places[j].item} are {d:.4f} mm apart "
                                    f"(spacing {rule.spacing} mm)")
    return problems
