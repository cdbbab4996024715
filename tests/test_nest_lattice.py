"""Lattice fill of many copies of one outline: checked against the densest packings known in closed form."""

import math
from pathlib import Path

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
    # lattice 7 rows of 7 = 49 (rows 27.7 mm apart); all 49 need the lattice
    disk = Shape(Point(0, 0).buffer(16.0, quad_segs=16), rotations=(0.0,))
    region = box(0, 0, 248, 208)
    shapes = [disk] * 49
    layout = fit_on_plate(shapes, Container(region), seconds=1.0)
    assert layout is not None
    _check(shapes, layout, region)
    assert lattice_fill([disk] * 50, Container(region)) is None
    # the one-by-one fill alone does not find it (with the tight covering outline of the
    # 64-gon it reaches 48): the lattice is what makes the difference
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


# --- copies of one outline on a round plate: clipped lattice and the disk search -------------

def _disk_shape(r: float) -> Shape:
    # a 64-gon around the disk (vertices outside, edges tangent): covers the disk of radius r
    return Shape(Point(0, 0).buffer(r / math.cos(math.pi / 64), quad_segs=16), rotations=(0.0,))


def test_five_disks_fit_a_circle_that_holds_no_lattice_of_five():
    # five equal circles in a circle: the best packing is a ring of five, container radius
    # R = r (1 + 1 / sin(pi/5)) = 2.701 r (Graham 1968; also in Specht's tables of circle
    # packings); six need R = 3 r (proved optimal), so R = 2.9 r holds five and never six
    from packer.nest.lattice import identical_fill
    region = Point(100, 100).buffer(2.9 * 10.0, quad_segs=64)
    five = identical_fill([_disk_shape(10.0)] * 5, Container(region), clearance=0.0, seconds=2.0)
    assert five is not None and len(five) == 5
    _check([_disk_shape(10.0)] * 5, five, region)
    six = identical_fill([_disk_shape(10.0)] * 6, Container(region), clearance=0.0, seconds=0.5, at_least=1)
    assert six is not None and len(six) <= 5


def test_nineteen_disks_reach_the_best_known_circle_packing():
    # 19 equal circles in a circle: R = r (1 + sqrt 2 + sqrt 6) = 4.8637 r (hexagonal core with
    # a ring; proved optimal by Fodor, 1999 - from memory); 0.2 % slack for the polygons
    from packer.nest.lattice import identical_fill
    region = Point(0, 0).buffer(10.0 * (1 + math.sqrt(2) + math.sqrt(6)) * 1.002, quad_segs=128)
    shapes = [_disk_shape(10.0)] * 19
    got = identical_fill(shapes, Container(region), clearance=0.0, seconds=5.0)
    assert got is not None and len(got) == 19
    _check(shapes, got, region)


def test_ten_rings_go_on_two_round_plates():
    # the shipped round filament plate (192 mm, margin 4, spacing 6) holds 5 rings of 60 mm: grown
    # by 3 mm each they need a circle of 2.701 x 33.3 = 90 mm radius, the region has 95 mm
    from packer.intake.footprint import grown_footprint, nest_region
    from packer.nest.poolfill import fill_plate
    from packer.intake.profile import load_profile
    prof = load_profile(Path(__file__).resolve().parent.parent / "plates" / "fil-round-192.yaml")
    region, zones = nest_region(prof, spacing=6.0, margin=4.0)
    ring = Point(0, 0).buffer(30.0, quad_segs=32).difference(Point(0, 0).buffer(18.0, quad_segs=32))
    shape = Shape(grown_footprint(ring, spacing=6.0), rotations=(0.0, 90.0, 180.0, 270.0))
    placed = fill_plate([shape] * 10, Container(region, keep_out=zones), must=1, seconds=1.0)
    assert placed is not None and len(placed) == 5
    _check([shape] * 5, placed, region)


def test_disk_search_keeps_off_keep_out_zones():
    from packer.nest.lattice import identical_fill
    region = box(0, 0, 100, 100)
    zone = box(0, 0, 50, 50)
    # four disks of radius 24 fit a 100 x 100 square only as 2 x 2; with the lower-left quarter
    # kept out, three fit (the other three quarters) and a fourth does not (each quarter holds one)
    shapes = [_disk_shape(24.0)] * 4
    got = identical_fill(shapes, Container(region, keep_out=(zone,)), clearance=0.0, seconds=1.0, at_least=1)
    assert got is not None and len(got) == 3
    for p in got:
        g = shapely.affinity.translate(shapes[0].polygon, p.x, p.y)
        assert g.intersection(zone).area <= 1e-9 and region.covers(g)
