"""Repair on request (packer/intake/mesh/repair.py): closed-form volumes of repaired primitives
and the published volumes of real parts (tests/data/ampp, source in its README)."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
import trimesh

from packer.intake.mesh.examine import examine
from packer.intake.mesh.repair import (HOLE_SHARE, closed_as_indexed, repair_mesh, repaired_names)

AMPP = Path(__file__).parent / "data" / "ampp"


def published(part: str) -> float:
    """Part + support volume from the data set's table (tests/data/ampp/README.md)."""
    with open(AMPP / "parts.csv", newline="") as fh:
        row = next(r for r in csv.DictReader(fh) if r["part"] == part)
    return float(row["volume_mm3"]) + float(row["support_mm3"])


def signed_volume(vertices, faces) -> float:
    """(1/6) sum v0 . (v1 x v2): the divergence theorem, computed here independently of packer."""
    t = np.asarray(vertices, dtype=float)[np.asarray(faces)]
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def repaired(tmp_path, vertices, faces, name="part.stl"):
    path = tmp_path / name
    trimesh.Trimesh(vertices=vertices, faces=faces, process=False).export(path)
    v, _, exam = examine(path)
    return repair_mesh(v, exam.topology, exam.volume)


def cube(edge=20.0, at=(0.0, 0.0, 0.0)):
    box = trimesh.creation.box(extents=(edge, edge, edge))
    return np.asarray(box.vertices) + edge / 2 + np.asarray(at), np.asarray(box.faces)


def test_cube_with_one_face_removed_is_closed_and_has_the_cube_volume(tmp_path):
    v, f = cube(20.0)
    top = np.flatnonzero(v[f][:, :, 2].min(axis=1) > 19.999)        # the two triangles of the top face
    assert len(top) == 2
    r = repaired(tmp_path, v, np.delete(f, top, axis=0))
    assert r.before.open_edges == 4 and not r.before.closed
    assert r.holes_filled == 1 and r.left == ()
    assert r.after.open_edges == 0 and r.after.closed and closed_as_indexed(r.faces)
    # closed form: a cube of edge a holds a^3; the patch (a fifth of the rest) is under HOLE_SHARE
    assert 1 / 5 <= HOLE_SHARE
    assert signed_volume(r.vertices, r.faces) == pytest.approx(20.0 ** 3, rel=1e-9)
    assert r.after.volume_mm3 == pytest.approx(20.0 ** 3, rel=1e-9)


def test_a_hole_larger_than_the_threshold_stays_open_and_is_named(tmp_path):
    # a tray 100 x 100 x 10 without its top: the patch would be 10^4 mm^2 against 1.4 x 10^4 of the rest
    box = trimesh.creation.box(extents=(100.0, 100.0, 10.0))
    v, f = np.asarray(box.vertices), np.asarray(box.faces)
    r = repaired(tmp_path, v, f[v[f][:, :, 2].min(axis=1) < 5 - 1e-9])
    assert r.holes_filled == 0 and not r.after.closed and r.after.open_edges == 4
    assert any("left open" in s and "25 %" in s for s in r.left)


def test_two_overlapping_boxes_are_united_with_the_inclusion_exclusion_volume(tmp_path):
    a, fa = cube(20.0)
    b, fb = cube(20.0, at=(10.0, 10.0, 10.0))
    r = repaired(tmp_path, np.concatenate([a, b]), np.concatenate([fa, fb + len(a)]))
    assert r.before.shells == 2
    assert r.after.shells == 1 and r.after.closed and r.after.crowded_edges == 0
    # inclusion-exclusion: |A u B| = |A| + |B| - |A n B| = 8000 + 8000 - 10^3
    assert signed_volume(r.vertices, r.faces) == pytest.approx(15000.0, rel=1e-9)
    assert r.after.volume_mm3 == pytest.approx(15000.0, rel=1e-9)


def test_flipped_faces_are_wound_consistently_with_a_positive_volume(tmp_path):
    v, f = cube(10.0)
    f = f.copy()
    f[[0, 3, 7]] = f[[0, 3, 7]][:, ::-1]
    r = repaired(tmp_path, v, f)
    assert r.before.flipped == 3
    assert r.after.flipped == 0 and r.after.closed
    assert signed_volume(r.vertices, r.faces) == pytest.approx(1000.0, rel=1e-9)   # closed form 10^3


