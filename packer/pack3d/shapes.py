"""Voxel kernels of a body in each allowed rotation, on a build grid."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh

from packer.pack3d.interlock import CellSet
from packer.pack3d.voxel import cells_of_points, half_phase_cells, surface_samples

__all__ = ["Shape", "sample_tolerance", "body_samples", "shapes_of", "cellset_of_points"]


def sample_tolerance(pitch: float) -> float:
    """Sampling tolerance (mm) used with a grid pitch: an eighth of a cell."""
    return pitch / 8.0


@dataclass(frozen=True)
class Shape:
    """One rotation of one body on the grid.

    Parameters
    ----------
    rotation : (3, 3) float
    kernel : (a, b, c) bool
        Conservative filled cells, with the body's lowest sample corner at cell (0, 0, 0).
    shift : (3,) float, mm
        Translation of the rotated mesh that puts it in kernel coordinates.
    top : float, mm
        Highest z of the rotated mesh after ``shift``.
    cells : int
        Number of kernel cells.
    """

    rotation: np.ndarray
    kernel: np.ndarray
    shift: np.ndarray
    top: float
    cells: int


def body_samples(mesh: trimesh.Trimesh, *, tol: float) -> np.ndarray:
    """Surface samples of a mesh in its source frame, (k, 3) float mm."""
    return surface_samples(mesh.vertices, mesh.faces, tol=tol)


def _signed_permutation(rot: np.ndarray):
    """(perm, signs) when ``rot`` maps axes to axes (rot[i, perm[i]] = signs[i]), else None."""
    r = np.round(rot)
    if not np.allclose(rot, r, atol=1e-9) or not (np.abs(r).sum(axis=0) == 1).all():
        return None
    perm = np.abs(r).argmax(axis=1)
    return perm, r[np.arange(3), perm]


def _voxelise(q: np.ndarray, pitch: float, tol: float) -> list[tuple[np.ndarray, np.ndarray]]:
    """(kernel, shift) of points ``q`` with their min corner moved to ``tol`` plus
    each of the eight half-cell phases."""
    shift = -q.min(axis=0) + tol + 2e-6 * pitch
    kernels = half_phase_cells(q + shift, pitch=pitch, tol=tol)
    return [(k, shift + np.array(ph) * pitch / 2) for ph, k in kernels.items()]


def shapes_of(mesh: trimesh.Trimesh, samples: np.ndarray, rotations: np.ndarray, *,
              pitch: float) -> list[Shape]:
    """Kernels of a body for each rotation, identical kernels dropped.

    Axis-aligned rotations reuse one voxelisation of the source frame by
    transposing and flipping its cells (the cell covering ``[i p, (i+1) p]``
    becomes the one covering ``[(n-1-i) p, (n-i) p]`` on a flipped axis). The
    source frame is voxelised at eight sub-cell offsets (0 or half a cell per
    axis); each rotation keeps the offset with the fewest cells.

    Parameters
    ----------
    mesh : trimesh.Trimesh
    samples : (k, 3) float, mm
        From :func:`body_samples` with ``tol = sample_tolerance(pitch)``.
    rotations : (n, 3, 3) float
    pitch : float, mm

    Returns
    -------
    list of Shape, in the order of ``rotations``.
    """
    tol = sample_tolerance(pitch)
    verts = np.asarray(mesh.vertices, dtype=float)
    bases = None
    out: list[Shape] = []
    seen: set = set()
    for rot in rotations:
        sp = _signed_permutation(rot)
        options = []
        if sp is None:
            options = _voxelise(samples @ rot.T, pitch, tol)
        else:
            if bases is None:
                bases = [(k, -shift) for k, shift in _voxelise(samples, pitch, tol)]
            perm, signs = sp
            for kernel, low in bases:
                k = np.transpose(kernel, perm)
                flip = tuple(i for i in range(3) if signs[i] < 0)
                if flip:
                    k = np.flip(k, axis=flip)
                n = np.array(kernel.shape)[perm]
                shift = np.where(signs > 0, -low[perm], n * pitch + low[perm])
                options.append((np.ascontiguousarray(k), shift))
        kernel, shift = min(options, key=lambda o: (int(o[0].sum()), o[0].shape[2]))
        key = (kernel.shape, np.packbits(kernel).tobytes())
        if key in seen:
            continue
        seen.add(key)
        top = float((verts @ rot.T)[:, 2].max() + shift[2])
        out.append(Shape(rotation=np.asarray(rot, dtype=float), kernel=kernel,
                         shift=shift, top=top, cells=int(kernel.sum())))
    return out


def cellset_of_points(points: np.ndarray, *, origin: np.ndarray, pitch: float, tol: float) -> CellSet:
    """Conservative filled cells of samples already placed in the build.

    Parameters
    ----------
    points : (k, 3) float, mm, build coordinates
    origin : (3,) float, mm, grid origin
    pitch, tol : float, mm
    """
    local = points - origin
    start = np.floor((local.min(axis=0) - tol - 1e-6 * pitch) / pitch).astype(np.int64)
    mask = cells_of_points(local - start * pitch, pitch=pitch, tol=tol)
    return CellSet(origin=start, mask=mask)
