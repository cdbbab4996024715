"""Behaviour of the nesting engine on small hand-made cases (certificates, not coordinates)."""

import math

import numpy as np
import pytest
import shapely
from shapely import affinity

from packer.errors import GeometryError, InputError
from packer.nest import (Container, Placement, Shape, area_bound, fit_on_plate, nest_plates, placed_polygon, verify_layout)


def square(side, x=0.0, y=0.0):
    return shapely.box(x, y, x + side, y + side)


def ring(outer, inner):
    off = (outer - inner) / 2
    return shapely.Polygon(square(outer).exterior, [square(inner, off, off).exterior])


def placed(shapes, plate):
    """Placed outlines computed with shapely.affinity directly (independent of the engine)."""
    out = {}
    for p in plate:
        g = shapes[p.index].polygon
        if p.mirror:
            g = affinity.scale(g, xfact=-1.0, yfact=1.0, origin=(0, 0))
        out[p.index] = affinity.translate(affinity.rotate(g, p.rotation, origin=(0, 0)), p.x, p.y)
    return out


def overlap_free(polys, rel=1e-9):
    polys = list(polys)
    return all(polys[a].intersection(polys[b]).area <= rel * min(polys[a].area, polys[b].area)
               for a in range(len(polys)) for b in range(a + 1, len(polys)))


def test_small_square_goes_into_the_hole_of_a_ring():
    # a 14 x 14 plate: ring 14 with a 10 x 10 hole, and a 6 x 6 square. Outside the
    # ring there is no room at all, so one plate is only possible with the square in the hole.
    shapes = [Shape(ring(14, 10)), Shape(square(6))]
    res = nest_plates(shapes, Container.rectangle(14, 14), seconds=1.0, workers=1)
    assert len(res.plates) == 1 and res.unplaced == ()
    polys = placed(shapes, res.plates[0])
    hole = shapely.Polygon(polys[0].interiors[0])
    assert hole.buffer(1e-9).covers(polys[1])


def test_keep_out_zone_stays_empty():
    zone = shapely.box(40, 0, 60, 50)
    container = Container.polygon([(0, 0), (100, 0), (100, 50), (0, 50)], keep_out=(zone,))
    shapes = [Shape(square(18)) for _ in range(8)]
    res = nest_plates(shapes, container, seconds=1.0, workers=1)
    assert res.unplaced == ()
    for plate in res.plates:
        polys = placed(shapes, plate)
        assert all(g.intersection(zone).area <= 1e-9 for g in polys.values())
        assert all(shapely.box(0, 0, 100, 50).buffer(1e-7).covers(g) for g in polys.values())
        assert overlap_free(polys.values())
    # usable area is 100 x 50 - 20 x 50 = 4000; 4 squares of 18 fit per side (2 x 2 in 40 x 50)
    assert len(res.plates) == 1


def test_circle_plate_polygon_is_inside_the_circle_and_layout_too():
    d = 120.0
    c = Container.circle(d, segments=64)
    pts = np.asarray(c.region.exterior.coords)
    assert np.all(np.hypot(pts[:, 0] - d / 2, pts[:, 1] - d / 2) <= d / 2 + 1e-9)
    shapes = [Shape(square(25)) for _ in range(9)]
    res = nest_plates(shapes, c, seconds=1.0, workers=1)
    assert res.unplaced == ()
    for plate in res.plates:
        polys = placed(shapes, plate)
        for g in polys.values():
            v = np.asarray(g.exterior.coords)
            # every corner within the true circle (radius d/2 about its centre)
            assert np.all(np.hypot(v[:, 0] - d / 2, v[:, 1] - d / 2) <= d / 2 + 1e-6)
        assert overlap_free(polys.values())


def test_never_mirrors_unless_allowed():
    ell = shapely.Polygon([(0, 0), (30, 0), (30, 8), (8, 8), (8, 20), (0, 20)])
    shapes = [Shape(ell, rotations=(0.0, 90.0)) for _ in range(10)]
    res = nest_plates(shapes, Container.rectangle(80, 60), seconds=1.0, workers=1)
    plates = [p for plate in res.plates for p in plate]
    assert len(plates) == 10
    assert all(not p.mirror and p.rotation in (0.0, 90.0) for p in plates)


def test_same_seed_same_layout():
    rng = np.random.default_rng(3)
    shapes = [Shape(shapely.box(0, 0, *rng.uniform(5, 30, 2))) for _ in range(12)]
    c = Container.rectangle(60, 60)
    a = nest_plates(shapes, c, seconds=0.5, seed=4, workers=1)
    b = nest_plates(shapes, c, seconds=0.5, seed=4, workers=1)
    assert a == b


