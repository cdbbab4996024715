"""Conservative voxel sets of meshes: every cell the solid touches is marked.

A mesh surface is sampled so that every surface point lies within ``tol`` mm of
a sample; a cell is marked when it meets the ball of radius ``tol`` around a
sample, so the marked cells cover the whole surface. Filling the cells the
surface shell encloses then covers the solid. Two parts whose cell sets keep
the gap of :func:`spacing_offsets` apart are at least the spacing apart.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

__all__ = ["surface_samples", "cells_of_points", "spacing_offsets", "dilate", "grid_pitch"]


def surface_samples(vertices: np.ndarray, faces: np.ndarray, *, tol: float) -> np.ndarray:
    """Points on a triangle mesh so that every surface point is within ``tol`` of one.

    Each triangle gets a barycentric grid whose sub-triangles have edges at most
    ``tol * sqrt(3)`` long; no point of such a sub-triangle is farther than
    ``tol`` from its nearest corner.

    Parameters
    ----------
    vertices : (n, 3) float, mm
    faces : (m, 3) int
    tol : float, mm

    Returns
    -------
    (k, 3) float, mm
    """
    tri = np.asarray(vertices, dtype=float)[np.asarray(faces)]
    edges = np.linalg.norm(tri[:, [1, 2, 0]] - tri, axis=2).max(axis=1)
    steps = np.maximum(1, np.ceil(edges / (tol * np.sqrt(3.0)) - 1e-9)).astype(int)
    out = [np.asarray(vertices, dtype=float)]
    for n in np.unique(steps):
        if n == 1:
            continue
        sel = tri[steps == n]
        i, j = np.meshgrid(np.arange(n + 1), np.arange(n + 1), indexing="ij")
        keep = (i + j) <= n
        a, b = i[keep] / n, j[keep] / n
        w = np.stack([1.0 - a - b, a, b], axis=1)  # (q, 3)
        pts = np.einsum("qk,tkd->tqd", w, sel).reshape(-1, 3)
        out.append(pts)
    return np.concatenate(out)


def cells_of_points(local: np.ndarray, *, pitch: float, tol: float, shape=None) -> np.ndarray:
    """Filled conservative cell set of a closed surface given by samples.

    Parameters
    ----------
    local : (k, 3) float, mm
        Samples in grid coordinates: cell (i, j, k) spans ``[i*pitch, (i+1)*pitch]``
        on x and so on. Every ``local - tol`` must be non-negative.
    pitch, tol : float, mm
    shape : tuple of 3 int, optional
        Array shape; by default just large enough.

    Returns
    -------
    (a, b, c) bool array: cells meeting a ball of radius tol around a sample,
    plus every cell the marked shell encloses.
    """
    lo = np.floor((local - tol) / pitch).astype(np.int64)
    hi = np.floor((local + tol) / pitch).astype(np.int64)
    if shape is None:
        shape = tuple(int(v) + 1 for v in hi.max(axis=0))
    occ = np.zeros(shape, dtype=bool)
    for cx in (lo[:, 0], hi[:, 0]):
        for cy in (lo[:, 1], hi[:, 1]):
            for cz in (lo[:, 2], hi[:, 2]):
                occ[cx, cy, cz] = True
    return ndimage.binary_fill_holes(occ)


def spacing_offsets(*, pitch: float, spacing: float) -> np.ndarray:
    """Structuring element: cell offsets whose closed cells can be closer than ``spacing``.

    Two cells offset by ``d`` (in cells) are at least ``pitch * sqrt(sum(max(|d| - 1, 0)**2))``
    apart; every offset where that is below the spacing is marked.

    Returns
    -------
    (2r+1, 2r+1, 2r+1) bool array, centred.
    """
    r = int(np.ceil(spacing / pitch)) + 1
    d = np.arange(-r, r + 1)
    g = np.maximum(np.abs(d) - 1, 0) * pitch
    gx, gy, gz = np.meshgrid(g, g, g, indexing="ij")
    st = np.sqrt(gx**2 + gy**2 + gz**2) < spacing - 1e-12
    st[r, r, r] = True
    # trim empty outer shells
    while st.shape[0] > 1 and not st[0].any():
        st = st[1:-1, 1:-1, 1:-1]
    return st


def dilate(occ: np.ndarray, structure: np.ndarray) -> np.ndarray:
    """Dilate a cell set by a centred structuring element, growing the array.

    Returns
    -------
    bool array larger by ``structure.shape[0] - 1`` on every axis (the input
    sits at offset ``structure.shape[0] // 2``).
    """
    r = structure.shape[0] // 2
    pad = np.pad(occ, r)
    if r == 0:
        return pad
    return ndimage.binary_dilation(pad, structure=structure)


def grid_pitch(inner: np.ndarray, spacing: float, *, max_cells: float = 2.0e6) -> float:
    """Voxel pitch for a build: the spacing divided by a whole number when possible.

    Parameters
    ----------
    inner : (3,) float, mm
        Usable extents (volume shrunk by the margin).
    spacing : float, mm
    max_cells : float
        Budget on the number of grid cells.

    Returns
    -------
    float, mm
    """
    p_min = float(np.cbrt(np.prod(inner) / max_cells))
    if spacing <= 0:
        return p_min
    k = int(np.floor(spacing / p_min + 1e-9))
    return spacing / k if k >= 1 else p_min
