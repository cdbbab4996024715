"""Orientation squared to the plate: the laid-flat shadow's minimum-area rectangle along x and y."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
import trimesh

from packer.intake.parts import load_mesh, load_part
from packer.intake.squaring import square_to_plate, squaring_turn


def brute_min_rectangle_area(points: np.ndarray) -> float:
    """Smallest bounding-rectangle area over the directions of the hull edges.

    Freeman and Shapira (1975): the minimum-area enclosing rectangle has a side
    collinear with an edge of the convex hull, so trying every edge direction is exact.
    """
    hull = np.asarray(shapely.MultiPoint(points).convex_hull.exterior.coords)
    best = math.inf
    for a, b in zip(hull[:-1], hull[1:]):
        d = (b - a) / np.linalg.norm(b - a)
        n = np.array([-d[1], d[0]])
        best = min(best, np.ptp(points @ d) * np.ptp(points @ n))
    return best


def write(tmp_path, mesh, name="part.stl"):
    path = tmp_path / name
    path.write_bytes(trimesh.exchange.stl.export_stl(mesh))
    return path


@pytest.mark.parametrize("degrees", [7.5, -20.0, 44.0, 60.0])
def test_a_long_bar_turned_on_the_plate_is_squared_to_the_axes(tmp_path, degrees):
    bar = trimesh.creation.box(extents=[120.0, 12.0, 6.0])
    bar.apply_transform(trimesh.transformations.rotation_matrix(math.radians(degrees), [0, 0, 1]))
    part = load_part(write(tmp_path, bar))
    # the shadow of a box is its rectangle: the axis-aligned bounds are 120 x 12 (or 12 x 120)
    ext = sorted(np.ptp(np.asarray(part.footprint.exterior.coords), axis=0))
    assert ext == pytest.approx([12.0, 120.0], abs=1e-4)
    # the transform still maps the file's mesh onto the part as printed (what plan.json carries)
    assert np.allclose(trimesh.transform_points(load_mesh(part.source).vertices, part.to_print),
                       part.mesh.vertices, atol=1e-9)
    r = part.to_print[:3, :3]
    assert np.allclose(r @ r.T, np.eye(3), atol=1e-12) and np.linalg.det(r) == pytest.approx(1.0)
    assert np.allclose(part.mesh.bounds[0], 0.0)


@pytest.mark.parametrize("seed", range(5))
def test_the_axis_box_of_a_squared_shadow_is_the_minimum_rectangle(seed):
    rng = np.random.default_rng(seed)
    pts = rng.normal(size=(30, 2)) * [40.0, 9.0]
    turned = pts @ np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]]).T \
        if (t := squaring_turn(pts)) else pts
    assert abs(t) <= math.pi / 4 + 1e-12
    assert np.prod(np.ptp(turned, axis=0)) == pytest.approx(brute_min_rectangle_area(pts), rel=1e-9)


def test_round_and_square_shadows_are_left_as_they_are():
    square = np.array([[0.0, 0.0], [10.0, 0.0], [10.0, 10.0], [0.0, 10.0]])
    assert squaring_turn(square) == 0.0
    disk = np.c_[np.cos(np.linspace(0, 2 * np.pi, 64, endpoint=False)),
                 np.sin(np.linspace(0, 2 * np.pi, 64, endpoint=False))] * 30.0
    assert squaring_turn(disk) == 0.0
    move = np.eye(4)
    assert square_to_plate(move, np.c_[square, np.zeros(4)]) is move
