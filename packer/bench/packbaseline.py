"""A simple reference packer: bounding boxes in shelves and layers.

Each part lies in the allowed rotation with the lowest bounding box; boxes,
tallest first, fill rows along x, rows fill a layer along y, layers stack in z,
always ``spacing`` apart. It stands for the plain automatic layouts the
spectral packer is measured against (``packer bench pack``).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from packer.pack3d.model import Body, Build, BuildPlacement, BuildsResult
from packer.pack3d.orient import rotations_for

__all__ = ["bbox_layers"]


def bbox_layers(bodies: Sequence[Body], *, volume: tuple[float, float, float], spacing: float,
                margin: float) -> BuildsResult:
    """Pack bodies by their bounding boxes in rows and layers.

    Parameters
    ----------
    bodies : sequence of Body
    volume : (3,) float, mm
    spacing, margin : float, mm

    Returns
    -------
    BuildsResult
    """
    vol = np.asarray(volume, dtype=float)
    inner = vol - 2 * margin
    items, unplaced = [], []
    for i, b in enumerate(bodies):
        best = None
        for r in rotations_for(b.orientations):
            v = b.mesh.vertices @ r.T
            lo, ext = v.min(axis=0), np.ptp(v, axis=0)
            if (ext > inner + 1e-9).any():
                continue
            key = (ext[2], -ext[0])
            if best is None or key < best[0]:
                best = (key, r, lo, ext)
        if best is None:
            unplaced.append((i, "larger than the volume inside the margin in every allowed orientation"))
        else:
            items.append((i, best[1], best[2], best[3]))
    items.sort(key=lambda it: (-it[3][2], -it[3][1], it[0]))
    builds: list[list[tuple[int, np.ndarray]]] = []
    tops: list[float] = []
    cur: list[tuple[int, np.ndarray]] = []
    x = y = z = 0.0
    row_d = layer_h = 0.0
    top = 0.0
    for i, r, lo, ext in items:
        if x > 0 and x + ext[0] > inner[0] + 1e-9:  # next row
            x, y, row_d = 0.0, y + row_d + spacing, 0.0
        if y > 0 and y + ext[1] > inner[1] + 1e-9:  # next layer
            x, y, row_d = 0.0, 0.0, 0.0
            z, layer_h = z + layer_h + spacing, 0.0
        if z > 0 and z + ext[2] > inner[2] + 1e-9:  # next build
            builds.append(cur)
            tops.append(top)
            cur, x, y, z, row_d, layer_h, top = [], 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
        t = np.eye(4)
        t[:3, :3] = r
        t[:3, 3] = margin + np.array([x, y, z]) - lo
        cur.append((i, t))
        top = max(top, z + ext[2])
        x += ext[0] + spacing
        row_d, layer_h = max(row_d, ext[1]), max(layer_h, ext[2])
    if cur:
        builds.append(cur)
        tops.append(top)
    out = []
    for placed, top in zip(builds, tops):
        height = margin + top + margin
        part_volume = sum(float(bodies[i].mesh.volume) for i, _ in placed)
        out.append(Build(placements=tuple(BuildPlacement(index=i, transform=t) for i, t in sorted(placed, key=lambda p: p[0])),
                         height=float(height), density=float(part_volume / (vol[0] * vol[1] * height))))
    return BuildsResult(builds=tuple(out), unplaced=tuple(unplaced))
