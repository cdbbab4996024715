"""The XY shadow of a mesh's triangles, whatever their topology (the footprint).

A single connected body always casts a connected shadow. A file holding several
bodies can cast separate islands. Nesting wants one polygon per part, so
:func:`footprint_of` joins islands with thin bridges (0.05 mm wide) along the
shortest links between them: the polygon is then a superset of the shadow
(safe for spacing checks, wasting no more than the bridges' area). With a
single island the footprint is the exact shadow.
"""

from __future__ import annotations

import numpy as np
import shapely
import shapely.ops
import trimesh

from packer.errors import GeometryError

__all__ = ["footprint_of"]

_BRIDGE_MM = 0.05          # width of the bridges that join footprint islands
_HOLE_ARTEFACT_MM2 = 1e-6  # holes smaller than this in a footprint are floating-point cracks
_CRACK_SHARE = 1e-9        # gaps narrower than this share of the part's size are floating-point cracks


def _close_cracks(shadow, size: float):
    """The shadow with its floating-point cracks closed (a morphological closing by a
    distance of ``_CRACK_SHARE * size``, mitred, so the outline moves by no more than that).

    Some GEOS versions (3.14 seen) leave the union of a fan of triangles as pieces that touch
    at points, with cracks of about 1e-13 mm between them; treated as islands they would get
    bridges the part does not have (a cone's footprint grew by 0.0026 mm^2)."""
    eps = _CRACK_SHARE * max(size, 1.0)
    return shadow.buffer(eps, join_style="mitre").buffer(-eps, join_style="mitre")


def _join_islands(pieces: list[shapely.Polygon]) -> shapely.Polygon:
    """Join polygons into one with thin bridges along a minimum spanning tree of shortest links."""
    k = len(pieces)
    dist = np.array([[pieces[i].distance(pieces[j]) for j in range(k)] for i in range(k)])
    linked, bridges = {0}, []
    while len(linked) < k:           # Prim's algorithm over the island distances
        i, j = min(((i, j) for i in linked for j in range(k) if j not in linked),
                   key=lambda ij: (dist[ij], ij))
        a, b = shapely.ops.nearest_points(pieces[i], pieces[j])
        line = shapely.LineString([a, b]) if a.distance(b) > 0 else a
        bridges.append(line.buffer(_BRIDGE_MM / 2, cap_style="square"))
        linked.add(j)
    joined = shapely.union_all([*pieces, *bridges])
    if joined.geom_type != "Polygon":   # numerical slivers: fall back to the convex hull (a superset)
        joined = joined.convex_hull
    return joined


def _drop_artefact_holes(poly: shapely.Polygon) -> shapely.Polygon:
    keep = [r for r in poly.interiors if shapely.Polygon(r).area >= _HOLE_ARTEFACT_MM2]
    return poly if len(keep) == len(poly.interiors) else shapely.Polygon(poly.exterior, keep)


def footprint_of(mesh: trimesh.Trimesh, *, with_islands: bool = False):
    """Exact XY shadow of the triangles, holes included, whatever their topology.

    The shadow is the union of every triangle projected on z = 0, facing up or
    down (so open or badly wound meshes cast their true shadow); triangles seen
    edge-on (projected area under 1e-10 mm^2) are dropped. Holes under 1e-6 mm^2 (floating-point cracks) are removed.
    Separate islands are joined by thin bridges (see the module notes).

    Parameters
    ----------
    mesh
        Vertices (n, 3) float, mm; faces (m, 3) int.
    with_islands
        Also return the number of islands that were joined.

    Returns
    -------
    shapely.Polygon
        The shadow, in the mesh's XY frame; with ``with_islands``, a tuple
        ``(polygon, islands)``.
    """
    tri = np.asarray(mesh.triangles, dtype=float)[:, :, :2]
    e1 = tri[:, 1] - tri[:, 0]
    e2 = tri[:, 2] - tri[:, 0]
    signed = 0.5 * (e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])
    seen = tri[np.abs(signed) > 1e-10]
    if len(seen) == 0:
        raise GeometryError("mesh casts no shadow: every triangle is seen edge-on from above")
    shadow = shapely.union_all(shapely.polygons(seen))
    if shadow.geom_type != "Polygon":
        shadow = _close_cracks(shadow, float(np.ptp(seen.reshape(-1, 2), axis=0).max()))
    pieces = [g for g in getattr(shadow, "geoms", [shadow]) if g.geom_type == "Polygon" and g.area > 0]
    pieces = sorted((_drop_artefact_holes(p) for p in pieces), key=lambda p: (-p.area, p.bounds))
    poly = pieces[0] if len(pieces) == 1 else _join_islands(pieces)
    if not poly.is_valid:
        poly = shapely.make_valid(poly)
        if poly.geom_type != "Polygon":
            poly = _join_islands([g for g in poly.geoms if g.geom_type == "Polygon"])
    poly = shapely.geometry.polygon.orient(poly)
    return (poly, len(pieces)) if with_islands else poly
