"""What the planner tells apart: parts, part kinds and copies, each named by one value.

- :class:`PartId`: one mesh file, loaded with or without its orientation lock;
  intake loads one :class:`~packer.intake.parts.Part` per ``PartId``.
- :class:`PartKind`: a part and the rotations its copies may take. The fleet
  planner numbers the kinds of a plan (``CopyRef.kind`` is the kind's place in
  that table, built by :func:`packer.pipeline.copies.catalog`).
- :class:`CopyKey`: one ordered copy, (order, part name, copy number from 1).

They are named tuples, so they compare, hash and sort as the plain tuples they
replace, and plan.json's ``order``/``part``/``copy`` fields read straight into
a ``CopyKey``.
"""

from __future__ import annotations

from pathlib import Path
from typing import NamedTuple

__all__ = ["PartId", "PartKind", "CopyKey", "copy_key", "kind_order"]


class PartId(NamedTuple):
    """One mesh file as intake loads it: its path and whether its orientation is locked."""

    mesh: Path
    locked: bool


class PartKind(NamedTuple):
    """What the fleet planner tells apart: a part and the rotations (degrees) its copies may take."""

    part: PartId
    rotations: tuple[float, ...]


class CopyKey(NamedTuple):
    """One ordered copy: order id, part name, copy number (from 1)."""

    order: str
    part: str
    copy: int

    @property
    def label(self) -> str:
        """``order/part/copy``, as messages and the command line write a copy."""
        return f"{self.order}/{self.part}/{self.copy}"


def copy_key(c) -> CopyKey:
    """The key of anything that names a copy by ``order``, ``part`` and ``copy`` attributes
    (a planner copy reference, a placed or unplaced copy)."""
    return CopyKey(c.order, c.part, c.copy)


def kind_order(kind: PartKind) -> str:
    """Sort key that numbers the kinds of a plan: the text of ((mesh, locked), rotations).

    Kinds have always been numbered in this order; the fleet planner breaks some ties
    by kind number, so keeping the order keeps the plans.
    """
    return str(((kind.part.mesh, kind.part.locked), kind.rotations))
