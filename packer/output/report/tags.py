"""Short tags of the copies on a plate, shared by the drawing, the copy table and the sheets."""

from __future__ import annotations

from packer.intake.identity import copy_key
from packer.output.plan import PlacedCopy, PlatePlan
from packer.output.report.fmt import copy_tag

__all__ = ["tagged"]


def tagged(plate: PlatePlan) -> list[tuple[str, PlacedCopy]]:
    """(tag, copy) for every copy of ``plate``, by order, part and copy number.

    The same plate always gets the same tags, so an operator's sheet, the
    report's drawing and its copy table agree.
    """
    ordered = sorted(plate.items, key=copy_key)
    return [(copy_tag(k), c) for k, c in enumerate(ordered)]
