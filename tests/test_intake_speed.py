"""The quick paths of intake and screening give the answers of the slow ones.

- ``clear_fit`` (does one copy fit an empty plate, by geometry) against the nesting engine
  and against elementary geometry: a w x h rectangle fits a W x H rectangle by translation
  exactly when w <= W and h <= H (turned a quarter, when h <= W and w <= H); a disc of
  radius r fits a disc of radius R exactly when r <= R.
- ``line_pieces`` (the vertical lines of the volume measure) against the plain sort by
  (line, z) it replaces, on crossings with ties and long lines.
- the lay-flat cross product against ``numpy.cross``, bit for bit.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import shapely
from shapely.geometry import box

from packer.intake.footprint import nest_region
from packer.intake.pose import cross3
from packer.intake.mesh.winding import line_pieces
from packer.layouts.emptyfit import CLEAR_MM, clear_fit
from packer.layouts.nested import PlateRule, fits_empty_plate
from packer.nest import Container, Shape, fit_on_plate
from test_fleet_support import profile

QUARTERS = (0.0, 90.0, 180.0, 270.0)


def _plate(shape="rectangle", keep_out=(), size=(200.0, 150.0)):
    return replace(profile("filament", volume=(*size, 100.0)), plate_shape=shape, keep_out=tuple(keep_out))


def test_a_rectangle_fits_a_rectangle_when_its_sides_do():
    region = box(0, 0, 200, 150)
    assert clear_fit(box(0, 0, 199, 149), (0.0,), region) is True
    assert clear_fit(box(0, 0, 201, 100), (0.0,), region) is False
    assert clear_fit(box(0, 0, 140, 190), (0.0,), region) is False        # only turned a quarter
    assert clear_fit(box(0, 0, 140, 190), (0.0, 90.0), region) is True
    assert clear_fit(box(0, 0, 200, 100), (0.0,), region) is None         # exactly at the edge: the engine's call


def test_a_disc_fits_a_round_plate_when_its_radius_does():
    region = shapely.Point(0, 0).buffer(100.0, quad_segs=24)
    inner = region.exterior.distance(shapely.Point(0, 0))                # the polygon's inscribed radius
    assert clear_fit(shapely.Point(5, 5).buffer(inner - 1.0), QUARTERS, region) is True
    assert clear_fit(shapely.Point(5, 5).buffer(101.0), QUARTERS, region) is False
    long_bar = box(-90, -3, 90, 3)                                         # circumradius 90.05: fits
    assert clear_fit(long_bar, QUARTERS, region) is True


def test_keep_out_zones_leave_only_the_room_beside_them():
    region = box(0, 0, 200, 150)
    zone = box(150, 100, 200, 150)                                         # a corner clamp
    assert clear_fit(box(0, 0, 140, 140), (0.0,), region, (zone,)) is True     # left of the clamp
    assert clear_fit(box(0, 0, 190, 90), (0.0,), region, (zone,)) is True      # below it
    assert clear_fit(box(0, 0, 190, 140), (0.0,), region, (zone,)) is None     # only the engine can tell
    assert clear_fit(box(0, 0, 210, 10), (0.0,), region, (zone,)) is False     # wider than the plate
    assert clear_fit(box(0, 0, 10, 10), (0.0,), shapely.Point(0, 0).buffer(50), (zone,)) is None


@pytest.mark.parametrize("shape", ["rectangle", "circle"])
def test_clear_answers_are_the_engines(shape):
    rng = np.random.default_rng(7)
    zones = ((150.0, 100.0, 200.0, 150.0),) if shape == "rectangle" else ()
    prof = _plate(shape, zones)
    region, zones = nest_region(prof, spacing=0.0, margin=0.0)
    container = Container(region, zones)
    checked, decided = 0, set()
    for _ in range(40):
        w, h = rng.uniform(20, 220), rng.uniform(5, 160)
        outline = [box(0, 0, w, h), shapely.Polygon([(0, 0), (w, 0), (w, h / 3), (w / 3, h / 3), (w / 3, h), (0, h)]),
                   shapely.Point(w / 2, w / 2).buffer(w / 2, quad_segs=8)][checked % 3]
        rots = (QUARTERS, (0.0,), (0.0, 45.0))[checked % 3]
        quick = clear_fit(outline, rots, container.region, container.keep_out)
        if quick is not None:
            engine = fit_on_plate([Shape(outline, rots)], container, seconds=2.0, seed=0) is not None
            assert quick == engine, (w, h, rots)
            decided.add(quick)
        checked += 1
    assert decided == {True, False}            # both answers were given by geometry and checked


def test_fits_empty_plate_keeps_its_answer_and_gives_the_engines():
    prof = _plate("rectangle", ((150.0, 100.0, 200.0, 150.0),))
    rule = PlateRule(prof, 2.0, 1.0)
    near = box(0, 0, 190, 140)                   # beside the clamp in no turn: the engine decides
    assert fits_empty_plate(near, QUARTERS, rule) is fits_empty_plate(near, QUARTERS, rule)
    assert fits_empty_plate(box(0, 0, 100, 50), QUARTERS, rule) is True
    assert fits_empty_plate(box(0, 0, 300, 10), QUARTERS, rule) is False
    assert CLEAR_MM < 0.1


def _sorted_reference(col, z, step, ncols, lo, hi):
    """The pieces by a plain stable sort on (line, z): what line_pieces must return."""
    used = np.flatnonzero(np.bincount(col, minlength=ncols))
    col = np.concatenate([col, used, used])
    z = np.concatenate([z, np.full(len(used), lo), np.full(len(used), hi)])
    step = np.concatenate([step, np.zeros(2 * len(used), dtype=np.int64)])
    order = np.lexsort((z, col))
    col, z, step = col[order], z[order], step[order]
    out = []
    for c in used:
        idx = np.flatnonzero(col == c)
        ray = np.cumsum(step[idx])
        doubtful = ray[-1] != 0 or ray.min() < 0
        for k in range(len(idx) - 1):
            a, b = z[idx[k]], z[idx[k + 1]]
            if b - a > 0:
                out.append((a, b, c, ray[k], doubtful))
    return out


@pytest.mark.parametrize("long", [False, True])
def test_line_pieces_are_the_plain_sort(long):
    rng = np.random.default_rng(3)
    n = 4000
    ncols = 20 if long else 900                 # long lines: about 200 crossings each (the merge sort)
    col = rng.integers(0, ncols, n)
    z = np.round(rng.uniform(0.0, 10.0, n), 1)  # many ties
    step = rng.choice(np.array([-1, 1]), n)
    got = line_pieces(col, z, step, ncols, 0.0, 10.0)
    want = _sorted_reference(col, z, step, ncols, 0.0, 10.0)
    assert len(got[0]) == len(want) > 0
    for k, (a, b, c, w, d) in enumerate(want):
        assert (got[0][k], got[1][k], got[2][k], got[3][k], bool(got[4][k])) == (a, b, c, w, d)
    empty = line_pieces(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, np.int64), 4, 0.0, 1.0)
    assert all(len(e) == 0 for e in empty)


def test_the_cross_product_has_numpys_bits():
    rng = np.random.default_rng(11)
    for _ in range(500):
        a, b = rng.normal(size=3) * 10.0 ** rng.integers(-6, 6), rng.normal(size=3)
        assert np.array_equal(cross3(a, b), np.cross(a, b))
