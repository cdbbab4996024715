"""Exact-fill search for plates (packer.nest.exactfill) on jigsaw bin instances.

The jigsaw instances come from the ESICUP data sets (tests/data/nest/README.md);
their published optimal layouts fill every bin completely, translation only,
so the optimum equals the area bound.  Layouts are re-checked here with
shapely directly (translating the instance polygons), not with packer's checker.
"""

import json
from pathlib import Path

import numpy as np
import pytest
import shapely
from shapely import affinity

from packer.nest import Container, Shape, nest_plates, verify_layout
from packer.nest.budget import Budget
from packer.nest.exactfill import exact_fill

DATA = Path(__file__).parent / "data" / "nest"


def _load(name):
    data = json.loads((DATA / name).read_text())
    polys = [shapely.Polygon(item["polygon"]) for item in data["items"] for _ in range(item["quantity"])]
    return data, polys


def _check_full_bins(polys, plates, width, height):
    """Independent check: every piece once, inside the bin, no overlap, each bin filled 100 %."""
    bin_box = shapely.box(0, 0, width, height)
    used = [q.index for plate in plates for q in plate]
    assert sorted(used) == list(range(len(polys)))
    for plate in plates:
        placed = []
        for q in plate:
            assert q.rotation == 0.0 and not q.mirror
            g = affinity.translate(polys[q.index], q.x, q.y)
            assert bin_box.covers(g)
            placed.append(g)
        for a in range(len(placed)):
            for b in range(a + 1, len(placed)):
                assert placed[a].intersection(placed[b]).area == pytest.approx(0.0, abs=1e-6)
        # full bin: the published optimum fills every bin completely (ESICUP terashima2 README)
        assert shapely.union_all(placed).area == pytest.approx(width * height, rel=1e-12)


def test_jigsaw_reaches_published_optimum_through_nest_plates():
    # terashima2 TX001C8C5 (13 non-convex pieces of 25): published optimum 3 bins = area bound.
    # Without the exact fill, the bottom-left fill and overlap search end at 4 bins with this
    # budget (measured), so this test fails if the exact-fill search is disabled.
    data, polys = _load("terashima2_TX001C8C5.json")
    w, h = data["bin"]["width"], data["bin"]["height"]
    shapes = [Shape(p, rotations=(0.0,)) for p in polys]
    res = nest_plates(shapes, Container.rectangle(w, h), seconds=2.0, seed=0, workers=1, clearance=0.0)
    assert res.unplaced == ()
    assert len(res.plates) == 3
    _check_full_bins(polys, res.plates, w, h)


def test_exact_fill_solves_jigsaw_and_refuses_too_few_bins():
    # terashima2 TS001C5: 17 pieces, published optimum 2 bins (area exactly 2 bins).
    data, polys = _load("terashima2_TS001C5.json")
    w, h = data["bin"]["width"], data["bin"]["height"]
    shapes = [Shape(p, rotations=(0.0,)) for p in polys]
    box = Container.rectangle(w, h)
    plates = exact_fill(shapes, box, bins=2, budget=Budget(2.0), seed=0)
    assert plates is not None and len(plates) == 2
    _check_full_bins(polys, plates, w, h)
    for plate in plates:
        assert verify_layout(shapes, plate, box) == []
    # one bin holds half the area: impossible, answered without search
    assert exact_fill(shapes, box, bins=1, budget=Budget(2.0), seed=0) is None


def test_exact_fill_uses_rotations_and_identical_copies():
    # hand-made jigsaw: a 4 x 4 square cut along both diagonals of each 2 x 2 quarter gives
    # 16 congruent right triangles (legs sqrt 2, area 1); offered in one orientation with all
    # quarter turns allowed, they must be turned to close each quarter.
    tri = shapely.Polygon([(0, 0), (2, 0), (1, 1)])
    shapes = [Shape(tri, rotations=(0.0, 90.0, 180.0, 270.0))] * 16
    box = Container.rectangle(4, 4)
    plates = exact_fill(shapes, box, bins=1, budget=Budget(2.0), seed=0)
    assert plates is not None and len(plates) == 1
    assert verify_layout(shapes, plates[0], box) == []
    placed = [affinity.translate(affinity.rotate(tri, q.rotation, origin=(0, 0)), q.x, q.y) for q in plates[0]]
    assert shapely.union_all(placed).area == pytest.approx(16.0)
    assert {q.rotation for q in plates[0]} == {0.0, 90.0, 180.0, 270.0}


def test_exact_fill_with_waste_allowance_places_everything():
    # not a jigsaw: three 1 x 1 squares and an L of area 3 in two 2 x 2 plates (waste 2)
    sq = Shape(shapely.box(0, 0, 1, 1), rotations=(0.0,))
    ell = Shape(shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]), rotations=(0.0,))
    shapes = [sq, sq, ell, sq]
    box = Container.rectangle(2, 2)
    plates = exact_fill(shapes, box, bins=2, budget=Budget(2.0), seed=0)
    assert plates is not None and len(plates) <= 2
    assert sorted(q.index for p in plates for q in p) == [0, 1, 2, 3]
    for plate in plates:
        assert verify_layout(shapes, plate, box) == []


