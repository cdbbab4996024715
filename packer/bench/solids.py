"""Solid builders for the procedural parts: outlines, extrusions, cylinders, boxes, booleans.

Small functions that :mod:`packer.bench.partgen` draws its parts with. Outlines
are shapely polygons in millimetres; solids are closed trimesh meshes; booleans
use the ``manifold3d`` engine through :mod:`trimesh.boolean`.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
import trimesh

__all__ = ["segments", "circle", "rounded_rect", "slot", "extrude", "cylinder", "box", "xz_profile",
           "union", "minus", "gear_outline"]


def segments(radius: float, size: float) -> int:
    """Segments for a circle of ``radius`` on a part of ``size``: 24 for small holes, up to 64."""
    return int(np.clip(24 + 80 * radius / max(size, 1e-9), 24, 64)) // 4 * 4


def circle(x: float, y: float, r: float, n: int) -> shapely.Polygon:
    """Regular n-gon inscribed in the circle of radius ``r`` centred at (x, y), CCW."""
    t = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
    return shapely.Polygon(np.column_stack([x + r * np.cos(t), y + r * np.sin(t)]))


def rounded_rect(w: float, h: float, r: float, n: int = 8) -> shapely.Polygon:
    """Rectangle [0, w] x [0, h] with corners rounded to radius ``r`` (n segments per quarter)."""
    r = min(r, 0.49 * min(w, h))
    if r <= 0:
        return shapely.box(0.0, 0.0, w, h)
    pts = []
    for cx, cy, a0 in ((w - r, r, -90), (w - r, h - r, 0), (r, h - r, 90), (r, r, 180)):
        for a in np.radians(np.linspace(a0, a0 + 90, n + 1)):
            pts.append((cx + r * math.cos(a), cy + r * math.sin(a)))
    return shapely.Polygon(pts)


def slot(x0: float, y0: float, x1: float, y1: float, r: float, n: int = 8) -> shapely.Polygon:
    """Stadium (slot) of half-width ``r`` between two centre points."""
    return shapely.LineString([(x0, y0), (x1, y1)]).buffer(r, quad_segs=n)


def extrude(poly: shapely.Polygon, height: float, z0: float = 0.0) -> trimesh.Trimesh:
    """Extrude an outline (holes allowed) along +z from ``z0``."""
    # snap to a 0.1 um grid: drops the near-duplicate vertices that set operations leave behind
    poly = shapely.set_precision(poly, 1e-4)
    if not isinstance(poly, shapely.Polygon) or poly.is_empty:
        raise RuntimeError(f"partgen bug: outline is a {poly.geom_type}, not one polygon")
    mesh = trimesh.creation.extrude_polygon(shapely.geometry.polygon.orient(poly), height)
    if z0:
        mesh.apply_translation([0.0, 0.0, z0])
    return mesh


def cylinder(r: float, h: float, n: int, *, at=(0.0, 0.0, 0.0), axis: str = "z") -> trimesh.Trimesh:
    """Cylinder of radius ``r``, length ``h`` starting at ``at`` along +``axis``."""
    m = trimesh.creation.cylinder(radius=r, height=h, sections=n)
    m.apply_translation([0.0, 0.0, h / 2.0])
    if axis == "x":
        m.apply_transform(trimesh.transformations.rotation_matrix(math.pi / 2, [0, 1, 0]))
    elif axis == "y":
        m.apply_transform(trimesh.transformations.rotation_matrix(-math.pi / 2, [1, 0, 0]))
    m.apply_translation(at)
    return m


def box(x0, y0, z0, x1, y1, z1) -> trimesh.Trimesh:
    """Axis-aligned box with corners (x0, y0, z0) and (x1, y1, z1)."""
    m = trimesh.creation.box(extents=[x1 - x0, y1 - y0, z1 - z0])
    m.apply_translation([(x0 + x1) / 2, (y0 + y1) / 2, (z0 + z1) / 2])
    return m


def xz_profile(poly: shapely.Polygon, depth: float) -> trimesh.Trimesh:
    """Extrude an outline drawn in the (x, z) plane along +y by ``depth``."""
    m = extrude(poly, depth)
    # a rotation about x by +90 deg takes the outline's y to z and the extrusion (z) to -y; then shift back
    m.apply_transform(trimesh.transformations.rotation_matrix(math.pi / 2, [1, 0, 0]))
    m.apply_translation([0.0, depth, 0.0])
    return m


def union(meshes) -> trimesh.Trimesh:
    """Boolean union of closed meshes (manifold engine)."""
    return trimesh.boolean.union(list(meshes), engine="manifold")


def minus(mesh: trimesh.Trimesh, cutters) -> trimesh.Trimesh:
    """``mesh`` with the closed ``cutters`` removed (manifold engine); unchanged without cutters."""
    cutters = list(cutters)
    if not cutters:
        return mesh
    return trimesh.boolean.difference([mesh, *cutters], engine="manifold")


def gear_outline(teeth: int, module: float, pressure_deg: float = 20.0) -> shapely.Polygon:
    """Spur gear outline with involute flanks (standard addendum m, dedendum 1.25 m)."""
    rp = module * teeth / 2
    rb = rp * math.cos(math.radians(pressure_deg))
    ra = rp + module
    rf = max(rp - 1.25 * module, 0.2 * rp)

    def inv(r):
        alpha = math.acos(min(1.0, rb / r))
        return math.tan(alpha) - alpha

    half = math.pi / (2 * teeth) + inv(rp)   # half-angle of the tooth at the base circle
    r0 = max(rb, rf)
    radii = np.linspace(r0, ra, 4)
    flank = [(rr, half - inv(rr)) for rr in radii]   # (radius, angle from tooth centre)
    pts = []
    pitch = 2 * math.pi / teeth
    for k in range(teeth):
        c = k * pitch
        tooth = []
        if rf < rb:
            tooth.append((rf, c - half))
        tooth += [(rr, c - a) for rr, a in flank]
        tooth += [(rr, c + a) for rr, a in reversed(flank)]
        if rf < rb:
            tooth.append((rf, c + half))
        # root: midway between this tooth and the next
        mid = c + pitch / 2
        root_half = min(pitch / 2 - half, pitch / 6) * 0.5
        tooth += [(rf, mid - root_half), (rf, mid + root_half)] if root_half > 0 else [(rf, mid)]
        pts += [(rr * math.cos(a), rr * math.sin(a)) for rr, a in tooth]
    return shapely.Polygon(pts).buffer(0)
