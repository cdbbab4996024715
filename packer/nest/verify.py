"""Exact check of a layout with shapely predicates (independent of the search)."""

from __future__ import annotations

from typing import Sequence

import shapely
from shapely.strtree import STRtree

from packer.nest.shapes import Container, Placement, Shape, placed_polygon

__all__ = ["verify_layout"]


def _angle_allowed(rotation: float, allowed: Sequence[float]) -> bool:
    r = float(rotation) % 360.0
    return any(min(abs(r - a), 360.0 - abs(r - a)) < 1e-9 for a in allowed)


def verify_layout(
    shapes: Sequence[Shape],
    placements: Sequence[Placement],
    container: Container,
    *,
    tol: float = 1e-9,
) -> list[str]:
    """List every problem of a layout on one container (empty list: valid).

    Checks each placed shape is inside the container region and clear of the
    keep-out zones, that interiors are pairwise disjoint (touching is allowed;
    an overlap area up to ``tol`` times the smaller area counts as touching,
    which absorbs floating-point noise), that each rotation is allowed and
    that no shape is mirrored unless allowed, and that no shape index is used
    twice.

    Parameters
    ----------
    shapes : sequence of Shape
    placements : sequence of Placement
    container : Container
    tol : float
        Relative area tolerance for containment and overlap.

    Returns
    -------
    list of str
        One message per problem.
    """
    problems: list[str] = []
    seen: set[int] = set()
    geoms = []
    labels = []
    for p in placements:
        if not 0 <= p.index < len(shapes):
            problems.append(f"placement refers to shape {p.index}, which does not exist")
            continue
        if p.index in seen:
            problems.append(f"shape {p.index} is placed twice")
        seen.add(p.index)
        s = shapes[p.index]
        if not _angle_allowed(p.rotation, s.rotations):
            problems.append(f"shape {p.index}: rotation {p.rotation} not allowed")
        if p.mirror and not s.mirror:
            problems.append(f"shape {p.index}: mirrored but mirroring is not allowed")
        geoms.append(placed_polygon(s, p))
        labels.append(p.index)
    if not geoms:
        return problems
    region = container.region
    minx, miny, maxx, maxy = region.bounds
    slack = 1e-9 * max(maxx - minx, maxy - miny)
    for g, i in zip(geoms, labels):
        outside = g.difference(region).area
        if outside > tol * g.area and not region.buffer(slack, join_style="mitre").covers(g):
            problems.append(f"shape {i} leaves the container (area {outside:.6g} outside)")
        for k, zone in enumerate(container.keep_out):
            inter = g.intersection(zone).area
            if inter > tol * g.area:
                problems.append(f"shape {i} enters keep-out zone {k} (area {inter:.6g})")
    tree = STRtree(geoms)
    left, right = tree.query(geoms, predicate="intersects")
    for a, b in zip(left, right):
        if a >= b:
            continue
        ga, gb = geoms[a], geoms[b]
        inter = shapely.intersection(ga, gb).area
        if inter > tol * min(ga.area, gb.area):
            problems.append(f"shapes {labels[a]} and {labels[b]} overlap (area {inter:.6g})")
    return problems
