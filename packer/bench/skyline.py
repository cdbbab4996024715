"""Skyline packing of rectangles: the exact stand-in layout of the generated bench days.

A plate is a ``ux x uy`` rectangle; boxes go in one at a time where their
bottom edge is lowest (then leftmost), in either orientation. Used by
:func:`packer.bench.daygen.shelf_fits` for parts whose footprints are boxes.
"""

from __future__ import annotations

__all__ = ["Skyline", "largest_first", "skyline_place"]


class Skyline:
    """Skyline packing in a ``ux x uy`` rectangle, one box at a time.

    The skyline is a list of segments ``[x, width, y]`` covering ``[0, ux)``; a box
    goes where its bottom is lowest (then leftmost), in either orientation, and raises
    the skyline under it. Boxes never overlap: each rests on top of everything under
    its span.
    """

    def __init__(self, ux: float, uy: float):
        self.ux, self.uy = ux, uy
        self.sky = [[0.0, ux, 0.0]]

    def _spot(self, w: float, d: float):
        best = None
        sky = self.sky
        for k in range(len(sky)):
            x = sky[k][0]
            if x + w > self.ux + 1e-9:
                break
            y, span, m = 0.0, 0.0, k
            while span < w - 1e-9:
                y = max(y, sky[m][2])
                span += sky[m][1]
                m += 1
            if y + d <= self.uy + 1e-9 and (best is None or (y, x) < best[:2]):
                best = (y, x)
        return best

    def add(self, w: float, d: float):
        """Place a ``w x d`` box; returns ``(x, y, turned)`` or None when it does not fit."""
        cands = []
        for turned, (bw, bd) in ((False, (w, d)), (True, (d, w))):
            spot = self._spot(bw, bd)
            if spot is not None:
                cands.append((spot[0] + bd, spot[0], spot[1], turned, bw, bd))
        if not cands:
            return None
        _, y, x, turned, bw, bd = min(cands)
        self._raise(x, bw, y + bd)
        return (x, y, turned)

    def _raise(self, x: float, w: float, top: float) -> None:
        out = []
        for sx, sw, sy in self.sky:
            ex = sx + sw
            if ex <= x + 1e-12 or sx >= x + w - 1e-12:
                out.append([sx, sw, sy])
                continue
            if sx < x:
                out.append([sx, x - sx, sy])
            if ex > x + w:
                out.append([x + w, ex - (x + w), sy])
        out.append([x, w, top])
        out.sort()
        merged = [out[0]]
        for seg in out[1:]:
            last = merged[-1]
            if abs(last[2] - seg[2]) < 1e-12 and abs(last[0] + last[1] - seg[0]) < 1e-9:
                last[1] += seg[1]
            else:
                merged.append(seg)
        self.sky = merged


def largest_first(boxes, keys):
    """Largest first: by the longer side, then area, then index (deterministic)."""
    return sorted(keys, key=lambda k: (-max(boxes[k][0], boxes[k][1]), -boxes[k][0] * boxes[k][1], k))


def skyline_place(boxes, ux: float, uy: float):
    """Skyline placement of (w, d, ...) boxes, largest first.

    Returns ``(x, y, turned)`` per box, or None when they do not all fit.
    """
    sh = Skyline(ux, uy)
    out = [None] * len(boxes)
    for k in largest_first(boxes, range(len(boxes))):
        pos = sh.add(boxes[k][0], boxes[k][1])
        if pos is None:
            return None
        out[k] = pos
    return out
