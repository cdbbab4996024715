"""One build volume on a voxel grid, filled part by part with FFT collision tests.

For a part in one rotation, the count of its cells that fall on occupied
(spacing-dilated) cells, for every translation at once, is a correlation of two
grids; :mod:`scipy.fft` computes it in O(N log N). Among the free translations
the packer takes the one with the lowest score (lowest top first, then lowest
bottom, then nearest the back-left corner), provided the new part can slide
apart from each neighbour (:func:`packer.pack3d.interlock.pair_separable`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import fft as sfft

from packer.pack3d.interlock import CellSet, pair_separable
from packer.pack3d.shapes import Shape
from packer.pack3d.voxel import dilate

__all__ = ["GridBuild", "Slot", "ScoreWeights"]


@dataclass(frozen=True)
class ScoreWeights:
    """Weights of a placement score, in cells: top z, bottom z, x + y, and the
    part's footprint as a share of the floor times the grid height."""

    top: float = 1.0
    bottom: float = 0.5
    corner: float = 0.002
    footprint: float = 0.0


@dataclass(frozen=True)
class Slot:
    """A part placed on the grid: body index, shape, and cell offset (3,) int."""

    index: int
    shape: Shape
    offset: np.ndarray

    @property
    def cells(self) -> CellSet:
        return CellSet(origin=self.offset, mask=self.shape.kernel)


@dataclass
class GridBuild:
    """Mutable state of one build being filled.

    Parameters
    ----------
    dims : (3,) int
        Grid cells along x, y, z.
    structure : (2r+1, 2r+1, 2r+1) bool
        Spacing structuring element (:func:`packer.pack3d.voxel.spacing_offsets`).
    weights : ScoreWeights
    candidates : int
        Best translations kept per rotation for the interlocking test.
    """

    dims: tuple[int, int, int]
    structure: np.ndarray
    weights: ScoreWeights = field(default_factory=ScoreWeights)
    candidates: int = 4
    occupied: np.ndarray = field(init=False)
    slots: list[Slot] = field(init=False, default_factory=list)
    top_cell: int = field(init=False, default=0)
    free_cells: int = field(init=False)

    @property
    def radius(self) -> int:
        return self.structure.shape[0] // 2

    def __post_init__(self):
        self.occupied = np.zeros(self.dims, dtype=np.float32)
        self.free_cells = int(np.prod(self.dims))

    # -- search -------------------------------------------------------------------------
    def best_slots(self, index: int, shapes: list[Shape], *, keep: int, min_z: int = 0,
                   prune: bool = True) -> list[tuple[float, Slot]]:
        """Free translations of each shape with the lowest scores, best first (score, slot).

        Parameters
        ----------
        index : int
            Body index the slots are for.
        shapes : list of Shape
        keep : int
            Translations kept per shape.
        min_z : int
            Lowest cell the part's bottom may take.
        prune : bool
            Skip a shape whose lowest possible score (standing on the floor in
            the corner) is above the best score found so far.
        """
        nx, ny, nz = self.dims
        fits = [s for s in shapes if all(a <= b for a, b in zip(s.kernel.shape, self.dims))]
        if not fits:
            return []
        wz = min(nz, self.top_cell + self.radius + max(s.kernel.shape[2] for s in fits))
        size = tuple(sfft.next_fast_len(int(v), real=True) for v in (nx, ny, wz))
        grid_f = sfft.rfftn(self.occupied[:, :, :wz], s=size, workers=2)
        w = self.weights
        out = []
        best = np.inf
        for shape in fits:
            kx, ky, kz = shape.kernel.shape
            tx, ty, tz = nx - kx + 1, ny - ky + 1, wz - kz + 1
            if tz <= 0:
                continue
            floor = w.top * (min_z + kz) + w.bottom * min_z + w.footprint * (kx * ky * nz / (nx * ny))
            if prune and floor > best:
                continue
            ker_f = sfft.rfftn(shape.kernel.astype(np.float32), s=size, workers=2)
            corr = sfft.irfftn(grid_f * np.conj(ker_f), s=size, workers=2)[:tx, :ty, :tz]
            x = np.arange(tx, dtype=np.float32)[:, None, None]
            y = np.arange(ty, dtype=np.float32)[None, :, None]
            z = np.arange(tz, dtype=np.float32)[None, None, :]
            score = (w.top * (z + kz) + w.bottom * z) + w.corner * (x + y) + w.footprint * (kx * ky * nz / (nx * ny))
            score = np.where((corr < 0.5) & (z >= min_z), score, np.inf).ravel()
            k = min(keep, score.size)
            top_k = np.argpartition(score, k - 1)[:k]
            for flat in top_k:
                if np.isfinite(score[flat]):
                    best = min(best, float(score[flat]))
                    off = np.array(np.unravel_index(flat, (tx, ty, tz)), dtype=np.int64)
                    out.append((float(score[flat]), Slot(index=index, shape=shape, offset=off)))
        out.sort(key=lambda c: (c[0], c[1].offset.tolist()))
        return out

    def separable(self, slot: Slot) -> bool:
        """Can the candidate slide apart from every placed neighbour?"""
        new = slot.cells
        for other in self.slots:
            o = other.cells
            if (o.hi <= new.origin).any() or (new.hi <= o.origin).any():
                continue
            if not pair_separable(new, o):
                return False
        return True

    def try_place(self, index: int, shapes: list[Shape]) -> Slot | None:
        """Place the body at its best separable translation; None when nothing fits.

        The best few translations of each shape are tried first, then more; a
        part whose every good place would chain it to a neighbour goes above
        all placed parts, where it can always slide out upwards.
        """
        if min(s.cells for s in shapes) > self.free_cells:
            return None
        tried = set()
        for keep, min_z, prune in ((self.candidates, 0, True), (16 * self.candidates, 0, False),
                                   (1, self.top_cell, True)):
            found = self.best_slots(index, shapes, keep=keep, min_z=min_z, prune=prune)
            if not found and min_z == 0:
                return None  # no free place at all
            for _, slot in found:
                key = (id(slot.shape), tuple(slot.offset))
                if key in tried:
                    continue
                tried.add(key)
                if self.separable(slot):
                    self.add(slot)
                    return slot
        return None

    # -- state ---------------------------------------------------------------------------
    def add(self, slot: Slot) -> None:
        """Mark a slot's dilated cells occupied."""
        self.slots.append(slot)
        dil = dilate(slot.shape.kernel, self.structure)
        start = slot.offset - self.radius
        a = np.maximum(start, 0)
        b = np.minimum(start + np.array(dil.shape), self.dims)
        src = tuple(slice(a[k] - start[k], b[k] - start[k]) for k in range(3))
        dst = tuple(slice(a[k], b[k]) for k in range(3))
        region = self.occupied[dst]
        self.free_cells -= int(np.count_nonzero(dil[src] & (region < 0.5)))
        region[dil[src]] = 1.0
        self.top_cell = max(self.top_cell, int(slot.offset[2] + slot.shape.kernel.shape[2]))

    def rebuilt_without(self, drop: set[int]) -> "GridBuild":
        """A fresh build holding every slot except the positions in ``drop``."""
        g = GridBuild(self.dims, self.structure, self.weights, self.candidates)
        for k, s in enumerate(self.slots):
            if k not in drop:
                g.add(s)
        return g
