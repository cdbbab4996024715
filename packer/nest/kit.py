"""Precomputed collision data: oriented shapes, no-fit polygons, container halfplanes.

A *kit* holds what the search needs about the shapes: for each distinct
(outline, rotation, mirror) an *orientation* with its convex parts, hull and
bounding box; and, built on first use and cached, the no-fit polygon of every
pair of orientations as stacked halfplanes (one group per pair of convex parts).

A *room* holds what it needs about one container: the halfplanes of the
region's convex hull, and the part of that hull that is not usable (outside a
non-convex region, or a keep-out zone) as fixed convex obstacles.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely

from packer.nest.budget import Meter
from packer.nest.geometry import collision_polygon, convex_parts, halfplanes, orient_polygon, ring_ccw
from packer.nest.kernels import minkowski_halfplanes, outside_groups
from packer.nest.outline import covering_outline, grown_outline
from packer.nest.shapes import Container, Shape

__all__ = ["Orientation", "Kit", "Room", "NfpGroups"]


@dataclass(frozen=True)
class Orientation:
    """One shape outline in one rotation (and mirror state)."""

    polygon: shapely.Polygon      # collision outline (covers the true shape)
    parts: tuple                  # convex CCW rings, each (k, 2) float
    hull: np.ndarray              # (h, 2) float, vertices of the true shape's convex hull
    bbox: np.ndarray              # (4,) float: minx, miny, maxx, maxy
    rotation: float
    mirror: bool
    area: float                   # area of the true shape
    hole_vertices: np.ndarray     # (h, 2) float, vertices of the outline's holes (may be empty)
    vertices: np.ndarray          # (v, 2) float, vertices of the outline's exterior


@dataclass(frozen=True)
class NfpGroups:
    """Stacked halfplanes of a no-fit polygon made of convex groups.

    normals (t, 2), offsets (t,), vertices (t, 2) with ``normals[k] . vertices[k] == offsets[k]``,
    starts (g,) index of each group's first halfplane.
    """

    normals: np.ndarray
    offsets: np.ndarray
    vertices: np.ndarray
    starts: np.ndarray
    sizes: np.ndarray


def _stack_pairs(fixed_parts, moving_parts, meter: Meter) -> NfpGroups:
    """No-fit groups of every pair (fixed part, moving part): ``A + (-B)`` in halfplane form."""
    ns, cs, vs, sizes = [], [], [], []
    meter.charge("nfp_pair", len(fixed_parts) * len(moving_parts))
    meter.charge("nfp_edge", len(moving_parts) * sum(len(p) for p in fixed_parts)
           + len(fixed_parts) * sum(len(p) for p in moving_parts))
    for pa in fixed_parts:
        for pb in moving_parts:
            n, c, v = minkowski_halfplanes(pa, pb)
            if len(c) < 3:
                continue
            ns.append(n)
            cs.append(c)
            vs.append(v)
            sizes.append(len(c))
    if not ns:
        z = np.zeros((0, 2))
        return NfpGroups(z, np.zeros(0), z, np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64))
    sizes = np.array(sizes, dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)
    return NfpGroups(np.concatenate(ns), np.concatenate(cs), np.concatenate(vs), starts, sizes)


class Kit:
    """Orientations of the input shapes and a cache of their no-fit polygons.

    Parameters
    ----------
    shapes : sequence of Shape
    max_vertices : int
        Outlines with more vertices are replaced by a covering simplification.
    """

    def __init__(self, shapes: Sequence[Shape], *, clearance: float = 0.0, max_vertices: int = 24,
                 meter: Meter | None = None):
        self.meter = Meter() if meter is None else meter   # the work of the call this kit serves
        self.shapes = tuple(shapes)
        self.clearance = float(clearance)
        self.orientations: list[Orientation] = []
        self.options: list[tuple[int, ...]] = []   # per shape: orientation ids
        self.kind: list[int] = []                   # per shape: id of its distinct outline
        by_key: dict = {}
        kinds: dict = {}
        for s in self.shapes:
            wkb = shapely.to_wkb(s.polygon)
            outline = kinds.setdefault(wkb, len(kinds))
            self.kind.append(outline)
            opts = []
            mirrors = (False, True) if s.mirror else (False,)
            for m in mirrors:
                for r in s.rotations:
                    key = (wkb, float(r), m)
                    if key not in by_key:
                        self.meter.charge("orient")
                        self.meter.charge("orient_vert", len(s.polygon.exterior.coords)
                               + sum(len(r.coords) for r in s.polygon.interiors))
                        by_key[key] = len(self.orientations)
                        self.orientations.append(self._orient(s.polygon, r, m, max_vertices, self.clearance))
                    opts.append(by_key[key])
            self.options.append(tuple(dict.fromkeys(opts)))
        self._nfp: dict[tuple[int, int], NfpGroups] = {}
        self.tol = 0.0
        bb = np.array([o.bbox for o in self.orientations])
        self.scale = float(max(np.max(bb[:, 2] - bb[:, 0]), np.max(bb[:, 3] - bb[:, 1]), 1e-12))
        # numerical slack of the collision tests: a point this deep inside a no-fit
        # polygon still counts as touching (the exact check has the final word)
        self.tol = 1e-9 * self.scale

    @staticmethod
    def _orient(polygon, rotation, mirror, max_vertices, clearance) -> Orientation:
        true = orient_polygon(polygon, rotation, mirror)
        # detailed outlines: the least-area covering outline, built once per outline (unturned)
        outline = covering_outline(orient_polygon(polygon, 0.0, mirror), clearance, max_vertices)
        if outline is not None:
            outline = orient_polygon(outline, rotation, False)
            if not outline.covers(true):
                outline = None
        if outline is None:
            outline = collision_polygon(grown_outline(true, clearance), max_vertices=max_vertices)
        parts = tuple(convex_parts(outline))
        # the container only needs the true shape inside it (clearance is between shapes)
        hull = np.asarray(true.convex_hull.exterior.coords)[:-1]
        holes = [np.asarray(r.coords)[:-1] for r in outline.interiors]
        hv = np.concatenate(holes) if holes else np.zeros((0, 2))
        return Orientation(outline, parts, hull, np.array(outline.bounds),
                           float(rotation), bool(mirror), float(true.area), hv,
                           np.asarray(outline.exterior.coords)[:-1])

    # -- flat store for the compiled search loops ----------------------------------------------
    def _init_flat(self):
        k = len(self.orientations)
        self.pair_first = np.full((k + 1, k), -1, dtype=np.int64)   # row k: container obstacles
        self.pair_count = np.zeros((k + 1, k), dtype=np.int64)
        # growable stores (capacity doubles), so adding pairs never copies everything each time
        self._hn = np.zeros((1024, 2))
        self._hc = np.zeros(1024)
        self._hv = np.zeros((1024, 2))
        self._gs = np.zeros(256, dtype=np.int64)
        self._gb = np.zeros((256, 4))
        self._t = 0
        self._g = 0
        self._obstacle_room = None

    def _append(self, row: int, o: int, g: NfpGroups) -> None:
        self.pair_first[row, o] = self._g
        self.pair_count[row, o] = len(g.starts)
        t, ng = len(g.offsets), len(g.starts)
        if not ng:
            return
        while self._t + t > len(self._hc):
            cap = 2 * len(self._hc)
            self._hn = np.concatenate([self._hn, np.zeros((cap - len(self._hc), 2))])
            self._hv = np.concatenate([self._hv, np.zeros((cap - len(self._hc), 2))])
            self._hc = np.concatenate([self._hc, np.zeros(cap - len(self._hc))])
        while self._g + ng + 1 > len(self._gs):
            self._gb = np.concatenate([self._gb, np.zeros((len(self._gs), 4))])
            self._gs = np.concatenate([self._gs, np.zeros(len(self._gs), dtype=np.int64)])
        self._gb[self._g:self._g + ng, :2] = np.minimum.reduceat(g.vertices, g.starts, axis=0)
        self._gb[self._g:self._g + ng, 2:] = np.maximum.reduceat(g.vertices, g.starts, axis=0)
        self._hn[self._t:self._t + t] = g.normals
        self._hc[self._t:self._t + t] = g.offsets
        self._hv[self._t:self._t + t] = g.vertices
        self._gs[self._g:self._g + ng] = g.starts + self._t
        self._t += t
        self._g += ng
        self._gs[self._g] = self._t   # sentinel: end of the last group

    def ensure(self, fixed, moving: int, room: "Room | None" = None) -> None:
        """Make sure the no-fit polygons of ``moving`` around each orientation in ``fixed`` are stored."""
        if not hasattr(self, "pair_first"):
            self._init_flat()
        col = self.pair_first[:, moving]
        self.meter.charge("lookup", len(fixed))
        for f in fixed:
            if col[f] < 0:
                self._append(int(f), moving, self.nfp(int(f), moving))
        if room is not None and room.obstacle_parts:
            if self._obstacle_room is None:
                self._obstacle_room = room
            if self._obstacle_room is not room:
                raise ValueError("a kit serves the obstacles of one room only")
            k = len(self.orientations)
            if col[k] < 0:
                self._append(k, moving, room.obstacles(moving))

    def ensure_all(self, room: "Room | None" = None) -> None:
        """Store the no-fit polygons of every pair of orientations (and the room's obstacles)."""
        every = np.arange(len(self.orientations))
        for o in range(len(self.orientations)):
            self.ensure(every, o, room)

    def flat(self):
        """(normals (t, 2), offsets (t,), vertices (t, 2), group starts (g,), group ends (g,),
        group bounding boxes (g, 4): minx, miny, maxx, maxy).

        Views of the growable stores; valid until the next :meth:`ensure` adds pairs.
        """
        if not hasattr(self, "pair_first"):
            self._init_flat()
        t, g = self._t, self._g
        return (self._hn[:t], self._hc[:t], self._hv[:t], self._gs[:g], self._gs[1:g + 1], self._gb[:g])

    def outer_vertices(self, row: int, moving: int) -> np.ndarray:
        """Vertices (v, 2) of the stored no-fit groups of ``moving`` around ``row`` (an
        orientation, or the obstacle row) that lie inside none of those groups.

        A vertex strictly inside another group is an overlapping position, so the
        touching positions of the whole (non-convex) no-fit polygon are these; for
        shapes with many convex parts they are a small share of all group vertices.
        Cached; the pair must be stored (:meth:`ensure`).
        """
        if not hasattr(self, "_outer"):
            self._outer = {}
        key = (int(row), int(moving))
        got = self._outer.get(key)
        if got is None:
            g0, c = int(self.pair_first[row, moving]), int(self.pair_count[row, moving])
            if g0 < 0 or c == 0:
                got = np.zeros((0, 2))
            else:
                a, b = self._gs[g0], self._gs[g0 + c]
                v = self._hv[a:b]
                keep = outside_groups(v, self._hn, self._hc, self._gs[g0:g0 + c], self._gs[g0 + 1:g0 + c + 1],
                                      self._gb[g0:g0 + c], self.tol, self.meter.ops)
                self.meter.charge_ops()
                got = v[keep].copy()
            self._outer[key] = got
        return got

    def nfp(self, fixed: int, moving: int) -> NfpGroups:
        """No-fit polygon of orientation ``moving`` around ``fixed`` placed at (0, 0)."""
        key = (fixed, moving)
        got = self._nfp.get(key)
        if got is None:
            a = self.orientations[fixed].parts
            b = [np.ascontiguousarray(-p) for p in self.orientations[moving].parts]
            got = _stack_pairs(a, b, self.meter)
            self._nfp[key] = got
        return got


class Room:
    """Collision data of one container for the orientations of a kit.

    Parameters
    ----------
    kit : Kit
    region : shapely.Polygon
        Outer boundary; its holes are keep-out zones.
    keep_out : sequence of shapely.Polygon
    """

    def __init__(self, kit: Kit, region: shapely.Polygon, keep_out: Sequence[shapely.Polygon] = ()):
        self.kit = kit
        self.region = region
        hull = region.convex_hull
        ring = np.asarray(shapely.orient_polygons(hull).exterior.coords)[:-1] \
            if hasattr(shapely, "orient_polygons") else np.asarray(hull.exterior.coords)[:-1]
        ring = ring_ccw(np.vstack([ring, ring[:1]]))
        self.normals, self.offsets = halfplanes(ring)
        blocked = hull.difference(region)
        for k in keep_out:
            blocked = blocked.union(k.intersection(hull))
        polys = [g for g in getattr(blocked, "geoms", [blocked]) if g.geom_type == "Polygon" and g.area > 0]
        self.obstacle_parts = [p for g in polys for p in convex_parts(g)]
        self._ifp: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._obst: dict[int, NfpGroups] = {}
        minx, miny, maxx, maxy = hull.bounds
        self.bounds = np.array([minx, miny, maxx, maxy])

    @classmethod
    def of(cls, kit: Kit, container: Container) -> "Room":
        region = shapely.Polygon(container.region.exterior)
        holes = [shapely.Polygon(h) for h in container.region.interiors]
        return cls(kit, region, tuple(holes) + tuple(container.keep_out))

    def ifp(self, o: int) -> tuple[np.ndarray, np.ndarray]:
        """Halfplanes (k, 2), (k,) the reference point of orientation ``o`` must satisfy."""
        got = self._ifp.get(o)
        if got is None:
            hull = self.kit.orientations[o].hull
            reach = np.max(hull @ self.normals.T, axis=0)
            got = (self.normals, self.offsets - reach)
            self._ifp[o] = got
        return got

    def ifp_vertices(self, o: int) -> np.ndarray:
        """Candidate corner points of the inner-fit region of orientation ``o`` (may be empty)."""
        if not hasattr(self, "_ifp_v"):
            self._ifp_v = {}
        got = self._ifp_v.get(o)
        if got is None:
            got = self._ifp_vertices(o)
            self._ifp_v[o] = got
        return got

    def _ifp_vertices(self, o: int) -> np.ndarray:
        m, e = self.ifp(o)
        a, b = m, np.roll(m, -1, axis=0)
        ea, eb = e, np.roll(e, -1)
        det = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
        ok = np.abs(det) > 1e-12
        x = (ea * b[:, 1] - eb * a[:, 1])[ok] / det[ok]
        y = (a[:, 0] * eb - b[:, 0] * ea)[ok] / det[ok]
        pts = np.stack([x, y], axis=1)
        viol = pts @ m.T - e[None, :]
        tol = 1e-9 * self.kit.scale
        pts = pts[np.all(viol <= tol, axis=1)]
        if len(pts) == 0:
            # redundant halfplanes: try every pair
            i, j = np.triu_indices(len(m), 1)
            a, b, ea, eb = m[i], m[j], e[i], e[j]
            det = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
            ok = np.abs(det) > 1e-12
            x = (ea * b[:, 1] - eb * a[:, 1])[ok] / det[ok]
            y = (a[:, 0] * eb - b[:, 0] * ea)[ok] / det[ok]
            pts = np.stack([x, y], axis=1)
            pts = pts[np.all(pts @ m.T - e[None, :] <= tol, axis=1)]
        return pts

    def obstacles(self, o: int) -> NfpGroups:
        """No-fit polygon of orientation ``o`` around the fixed obstacles."""
        got = self._obst.get(o)
        if got is None:
            b = [np.ascontiguousarray(-p) for p in self.kit.orientations[o].parts]
            got = _stack_pairs(self.obstacle_parts, b, self.kit.meter)
            self._obst[o] = got
        return got