def _cut_square(rng, cuts):
    """A 100 x 100 square cut by random straight lines: a jigsaw with float coordinates."""
    from shapely.ops import split

    pieces = [shapely.box(0, 0, 100, 100)]
    for _ in range(cuts):
        a = rng.uniform(0, np.pi)
        c = rng.uniform(20, 80, size=2)
        d = np.array([np.cos(a), np.sin(a)]) * 300
        line = shapely.LineString([c - d, c + d])
        pieces = [g for p in pieces for g in split(p, line).geoms if g.area > 1]
    return pieces


def _cut_one_at_a_time(rng, count):
    """A 1000 x 1000 square cut into ``count`` pieces, each line cutting one of the three
    largest pieces near its middle: T-junctions (a vertex of one piece in the middle of
    another's edge), where rounding noise leaves slivers in the empty region."""
    from shapely.ops import split

    pieces = [shapely.box(0, 0, 1000, 1000)]
    while len(pieces) < count:
        pieces.sort(key=lambda g: -g.area)
        g = pieces.pop(int(rng.integers(0, min(3, len(pieces)))))
        for _ in range(50):
            c = np.array(g.representative_point().coords[0]) + rng.normal(0, 30, 2)
            a = rng.uniform(0, np.pi)
            d = np.array([np.cos(a), np.sin(a)]) * 3000
            parts = list(split(g, shapely.LineString([c - d, c + d])).geoms)
            if len(parts) == 2 and min(p.area for p in parts) > 0.02 * g.area:
                pieces += parts
                break
        else:
            pieces.append(g)
    return pieces


@pytest.mark.parametrize("seed", [0, 1])
def test_exact_fill_cut_square_with_t_junctions(seed):
    # the pieces tile the square by construction, so the bound (1 plate) is the optimum
    rng = np.random.default_rng(seed)
    polys = _cut_one_at_a_time(rng, 20)
    shapes = [Shape(affinity.translate(p, -p.bounds[0], -p.bounds[1]), rotations=(0.0,)) for p in polys]
    box = Container.rectangle(1000, 1000)
    plates = exact_fill(shapes, box, bins=1, budget=Budget(2.0), seed=0)
    assert plates is not None and len(plates) == 1 and len(plates[0]) == len(shapes)
    assert verify_layout(shapes, plates[0], box) == []
    placed = [affinity.translate(shapes[q.index].polygon, q.x, q.y) for q in plates[0]]
    assert shapely.union_all(placed).area == pytest.approx(1000 * 1000, rel=1e-9)


@pytest.mark.parametrize("seed", [1, 3, 5])
def test_exact_fill_cut_square_with_turned_pieces(seed):
    # the pieces tile the square by construction; each is offered turned by a random quarter
    # turn and moved to the origin, so the search has to find the turn and the position
    rng = np.random.default_rng(seed)
    shapes = []
    for p in _cut_square(rng, 5):
        g = affinity.rotate(p, float(rng.choice([0, 90, 180, 270])), origin=(0, 0))
        g = affinity.translate(g, -g.bounds[0], -g.bounds[1])
        shapes.append(Shape(shapely.Polygon(g.exterior.coords), rotations=(0.0, 90.0, 180.0, 270.0)))
    box = Container.rectangle(100, 100)
    plates = exact_fill(shapes, box, bins=1, budget=Budget(3.0), seed=0)
    assert plates is not None and len(plates) == 1 and len(plates[0]) == len(shapes)
    assert verify_layout(shapes, plates[0], box) == []
    placed = [affinity.translate(affinity.rotate(shapes[q.index].polygon, q.rotation, origin=(0, 0)), q.x, q.y)
              for q in plates[0]]
    # no overlap: the union has the summed area (pieces under 1 mm^2 were dropped by the cutter)
    assert shapely.union_all(placed).area == pytest.approx(sum(s.polygon.area for s in shapes), rel=1e-9)


def test_exact_fill_wedges_a_shape_off_the_anchor_when_waste_is_allowed():
    # piece 20 of ESICUP terashima1 TG001 (copied): its leftmost vertex (0, 616) lies above
    # its bottom edge, so it cannot have that vertex on an empty plate's corner; with waste
    # allowed it rests on the floor and the wall, the triangle under its slanted side empty
    poly = shapely.Polygon([(226, 0), (604, 0), (604, 1000), (0, 1000), (0, 616)])
    box = Container.rectangle(1000, 1000)
    plates = exact_fill([Shape(poly, rotations=(0.0,))], box, bins=1, budget=Budget(1.0), seed=0)
    assert plates is not None and len(plates[0]) == 1
    q = plates[0][0]
    assert verify_layout([Shape(poly, rotations=(0.0,))], plates[0], box) == []
    assert (q.x, q.y) == (0.0, 0.0)   # touching floor and wall is the original position
