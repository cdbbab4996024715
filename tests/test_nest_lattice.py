"""Lattice fill of many copies of one outline: checked against the densest packings known in closed form."""

import math

import pytest
import shapely
from shapely.geometry import Point, box

from packer.nest import Container, Shape, fit_on_plate
from packer.nest import plates as plates_module
from packer.nest.lattice import dense_lattice, lattice_fill


def _density(poly, basis):
    u, v = basis
    return poly.area / abs(u[0] * v[1] - u[1] * v[0])


def test_disk_lattice_is_hexagonal():
    # Thue's theorem (proved by Fejes Toth, 1940): the densest packing of equal disks in the
    # plane is the hexagonal one, density pi / sqrt(12) = 0.9069. A 128-gon stands in for the
    # disk, so its touching lattice is within 0.1 % of that value.
    disk = Point(0, 0).buffer(16.0, quad_segs=32)
    assert _density(disk, dense_lattice(disk)) == pytest.approx(math.pi / math.sqrt(12), rel=1e-3)


@pytest.mark.parametrize("poly", [box(0, 0, 10, 10), box(0, 0, 30, 7),
                                  shapely.Polygon([(0, 0), (10, 0), (5, 8)])])
def test_tiling_outlines_fill_the_plane(poly):
    # squares, rectangles and triangles tile the plane by translation (a triangle with its
    # 180-degree turn; by translation alone the densest lattice of a triangle is 2/3: Fejes Toth,
    # 'Lagerungen in der Ebene', for triangles 2/3 by translations - from memory)
    d = _density(poly, dense_lattice(poly))
    want = 2.0 / 3.0 if poly.geom_type == "Polygon" and len(poly.exterior.coords) == 4 else 1.0
    assert d == pytest.approx(want, rel=1e-3)


def _check(shapes, placements, region):
    placed = [shapely.affinity.rotate(s.polygon, p.rotation, origin=(0, 0)) for s, p in zip(shapes, placements)]
    placed = [shapely.affinity.translate(g, p.x, p.y) for g, p in zip(placed, placements)]
    assert sorted(p.index for p in placements) == list(range(len(shapes)))
    for g in placed:
        assert region.buffer(1e-9).covers(g)
    for i in range(len(placed)):
        for j in range(i + 1, len(placed)):
            assert placed[i].intersection(placed[j]).area <= 1e-9


def test_forty_nine_disks_on_a_plate_only_fit_hexagonally(monkeypatch):
    # 32 mm disks on a 248 x 208 mm region: a square grid holds 7 x 6 = 42, the hexagonal
    # lattice 7 rows of 7 = 49 (rows 27.7 mm apart); 48 copies need the lattice
    disk = Shape(Point(0, 0).buffer(16.0, quad_segs=16), rotations=(0.0,))
    region = box(0, 0, 248, 208)
    shapes = [disk] * 48
    layout = fit_on_plate(shapes, Container(region), seconds=1.0)
    assert layout is not None
    _check(shapes, layout, region)
    assert lattice_fill([disk] * 50, Container(region)) is None
    # the one-by-one fill alone does not find it: the lattice is what makes the difference
    monkeypatch.setattr(plates_module, "LATTICE_MIN", 10 ** 9)
    assert fit_on_plate(shapes, Container(region), seconds=1.0) is None


def test_lattice_keeps_off_keep_out_zones_and_needs_one_outline():
    disk = Shape(Point(0, 0).buffer(5.0, quad_segs=8), rotations=(0.0, 90.0))
    region = box(0, 0, 100, 60)
    zone = box(0, 0, 40, 20)
    layout = lattice_fill([disk] * 30, Container(region, keep_out=(zone,)))
    assert layout is not None
    for p in layout:
        g = shapely.affinity.translate(shapely.affinity.rotate(disk.polygon, p.rotation, origin=(0, 0)), p.x, p.y)
        assert g.intersection(zone).area <= 1e-9
    other = Shape(box(0, 0, 8, 8), rotations=(0.0,))
    assert lattice_fill([disk] * 5 + [other], Container(region)) is None
