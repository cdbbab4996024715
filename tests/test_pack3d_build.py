"""Powder builds (packer.pack3d.pack_builds): exact spacing and containment, orientations, unplaced, errors."""

import numpy as np
import pytest
import trimesh

from packer.errors import GeometryError, InputError
from packer.pack3d import Body, pack_builds, verify_build

VOLUME = (120.0, 110.0, 150.0)
SPACING, MARGIN = 3.0, 4.0


def small_set():
    parts = [trimesh.creation.box((40, 25, 12)), trimesh.creation.cylinder(radius=9, height=45, sections=24),
             trimesh.creation.torus(18, 4, major_sections=24, minor_sections=12),
             trimesh.creation.annulus(8, 15, 20, sections=24), trimesh.creation.icosphere(1, radius=10)]
    return [Body(parts[k % len(parts)]) for k in range(10)]


def placed(bodies, build):
    out = []
    for p in build.placements:
        m = bodies[p.index].mesh.copy()
        m.apply_transform(p.transform)
        out.append(m)
    return out


@pytest.fixture(scope="module")
def packed():
    bodies = small_set()
    # default grid pitch here (1 mm for this volume); the other tests use 3 mm cells for speed
    return bodies, pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, seed=1,
                               variants=1)


def test_every_body_once_and_exact_spacing(packed):
    bodies, res = packed
    idx = sorted(p.index for b in res.builds for p in b.placements)
    assert idx == list(range(len(bodies))) and res.unplaced == ()
    for b in res.builds:
        meshes = placed(bodies, b)
        # containment in the volume shrunk by the margin, from the transformed vertices
        for m in meshes:
            assert m.bounds[0].min() >= MARGIN - 1e-6
            assert np.all(m.bounds[1] <= np.array(VOLUME) - MARGIN + 1e-6)
        # mesh-to-mesh distance with python-fcl through trimesh's collision manager (independent of the packer)
        mgr = trimesh.collision.CollisionManager()
        for k, m in enumerate(meshes):
            mgr.add_object(str(k), m)
        for k, m in enumerate(meshes):
            mgr.remove_object(str(k))
            if len(meshes) > 1:
                assert mgr.min_distance_single(m) >= SPACING - 1e-6
            mgr.add_object(str(k), m)
        # each transform is a proper rotation plus translation
        for p in b.placements:
            r = p.transform[:3, :3]
            assert np.allclose(r @ r.T, np.eye(3)) and np.linalg.det(r) > 0
        assert verify_build(bodies, b.placements, volume=VOLUME, spacing=SPACING, margin=MARGIN) == []


def test_height_and_density_are_consistent(packed):
    bodies, res = packed
    for b in res.builds:
        top = max(m.bounds[1][2] for m in placed(bodies, b))
        assert b.height == pytest.approx(top + MARGIN)
        vol = sum(bodies[p.index].mesh.volume for p in b.placements)
        assert b.density == pytest.approx(vol / (VOLUME[0] * VOLUME[1] * b.height))
        assert 0 < b.density < 1


def test_same_seed_same_builds():
    bodies = small_set()[:6]
    a = pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, seed=2, variants=2, pitch=3.0)
    b = pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, seed=2, variants=2, pitch=3.0)
    assert len(a.builds) == len(b.builds)
    for x, y in zip(a.builds, b.builds):
        assert [p.index for p in x.placements] == [p.index for p in y.placements]
        assert all(np.array_equal(p.transform, q.transform) for p, q in zip(x.placements, y.placements))


def test_too_big_part_is_unplaced_with_reason():
    bodies = [Body(trimesh.creation.box((300, 20, 20))), Body(trimesh.creation.box((20, 20, 20)))]
    res = pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, variants=1, pitch=3.0)
    assert [i for i, _ in res.unplaced] == [0]
    assert "larger than the volume" in res.unplaced[0][1]
    assert [p.index for b in res.builds for p in b.placements] == [1]


def test_locked_part_that_fits_only_rotated_is_unplaced():
    tall = trimesh.creation.box((20, 20, 140))  # 140 > 150 - 2*4 only along z: fits upright, not lying
    long = trimesh.creation.box((20, 140, 20))  # fits only when turned up (y is 110 mm)
    res = pack_builds([Body(long, "locked"), Body(long, "any"), Body(tall, "locked")], volume=VOLUME,
                      spacing=SPACING, margin=MARGIN, seconds=5, variants=1, pitch=3.0)
    assert [i for i, _ in res.unplaced] == [0]


def test_upright_rotations_keep_z():
    bodies = [Body(trimesh.creation.box((60, 15, 8)), "upright") for _ in range(4)]
    res = pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, variants=1, pitch=3.0)
    for b in res.builds:
        for p in b.placements:
            assert np.allclose(p.transform[2, :3], [0, 0, 1])


def test_more_parts_than_fit_open_a_second_build():
    cube = trimesh.creation.box((50, 50, 60))
    bodies = [Body(cube) for _ in range(6)]  # at most 2 x 2 per build (one layer)
    res = pack_builds(bodies, volume=(115.0, 115.0, 80.0), spacing=SPACING, margin=MARGIN, seconds=5, variants=2,
                      pitch=3.0)
    # 50 + 3 + 50 <= 107 < 3 * 50 in x and y, 2 * 50 + 3 > 72 in z: four per build
    assert len(res.builds) == 2
    assert sorted(len(b.placements) for b in res.builds) == [2, 4]


def test_input_errors():
    box = Body(trimesh.creation.box((10, 10, 10)))
    with pytest.raises(InputError, match="volume must be"):
        pack_builds([box], volume=(10, -1, 10), spacing=1, margin=1, seconds=1)
    with pytest.raises(InputError, match="leaves no room"):
        pack_builds([box], volume=(10, 10, 10), spacing=1, margin=5, seconds=1)
    with pytest.raises(InputError, match="orientations must be"):
        pack_builds([Body(box.mesh, "sideways")], volume=(50, 50, 50), spacing=1, margin=1, seconds=1)
    inverted = trimesh.creation.box((10, 10, 10))
    inverted.invert()
    with pytest.raises(GeometryError, match="no positive volume"):
        pack_builds([Body(inverted)], volume=(50, 50, 50), spacing=1, margin=1, seconds=1)


def test_explicit_rotations_are_the_only_ones_used():
    c = s = np.sqrt(0.5)
    turn = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])  # 45 degrees about z
    bodies = [Body(trimesh.creation.box((60, 10, 10)), (turn,)) for _ in range(3)]
    res = pack_builds(bodies, volume=(100.0, 100.0, 100.0), spacing=SPACING, margin=2.0, seconds=5, variants=1,
                      pitch=3.0)
    assert sum(len(b.placements) for b in res.builds) == 3
    for b in res.builds:
        for p in b.placements:
            assert np.allclose(p.transform[:3, :3], turn)
        assert verify_build(bodies, b.placements, volume=(100.0, 100.0, 100.0), spacing=SPACING, margin=2.0) == []


def test_empty_input_gives_no_builds():
    res = pack_builds([], volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=1)
    assert res.builds == () and res.unplaced == ()
