"""A stand-in layout service for the fleet and replan benchmarks: boxes on shelves.

:class:`ShelfLayouts` answers the planner's layout questions for the generated
days of :mod:`packer.bench.daygen` (rectangular parts) with that module's
skyline packing, exact for boxes, instead of the nesting engine and the 3D
packer: the benchmarks then measure the planner. Its work is a fixed charge per
call and per copy.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from packer.bench.daygen import PartBox, box_can_print, box_hint, shelf_fits
from packer.layouts import Attempt, LayoutTraits, PlateLayout, prefix_fill

__all__ = ["ShelfLayouts", "DEFAULT_CALL_S"]

#: Work charged per stand-in call by default (s): the planner's smallest per-call allowance
#: (``PlannerSettings.min_fit_s``), what a layout call that reported no work was charged.
DEFAULT_CALL_S = 0.25


class ShelfLayouts:
    """The layout service of the benchmarks' generated days (see the module notes).

    ``call_s + copy_s * n`` deterministic seconds are charged per call of n copies.
    Powder builds stack layers of skylines (``packs_volume``); there is no pool fill.
    """

    def __init__(self, parts: tuple[PartBox, ...], *, call_s: float = DEFAULT_CALL_S, copy_s: float = 0.0) -> None:
        self.parts, self.call_s, self.copy_s = parts, call_s, copy_s
        self._fits, self._hint, self._can = shelf_fits(parts), box_hint(parts), box_can_print(parts)

    def traits(self, printer) -> LayoutTraits:
        return LayoutTraits(packs_volume=printer.profile.technology == "powder", pool_fill=False)

    def can_print(self, printer, ref) -> str | None:
        if ref.material not in printer.materials:
            return f"{printer.name} does not run {ref.material}"
        return self._can(printer, ref)

    def capacity(self, printer, refs: Sequence) -> float:
        return self._hint(printer, refs)

    def fits(self, printer, refs: Sequence, *, seconds: float | None = None) -> Attempt:
        work = self.call_s + self.copy_s * len(refs)
        shelf = self._fits(printer, refs)
        if shelf is None:
            return Attempt(None, (), work)
        # the shelves' room is the plate inside the margin grown by half the spacing, and each
        # box is grown by half the spacing: a part's corner is one margin in from the room's
        m = printer.profile.margin
        lift = m if self.traits(printer).packs_volume else 0.0
        moves = tuple(_box_move(x + m, y + m, z + lift, turned, self.parts[r.kind].d)
                      for (x, y, z, turned), r in zip(shelf.places, refs))
        layout = PlateLayout(transforms=moves, build_height_mm=shelf.build_height_mm,
                             utilization=self._hint(printer, refs), detail=shelf)
        return Attempt(layout, tuple(range(len(refs))), work)

    def fill(self, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
        """The longest prefix of ``refs`` (at least ``must``) on shelves: all, then halving the others."""
        return prefix_fill(self, printer, refs, must=must, seconds=seconds)


def _box_move(x: float, y: float, z: float, turned: bool, depth: float) -> np.ndarray:
    """(4, 4) move of a box with its lower-left corner at the origin to (x, y, z), turned a
    quarter about z when ``turned`` (its depth then runs along x)."""
    if not turned:
        return np.array([[1, 0, 0, x], [0, 1, 0, y], [0, 0, 1, z], [0, 0, 0, 1]], dtype=float)
    return np.array([[0, -1, 0, x + depth], [1, 0, 0, y], [0, 0, 1, z], [0, 0, 0, 1]], dtype=float)
