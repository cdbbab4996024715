"""Covering outlines (packer.nest.outline): cover, stay simple, few vertices, little added area."""

import math

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, Polygon, box

from packer.nest.geometry import collision_polygon
from packer.nest.outline import cover_outline


def _count(p):
    return len(p.exterior.coords) - 1 + sum(len(r.coords) - 1 for r in p.interiors)


@pytest.mark.parametrize("n", [12, 24, 40])
def test_disk_outline_is_near_the_least_circumscribed_polygon(n):
    # every convex n-gon that contains a disk of radius r has area at least n r^2 tan(pi/n),
    # the regular circumscribed n-gon (classical; e.g. Fejes Toth, 'Lagerungen in der Ebene,
    # auf der Kugel und im Raum', 1953); the greedy covering of a 256-gon gets within 1 %
    r = 10.0
    disk = Point(0, 0).buffer(r, quad_segs=64)
    out = cover_outline(disk, n)
    assert out is not None and out.is_valid and out.covers(disk)
    assert _count(out) <= n
    least = n * r * r * math.tan(math.pi / n)
    assert least * (1 - 1e-6) <= out.area <= least * 1.01


def test_comb_with_holes_stays_covering_and_adds_less_than_the_buffered_outline():
    rng = np.random.default_rng(3)
    teeth = [box(x, 0, x + 0.6, 8 + rng.uniform(0, 3)) for x in np.arange(0, 20, 1.0)]
    comb = shapely.union_all(teeth + [box(0, 0, 20, 2)])
    comb = comb.difference(Point(10, 1).buffer(0.5, quad_segs=8))
    assert comb.geom_type == "Polygon" and len(comb.interiors) == 1
    out = cover_outline(comb, 40)
    assert out is not None and out.is_valid and out.covers(comb) and _count(out) <= 40
    # the older method grows and simplifies: a comb whose teeth it must fill all
    old = collision_polygon(comb, max_vertices=40)
    assert out.area - comb.area < old.area - comb.area


def test_concave_notches_are_kept_when_the_limit_allows():
    # an L of 6 vertices under a limit of 6 is returned as is (area equal up to the margin)
    ell = Polygon([(0, 0), (10, 0), (10, 2), (2, 2), (2, 10), (0, 10)])
    out = cover_outline(ell, 6)
    assert out.covers(ell) and out.area == pytest.approx(ell.area, rel=1e-5)
    # four vertices: the notch is filled (the hull-like square), never cut into
    sq = cover_outline(ell, 4)
    assert sq.covers(ell) and _count(sq) <= 4
