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

__all__ = ["surface_samples", "mark_cells", "cells_of_points", "half_phase_cells", "spacing_offsets", "dilate",
           "grid_pitch"]


def surface_samples(vertices: np.ndarray, faces: np.ndarray, *, tol: float) -> np.ndarray:
    """Points on a triangle mesh so that every surface point is within ``tol`` of one.

    Each triangle is cut by lines parallel to its longest edge, at most
    ``tol / sqrt(2)`` apart, and each line carries points at most
    ``tol * sqrt(2)`` apart (ends included). The longest edge's end angles are
    acute, so every point of the triangle projects onto the next line towards
    that edge within ``tol / sqrt(2)`` and lies within ``tol`` of a point on it.
    Thin slivers get few lines, so the count stays near area / tol**2.

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
    lengths = np.linalg.norm(tri[:, [1, 2, 0]] - tri, axis=2)  # edge k runs from corner k to k+1
    k = lengths.argmax(axis=1)
    rows = np.arange(len(tri))
    b0, b1, apex = tri[rows, k], tri[rows, (k + 1) % 3], tri[rows, (k + 2) % 3]
    base = lengths[rows, k]
    area2 = np.linalg.norm(np.cross(b1 - b0, apex - b0), axis=1)
    height = np.where(base > 0, area2 / np.maximum(base, 1e-300), 0.0)
    gap, step = tol / np.sqrt(2.0), tol * np.sqrt(2.0)
    lines = np.ceil(height / gap).astype(np.int64) + 1  # lines per triangle, t = 0 .. 1
    line_tri = np.repeat(rows, lines)
    first = np.cumsum(lines) - lines
    line_k = np.arange(len(line_tri)) - np.repeat(first, lines)
    t = line_k / np.maximum(np.repeat(lines, lines) - 1, 1)
    start = b0[line_tri] + t[:, None] * (apex[line_tri] - b0[line_tri])
    end = b1[line_tri] + t[:, None] * (apex[line_tri] - b1[line_tri])
    seg = (1.0 - t) * base[line_tri]
    pts_per = np.ceil(seg / step).astype(np.int64) + 1
    pt_line = np.repeat(np.arange(len(line_tri)), pts_per)
    pfirst = np.cumsum(pts_per) - pts_per
    u = (np.arange(len(pt_line)) - np.repeat(pfirst, pts_per)) / np.maximum(np.repeat(pts_per, pts_per) - 1, 1)
    return start[pt_line] + u[:, None] * (end[pt_line] - start[pt_line])


def mark_cells(local: np.ndarray, *, pitch: float, tol: float, slack: float, shape=None) -> np.ndarray:
    """Cells meeting a ball of radius ``tol + slack`` around any sample (no filling).

    Parameters
    ----------
    local : (k, 3) float, mm, grid coordinates (``local - tol - slack >= 0``)
    pitch, tol, slack : float, mm
    shape : tuple of 3 int, optional

    Returns
    -------
    (a, b, c) bool array
    """
    lo = np.floor((local - tol - slack) / pitch).astype(np.int64)
    hi = np.floor((local + tol + slack) / pitch).astype(np.int64)
    if shape is None:
        shape = tuple(int(v) + 1 for v in hi.max(axis=0))
    occ = np.zeros(shape, dtype=bool)
    for cx in (lo[:, 0], hi[:, 0]):
        for cy in (lo[:, 1], hi[:, 1]):
            for cz in (lo[:, 2], hi[:, 2]):
                occ[cx, cy, cz] = True
    return occ


def cells_of_points(local: np.ndarray, *, pitch: float, tol: float, shape=None) -> np.ndarray:
    """Filled conservative cell set of a closed surface given by samples.

    Parameters
    ----------
    local : (k, 3) float, mm
        Samples in grid coordinates: cell (i, j, k) spans ``[i*pitch, (i+1)*pitch]``
        on x and so on. Every ``local - tol`` must exceed ``1e-6 * pitch``.
    pitch, tol : float, mm
    shape : tuple of 3 int, optional
        Array shape; by default just large enough.

    Returns
    -------
    (a, b, c) bool array: cells meeting a ball of radius tol around a sample
    (cells meeting the ball's boundary exactly count as met), plus every cell
    the marked shell encloses.
    """
    return ndimage.binary_fill_holes(mark_cells(local, pitch=pitch, tol=tol, slack=1e-6 * pitch, shape=shape))


def half_phase_cells(local: np.ndarray, *, pitch: float, tol: float) -> dict:
    """:func:`cells_of_points` of ``local + phase * pitch / 2`` for the eight phases in {0, 1}^3.

    The samples are marked once on a grid of half the pitch; a cell of the
    full grid is the union of 2 x 2 x 2 half cells, so each phase is a pooling
    of the half grid shifted by the phase.

    Returns
    -------
    dict mapping a phase tuple (0 or 1 per axis) to a filled bool array.
    """
    half = mark_cells(local, pitch=pitch / 2, tol=tol, slack=1e-6 * pitch)
    out = {}
    for ph in np.ndindex(2, 2, 2):
        pad = [(p, (n + p) % 2) for p, n in zip(ph, half.shape)]
        a = np.pad(half, pad)
        a = a.reshape(a.shape[0] // 2, 2, a.shape[1] // 2, 2, a.shape[2] // 2, 2).any(axis=(1, 3, 5))
        out[ph] = ndimage.binary_fill_holes(a)
    return out


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
