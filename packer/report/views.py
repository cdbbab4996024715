"""Pictures of each plate: the top view of a plate, three views of a powder build."""

from __future__ import annotations

from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import MultiPoint, Polygon, box

from packer.footprint import keep_out_zones, plate_polygon
from packer.plan import PlatePlan
from packer.profile import PlateProfile
from packer.report.svg import colour_of, plate_svg

__all__ = ["plate_views", "placed_shadow"]


def placed_shadow(footprint: Polygon, to_print: np.ndarray, transform: np.ndarray) -> Polygon:
    """A part's footprint (print frame) moved where the plan puts it (plate frame).

    ``transform = turn @ to_print``, so the plate-frame shadow is the footprint
    under ``turn = transform @ inv(to_print)``, a turn about z plus a shift.
    """
    turn = np.asarray(transform, dtype=float) @ np.linalg.inv(np.asarray(to_print, dtype=float))
    a, b, d, e = turn[0, 0], turn[0, 1], turn[1, 0], turn[1, 1]
    return affinity.affine_transform(footprint, [a, b, d, e, turn[0, 3], turn[1, 3]])


def plate_views(plate: PlatePlan, profile: PlateProfile, orders: Sequence[str], *,
                footprint_of: Callable[[object], tuple[Polygon, np.ndarray]],
                mesh_of: Callable[[Path], object]) -> list[tuple[str, str]]:
    """(title, svg) pictures for one plate, copies coloured by order."""
    label = lambda c: f"{c.order} / {c.part} / copy {c.copy}"  # noqa: E731
    if plate.technology != "powder":
        shapes = []
        for c in plate.items:
            fp, to_print = footprint_of(c)
            shapes.append((placed_shadow(fp, to_print, c.transform), colour_of(c.order, orders), label(c)))
        outline = plate_polygon(profile)
        inner = outline.buffer(-plate.margin, join_style="mitre") if plate.margin > 0 else None
        return [("top view", plate_svg(outline, inner, keep_out_zones(profile, grow=0.0), shapes))]
    x, y, z = plate.volume
    views = []
    for title, axes, dims in (("top view (x-y)", (0, 1), (x, y)), ("front view (x-z)", (0, 2), (x, z)),
                              ("side view (y-z)", (1, 2), (y, z))):
        shapes = []
        for c in sorted(plate.items, key=lambda c: -_depth(c.transform, axes)):
            mesh = mesh_of(c.mesh)
            pts = np.asarray(mesh.convex_hull.vertices) @ np.asarray(c.transform)[:3, :3].T \
                + np.asarray(c.transform)[:3, 3]
            hull = MultiPoint(pts[:, list(axes)]).convex_hull
            if hull.geom_type == "Polygon":
                shapes.append((hull, colour_of(c.order, orders), label(c)))
        outline = box(0, 0, *dims)
        inner = outline.buffer(-plate.margin, join_style="mitre") if plate.margin > 0 else None
        views.append((title, plate_svg(outline, inner, (), shapes, width_px=300,
                                       axes=("xyz"[axes[0]], "xyz"[axes[1]]))))
    return views


def _depth(transform, axes) -> float:
    third = ({0, 1, 2} - set(axes)).pop()
    sign = -1.0 if third == 1 else 1.0  # front view looks along +y: nearer parts drawn last
    return sign * float(np.asarray(transform)[third, 3])
