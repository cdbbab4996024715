"""Bounding-box shelf packing: the baseline the benchmark table compares against.

Each shape is replaced by the bounding box of its allowed orientation with the
smallest extent along the strip (or, for bins, the smallest height); boxes go
into shelves by first fit, in decreasing order of that extent.
"""

from __future__ import annotations

from typing import Sequence

from packer.nest.geometry import orient_polygon
from packer.nest.shapes import Shape

__all__ = ["shelf_strip_length", "shelf_bins"]


def _boxes(shapes: Sequence[Shape], *, limit: float):
    """(along, across) box sizes per shape, choosing the orientation with the least ``along``."""
    out = []
    for s in shapes:
        best = None
        for r in s.rotations:
            x0, y0, x1, y1 = orient_polygon(s.polygon, r, False).bounds
            along, across = x1 - x0, y1 - y0
            if across <= limit * (1 + 1e-12) and (best is None or along < best[0]):
                best = (along, across)
        out.append(best)
    return out


def shelf_strip_length(shapes: Sequence[Shape], width: float) -> float:
    """Strip length (mm) used by first-fit decreasing shelves of bounding boxes.

    A shelf is a column across the strip; its length is its widest box.
    """
    boxes = _boxes(shapes, limit=width)
    if any(b is None for b in boxes):
        return float("inf")
    shelves: list[list[float]] = []   # [length, used width]
    for along, across in sorted(boxes, key=lambda b: -b[0]):
        for sh in shelves:
            if sh[1] + across <= width * (1 + 1e-12):
                sh[1] += across
                break
        else:
            shelves.append([along, across])
    return float(sum(sh[0] for sh in shelves))


def shelf_bins(shapes: Sequence[Shape], width: float, height: float) -> int:
    """Number of bins used by first-fit decreasing shelves of bounding boxes in each bin."""
    boxes = _boxes(shapes, limit=height)
    if any(b is None or b[0] > width * (1 + 1e-12) for b in boxes):
        return -1
    bins: list[list[list[float]]] = []   # per bin: shelves [length, used height]; used length
    used: list[float] = []
    for along, across in sorted(boxes, key=lambda b: -b[0]):
        placed = False
        for k, shelves in enumerate(bins):
            for sh in shelves:
                if sh[1] + across <= height * (1 + 1e-12) and along <= sh[0]:
                    sh[1] += across
                    placed = True
                    break
            if not placed and used[k] + along <= width * (1 + 1e-12):
                shelves.append([along, across])
                used[k] += along
                placed = True
            if placed:
                break
        if not placed:
            bins.append([[along, across]])
            used.append(along)
    return len(bins)