def test_plates_respect_the_area_bound_and_are_valid():
    rng = np.random.default_rng(7)
    shapes = [Shape(shapely.Polygon([(0, 0), (w, 0), (w * 0.7, h), (0, h * 0.8)]))
              for w, h in rng.uniform(10, 40, (25, 2))]
    c = Container.rectangle(100, 80)
    res = nest_plates(shapes, c, seconds=1.0, workers=1)
    total = sum(s.polygon.area for s in shapes)
    # fewest plates can never beat ceil(total area / plate area)
    assert len(res.plates) >= math.ceil(total / (100 * 80))
    assert area_bound(shapes, c) == math.ceil(total / (100 * 80))
    assert sorted(p.index for plate in res.plates for p in plate) == list(range(25))
    for plate in res.plates:
        assert verify_layout(shapes, plate, c) == []
        assert overlap_free(placed(shapes, plate).values())


def test_too_big_shape_is_unplaced_and_the_rest_placed():
    shapes = [Shape(square(10)), Shape(shapely.box(0, 0, 300, 5)), Shape(square(12))]
    res = nest_plates(shapes, Container.rectangle(100, 100), seconds=0.5, workers=1)
    assert res.unplaced == (1,)
    assert sorted(p.index for plate in res.plates for p in plate) == [0, 2]


def test_fit_on_plate_finds_a_fit_and_refuses_too_much_area():
    # 2 x 2 squares of 19.9 in 40 x 40 (the engine keeps a tiny clearance between shapes)
    shapes = [Shape(square(19.9)) for _ in range(4)]
    got = fit_on_plate(shapes, Container.rectangle(40, 40), seconds=1.0)
    assert got is not None and len(got) == 4
    assert overlap_free(placed(shapes, got).values())
    assert fit_on_plate(shapes + [Shape(square(8))], Container.rectangle(40, 40), seconds=0.5) is None


def test_verify_layout_reports_overlap_outside_rotation_and_mirror():
    shapes = [Shape(square(10), rotations=(0.0,)), Shape(square(10))]
    c = Container.rectangle(30, 30)
    assert verify_layout(shapes, [Placement(0, 0, 0, 0), Placement(1, 0, 10, 0)], c) == []
    assert any("overlap" in p for p in verify_layout(shapes, [Placement(0, 0, 0, 0), Placement(1, 0, 5, 0)], c))
    assert any("leaves" in p for p in verify_layout(shapes, [Placement(0, 0, 25, 0)], c))
    assert any("rotation" in p for p in verify_layout(shapes, [Placement(0, 90.0, 10, 0)], c))
    assert any("mirror" in p for p in verify_layout(shapes, [Placement(1, 0, 10, 0, mirror=True)], c))


def test_placed_polygon_rotates_about_the_origin_then_translates():
    s = Shape(shapely.box(0, 0, 4, 2))
    g = placed_polygon(s, Placement(0, 90.0, 10.0, 0.0))
    assert g.bounds == pytest.approx((8.0, 0.0, 10.0, 4.0))


def test_bad_input_is_refused():
    with pytest.raises(GeometryError, match="not a valid polygon"):
        Shape(shapely.Polygon([(0, 0), (2, 2), (2, 0), (0, 2)]))
    with pytest.raises(InputError, match="positive sides"):
        Container.rectangle(0, 5)
    with pytest.raises(InputError, match="at least one allowed rotation"):
        Shape(square(1), rotations=())


def test_strip_same_seed_same_layout():
    from packer.nest import nest_strip
    rng = np.random.default_rng(5)
    shapes = [Shape(shapely.box(0, 0, *rng.uniform(5, 30, 2))) for _ in range(10)]
    a = nest_strip(shapes, width=50.0, seconds=0.4, seed=2, workers=1)
    b = nest_strip(shapes, width=50.0, seconds=0.4, seed=2, workers=1)
    assert a == b


def test_compiled_pattern_search_takes_the_same_steps_as_one_query_per_step():
    # the strip search runs a move's pattern search in one compiled call; the plate search
    # keeps one query per step: from the same start both must end in the same places
    from packer.nest.budget import Meter
    from packer.nest.kit import Kit, Room
    from packer.nest.search import State

    rng = np.random.default_rng(7)
    shapes = [Shape(shapely.box(0, 0, *rng.uniform(4, 12, 2))) for _ in range(9)]
    start = rng.uniform(0, 14, size=(9, 2))
    ends = []
    for compiled in (False, True):
        kit = Kit(shapes, clearance=1e-6, meter=Meter())
        room = Room(kit, shapely.box(0, 0, 30, 30))
        orient = [kit.options[i][0] for i in range(9)]
        st = State(kit, room, np.arange(9), orient, start, np.zeros(9, dtype=np.int64), 1,
                   np.random.default_rng(11), compiled_steps=compiled)
        for _ in range(5):
            for i in st.overlapping():
                st.move(int(i))
            st.grow_weights()
        ends.append((st.pos.copy(), st.orient.copy(), st.total()))
    assert np.array_equal(ends[0][0], ends[1][0])
    assert np.array_equal(ends[0][1], ends[1][1])
    assert ends[0][2] == ends[1][2]
