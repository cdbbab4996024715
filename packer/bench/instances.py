"""Benchmark instances (strip or bins) in the shared JSON format, and result files.

Instance: ``{"name", "source", "strip_width" | "bin": {"width", "height"},
"allowed_rotations_deg": [...], "items": [{"id", "quantity", "polygon", "holes"?}]}``.
Result: strip ``{"length", "placements": [P]}``, bins ``{"bins": [{"placements": [P]}]}``
with ``P = {"item", "rotation", "mirror", "x", "y"}``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import shapely

from packer.errors import InputError

from packer.nest.shapes import Placement, Shape

__all__ = ["Instance", "read_instance", "placement_records"]


@dataclass(frozen=True)
class Instance:
    """One benchmark instance, expanded to one shape per copy.

    Attributes
    ----------
    name : str
    shapes : tuple of Shape      one per copy, in item order
    item_ids : tuple of str      item id of each shape
    strip_width : float or None  strip instances
    bin_size : (float, float) or None  bin instances (width, height)
    """

    name: str
    shapes: tuple[Shape, ...]
    item_ids: tuple[str, ...]
    strip_width: float | None
    bin_size: tuple[float, float] | None

    @property
    def total_area(self) -> float:
        return float(sum(s.polygon.area for s in self.shapes))


def read_instance(path: str | Path) -> Instance:
    """Read a strip or bin instance; raises InputError naming the problem."""
    path = Path(path)
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError) as exc:
        raise InputError(f"{path}: cannot read instance: {exc}") from exc
    if not isinstance(data, dict) or "items" not in data:
        raise InputError(f"{path}: an instance needs an 'items' list")
    rotations = tuple(float(r) for r in data.get("allowed_rotations_deg") or [0.0])
    shapes, ids = [], []
    for k, item in enumerate(data["items"]):
        try:
            poly = shapely.Polygon(item["polygon"], item.get("holes") or [])
            count = int(item.get("quantity", 1))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{path}: items[{k}] is not a polygon item: {exc}") from exc
        if count < 1:
            raise InputError(f"{path}: items[{k}].quantity must be at least 1")
        shape = Shape(poly, rotations)
        for _ in range(count):
            shapes.append(shape)
            ids.append(str(item.get("id", k)))
    strip = data.get("strip_width")
    binsz = data.get("bin")
    if strip is None and binsz is None:
        raise InputError(f"{path}: an instance needs 'strip_width' or 'bin'")
    return Instance(str(data.get("name", path.stem)), tuple(shapes), tuple(ids),
                    float(strip) if strip is not None else None,
                    (float(binsz["width"]), float(binsz["height"])) if binsz is not None else None)


def placement_records(instance: Instance, placements: tuple[Placement, ...]) -> list[dict]:
    """Result-file records of placements (item ids instead of shape indices)."""
    return [{"item": instance.item_ids[p.index], "rotation": p.rotation, "mirror": bool(p.mirror),
             "x": p.x, "y": p.y} for p in placements]
