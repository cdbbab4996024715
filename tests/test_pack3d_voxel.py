"""Conservative voxels (packer.pack3d.voxel, shapes): coverage, spacing offsets, rotated kernels."""

import numpy as np
import trimesh
from scipy.spatial import cKDTree

from packer.pack3d.orient import axis_rotations
from packer.pack3d.shapes import body_samples, cellset_of_points, shapes_of
from packer.pack3d.voxel import spacing_offsets, surface_samples


def test_samples_cover_the_surface_within_tol():
    mesh = trimesh.creation.annulus(5, 9, 30, sections=16)  # long thin side triangles
    tol = 0.4
    pts = surface_samples(mesh.vertices, mesh.faces, tol=tol)
    probe, _ = trimesh.sample.sample_surface(mesh, 5000, seed=1)
    assert cKDTree(pts).query(probe)[0].max() <= tol


def test_spacing_offsets_keep_cells_apart():
    # an offset is left out only when the closed cells are at least the spacing apart
    for pitch, spacing in ((3.0, 3.0), (1.0, 3.0), (2.0, 3.0), (1.5, 2.0)):
        st = spacing_offsets(pitch=pitch, spacing=spacing)
        r = st.shape[0] // 2
        for d in np.ndindex(*st.shape):
            off = np.array(d) - r
            gap = pitch * np.sqrt(np.sum(np.maximum(np.abs(off) - 1, 0) ** 2))
            assert st[d] == (gap < spacing)


def test_rotated_kernels_match_a_direct_voxelisation():
    # kernels made by transposing and flipping equal the cells of the placed samples
    pitch = 3.0
    mesh = trimesh.creation.cylinder(radius=7, height=23, sections=20)
    mesh.apply_translation((1.3, -2.1, 0.4))
    samples = body_samples(mesh, tol=pitch / 8)
    origin = np.array([5.0, 5.0, 5.0])
    for shape in shapes_of(mesh, samples, axis_rotations(), pitch=pitch):
        t = origin + pitch * np.array([3, 4, 5]) + shape.shift
        cells = cellset_of_points(samples @ shape.rotation.T + t, origin=origin, pitch=pitch, tol=pitch / 8)
        assert np.array_equal(cells.origin, [3, 4, 5])
        assert np.array_equal(cells.mask, shape.kernel)
        # and the kernel covers the mesh: every vertex lies in a marked cell
        v = (mesh.vertices @ shape.rotation.T + shape.shift) / pitch
        idx = np.floor(v).astype(int)
        assert shape.kernel[idx[:, 0], idx[:, 1], idx[:, 2]].all()
