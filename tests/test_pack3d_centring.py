"""Powder builds sit in the middle of the chamber in x and y, low in z (common practice, no source)."""

import numpy as np
import trimesh

from packer.pack3d import Body, pack_builds, verify_build

VOLUME = (160.0, 140.0, 150.0)
SPACING, MARGIN = 3.0, 4.0


def test_a_small_build_is_centred_in_x_and_y_and_rests_low():
    bodies = [Body(trimesh.creation.box((30, 20, 10))) for _ in range(3)]
    res = pack_builds(bodies, volume=VOLUME, spacing=SPACING, margin=MARGIN, seconds=5, seed=0,
                      variants=1, pitch=3.0)
    assert len(res.builds) == 1 and res.unplaced == ()
    build = res.builds[0]
    pts = np.vstack([trimesh.transform_points(bodies[p.index].mesh.vertices, p.transform)
                     for p in build.placements])
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    # the parts' x-y box has equal room on both sides of each axis
    assert np.allclose((lo[:2] + hi[:2]) / 2, np.array(VOLUME[:2]) / 2, atol=1e-9)
    # three 10 mm slabs lie flat at the floor: the build stays low (one cell of packing slack)
    assert lo[2] <= MARGIN + 3.0 + 1e-9 and build.height <= MARGIN + 10.0 + 2 * 3.0 + MARGIN
    assert verify_build(bodies, build.placements, volume=VOLUME, spacing=SPACING, margin=MARGIN,
                        pitch=3.0) == []