def test_degenerate_triangles_are_dropped_and_counted(tmp_path):
    # a cube whose top edge A-B carries a seam: the top face uses the midpoint M of A-B, the side
    # face runs A-B straight, and a triangle without area (A, B, M) closes the crack between them
    v, f = cube(10.0)
    side = [t for t in f.tolist() if all(v[i][1] < 1e-9 for i in t)]                   # y = 0 face
    top = [t for t in f.tolist() if all(v[i][2] > 10 - 1e-9 for i in t)]
    rest = [t for t in f.tolist() if t not in side and t not in top]
    ids = {tuple(np.round(p, 6)): k for k, p in enumerate(v)}
    A, B, C, D = (ids[p] for p in [(0, 0, 10), (10, 0, 10), (10, 10, 10), (0, 10, 10)])
    v = np.concatenate([v, [[5.0, 0.0, 10.0]]])
    M = len(v) - 1
    new_top = [[A, M, D], [M, B, C], [M, C, D]]
    sliver = [[A, B, M], [A, A, B]]                                 # no area; a repeated corner
    faces = np.array(rest + side + new_top + sliver)
    r = repaired(tmp_path, v, faces)
    assert r.before.degenerate == 2
    assert r.after.degenerate == 0 and r.after.closed
    assert r.after.triangles < len(faces)
    assert r.after.volume_mm3 == pytest.approx(1000.0, rel=1e-9)                   # closed form 10^3


def test_a_clean_mesh_is_left_as_it_is(tmp_path):
    v, f = cube(10.0)
    r = repaired(tmp_path, v, f)
    assert r.changed == ("nothing to repair",) and r.before == r.after
    assert len(r.faces) == 12


# --- real parts (AM-Production-Planning-Instances, tests/data/ampp) -------------------------

def real(part: str):
    v, _, exam = examine(AMPP / "meshes" / f"{part}.stl")
    return repair_mesh(v, exam.topology, exam.volume)


def test_supports_touching_along_edges_are_united_into_a_closed_mesh():
    r = real("42")
    assert r.before.crowded_edges == 32 and not r.before.closed
    assert r.after.closed and r.after.open_edges == 0 and r.left and "touch" in r.left[-1]
    assert r.after.volume_mm3 == pytest.approx(published("42"), rel=0.005)   # closed parts: within 0.5 %


def test_overlapping_shells_become_one_closed_solid():
    r = real("56")
    assert r.before.shells == 5 and r.after.shells == 1 and r.after.closed
    # the published value adds the shells' volumes (shared volume twice): every part within 5 %
    assert r.after.volume_mm3 == pytest.approx(published("56"), rel=0.05)
    assert r.after.volume_mm3 == pytest.approx(r.before.volume_mm3, rel=1e-6)   # the union, as measured


def test_an_open_part_whose_hole_is_not_small_says_so():
    r = real("55")
    assert r.before.open_edges == 118
    assert r.holes_filled == 2 and r.after.open_edges == 110 and not r.after.closed
    assert any("110 edges left open" in s for s in r.left)
    assert r.after.volume_mm3 == pytest.approx(published("55"), rel=0.05)


def test_a_closed_real_part_is_not_touched():
    v, _, exam = examine(AMPP / "meshes" / "4.stl")
    r = repair_mesh(v, exam.topology, exam.volume)
    assert np.array_equal(r.faces, exam.topology.faces) and np.array_equal(r.vertices, v)
    assert r.after.volume_mm3 == pytest.approx(published("4"), rel=0.005)


def test_repaired_names_tell_apart_files_of_the_same_stem(tmp_path):
    a, b = tmp_path / "x" / "bracket.stl", tmp_path / "y" / "bracket.obj"
    names = repaired_names([a, b, tmp_path / "hinge.stl"], tmp_path)
    assert names[tmp_path / "hinge.stl"] == Path("meshes/hinge-repaired.3mf")
    assert names[a] != names[b] and all(str(n).endswith("-repaired.3mf") for n in names.values())


def test_a_sliver_with_its_corner_on_its_long_edge_is_flipped_away():
    # a 10 mm cube whose top carries a sliver (A, C, M), M the middle of the diagonal A-C
    from packer.intake.mesh.shells import flat_triangles, flip_caps
    v, f = cube(10.0)
    top = [t for t in f.tolist() if all(v[i][2] > 10 - 1e-9 for i in t)]
    rest = [t for t in f.tolist() if t not in top]
    ids = {tuple(np.round(p, 6)): k for k, p in enumerate(v)}
    A, B, C, D = (ids[p] for p in [(0, 0, 10), (10, 0, 10), (10, 10, 10), (0, 10, 10)])
    v = np.concatenate([v, [[5.0, 5.0, 10.0]]])
    M = len(v) - 1
    faces = np.array(rest + [[A, B, C], [A, C, M], [A, M, D], [M, C, D]])
    if signed_volume(v, faces) < 0:
        faces = faces[:, ::-1]
    assert flat_triangles(v, faces).sum() == 1 and closed_as_indexed(faces)
    out = flip_caps(v, faces)
    assert flat_triangles(v, out).sum() == 0 and closed_as_indexed(out) and len(out) == len(faces)
    assert signed_volume(v, out) == pytest.approx(1000.0, rel=1e-12)                # closed form 10^3
