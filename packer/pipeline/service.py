"""The layout service of a job: flat plates and powder builds, routed per printer.

Made from plain data (the job, its loaded parts, the part kinds), so a planning
worker in another process can make its own (:mod:`packer.pipeline.components`).
"""

from __future__ import annotations

from typing import Sequence

from packer.intake.identity import PartKind
from packer.intake.job import Job
from packer.layouts import LayoutPart, Layouts
from packer.layouts.flat import FlatLayouts
from packer.layouts.powder import PowderLayouts

__all__ = ["layout_parts", "layout_service"]


def layout_parts(parts: dict, kinds: Sequence[PartKind]) -> list[LayoutPart]:
    """The layout engines' view of each :class:`~packer.intake.identity.PartKind` (``CopyRef.kind`` indexes it)."""
    return [LayoutPart(parts[k.part], tuple(k.rotations), bool(k.part.locked)) for k in kinds]


def layout_service(job: Job, parts: dict, kinds: Sequence[PartKind], *, seed: int) -> Layouts:
    """The layout service the fleet planner asks: flat plates and powder builds, routed per printer."""
    shapes = layout_parts(parts, kinds)
    return Layouts([FlatLayouts(shapes, job.rules, seed=seed), PowderLayouts(shapes, job.rules, seed=seed)])
