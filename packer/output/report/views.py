"""Pictures of each plate: the top view of a plate, three views of a powder build."""

from __future__ import annotations

from pathlib import Path
from typing import Callable, Sequence

import numpy as np
from shapely import affinity
from shapely.geometry import MultiPoint, Polygon, box

from packer.intake.footprint import keep_out_zones, plate_polygon
from packer.output.plan import PlatePlan
from packer.intake.profile import PlateProfile
from packer.output.report.svg import Drawn, colour_of, plate_svg
from packer.output.report.tags import tagged

__all__ = ["plate_views", "placed_shadow"]


def placed_shadow(footprint: Polygon, to_print: np.ndarray, transform: np.ndarray) -> Polygon:
    """A part's footprint (print frame) moved where the plan puts it (plate frame).

    ``transform = turn @ to_print``, so the plate-frame shadow is the footprint
    under ``turn = transform @ inv(to_print)``, a turn about z plus a shift.
    """
    turn = np.asarray(transform, dtype=float) @ np.linalg.inv(np.asarray(to_print, dtype=float))
    a, b, d, e = turn[0, 0], turn[0, 1], turn[1, 0], turn[1, 1]
    return affinity.affine_transform(footprint, [a, b, d, e, turn[0, 3], turn[1, 3]])


def _title(tag: str, c) -> str:
    return f"{tag}: {c.order} / {c.part} / copy {c.copy}"


def plate_views(plate: PlatePlan, profile: PlateProfile, orders: Sequence[str], *,
                footprint_of: Callable[[object], tuple[Polygon, np.ndarray]],
                mesh_of: Callable[[Path], object]) -> list[tuple[str, str]]:
    """(title, svg) drawings for one plate, copies coloured by order and tagged.

    Flat plates get one top view with the margin band and keep-out zones;
    powder builds get top, front and side views of the volume.
    """
    tags = tagged(plate)
    if plate.technology != "powder":
        drawn = []
        for tag, c in tags:
            fp, to_print = footprint_of(c)
            drawn.append(Drawn(placed_shadow(fp, to_print, c.transform), colour_of(c.order, orders), tag,
                               _title(tag, c)))
        outline = plate_polygon(profile)
        inner = outline.buffer(-plate.margin, join_style="mitre") if plate.margin > 0 else None
        svg = plate_svg(outline, inner, keep_out_zones(profile, grow=0.0), drawn, uid=f"{plate.id}-top",
                        margin_mm=plate.margin)
        return [("top view", svg)]
    x, y, z = plate.volume
    m = plate.margin
    # side views end a little above the build: a short build in a tall volume stays readable
    top = min(z, max(1.5 * plate.height_mm + m, 0.25 * max(x, y)))
    views = []
    for title, axes, dims in (("top view (x-y)", (0, 1), (x, y)), ("front view (x-z)", (0, 2), (x, top)),
                              ("side view (y-z)", (1, 2), (y, top))):
        drawn = []
        for tag, c in sorted(tags, key=lambda tc: -_depth(tc[1].transform, axes)):
            mesh = mesh_of(c.mesh)
            pts = np.asarray(mesh.convex_hull.vertices) @ np.asarray(c.transform)[:3, :3].T \
                + np.asarray(c.transform)[:3, 3]
            hull = MultiPoint(pts[:, list(axes)]).convex_hull
            if hull.geom_type == "Polygon":
                drawn.append(Drawn(hull, colour_of(c.order, orders), tag, _title(tag, c)))
        outline = box(0, 0, *dims)
        side = axes[1] == 2
        inner = box(m, m, dims[0] - m, min(dims[1], z - m)) if m > 0 else None
        if side and top < z:
            title += f", cut at z = {top:.0f} mm of {z:g} mm; tags where they fit"
        elif side:
            title += ", tags where they fit"
        views.append((title, plate_svg(outline, inner, (), drawn, width_px=300, margin_mm=m, crowded=side,
                                       uid=f"{plate.id}-{'xyz'[axes[0]]}{'xyz'[axes[1]]}",
                                       axes=("xyz"[axes[0]], "xyz"[axes[1]]))))
    return views


def _depth(transform, axes) -> float:
    third = ({0, 1, 2} - set(axes)).pop()
    sign = -1.0 if third == 1 else 1.0  # front view looks along +y: nearer parts drawn last
    return sign * float(np.asarray(transform)[third, 3])
