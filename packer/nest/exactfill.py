"""Exact-fill search: plates that the shapes can fill completely (jigsaw sets).

The empty region ``E`` of the current plate (plate minus placed shapes) is
kept as a shapely geometry.  Its *anchor* is the leftmost-then-lowest vertex
``p``: every point of ``E`` has ``x > p.x``, or ``x == p.x`` and
``y >= p.y``.  A shape placed inside ``E`` that contains ``p`` has the same
property, so ``p`` is the shape's own leftmost-then-lowest vertex: each
(shape, orientation) has exactly one placement at ``p``.  The search
branches over the remaining shapes (one per distinct outline) and their
allowed orientations, tests that the shape's corner fits ``E``'s corner at
``p`` (edge directions compared by cross products) and that ``E`` covers the
placed shape, subtracts it and goes on depth first; a plate whose ``E`` is
empty is closed and the next one opened.

When no empty space may remain, the shape covering ``E`` next to its first
edge at ``p`` (counter-clockwise) has ``p`` as a vertex and an edge along that
first edge; it can be placed first, so only shapes continuing the first edge
are tried (complete, and few candidates per node).

Waste: the plates may hold ``bins * area - total area`` of empty space (the
*allowance*; zero for a jigsaw set at its area bound).  A component of ``E``
smaller than every remaining shape is written off at once.  With a positive
allowance, a shape whose corner does not fit at ``p`` may also be wedged into
``E``'s corner (touching both edges at ``p``, off the anchor), and the corner
at ``p`` (the triangle of ``p`` and its two neighbours on the boundary of
``E``, cut to ``E``; or the whole component) may be written off: before the
wedged shapes if it is smaller than every remaining shape, else last.

Exactness: with integer coordinates and quarter turns every vertex stays an
integer, so shapely's predicates and overlays are exact.  With float
coordinates, ``E`` is snapped to a grid of 1e-12 of the plate size after each
placement (rounding noise at T-junctions otherwise leaves needles that no
shape can fill), and a shape counts as covered if the part outside ``E`` fits
a band of that width along its outline.

Nodes are counted and charged to the deterministic work budget
(:mod:`packer.nest.budget`); the search restarts with growing node limits,
alternating candidate rankings and seeded tie-breaks.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import shapely

from packer.nest.budget import Budget
from packer.nest.corners import Orient, anchor, corner, fits_corner, orientations, polygon_parts, same_dir, wedged
from packer.nest.shapes import Container, Placement, Shape

__all__ = ["exact_fill"]

#: node limit of the first restart; later restarts grow it by GROWTH
FIRST_LIMIT = 400
GROWTH = 1.6

#: deepest search path (placements, plate changes and write-offs; at most two stack frames
#: each), clear of Python's default recursion limit of 1000; more shapes than this are not tried
MAX_DEPTH = 450


class _Search:
    """Depth-first exact fill over plates; one instance per run."""

    def __init__(self, shapes: Sequence[Shape], container: Container, bins: int, budget: Budget,
                 rng: np.random.Generator):
        self.shapes = shapes
        self.region = shapely.orient_polygons(container.usable)
        self.plate_area = float(self.region.area)
        self.bins = bins
        self.budget = budget
        self.rng = rng
        minx, miny, maxx, maxy = self.region.bounds
        self.scale = max(maxx - minx, maxy - miny)
        self.eps = 1e-9       # relative tolerance of direction tests (sine of the angle)
        self.area_tol = 1e-9 * self.plate_area
        self.snap = 1e-9 * self.scale     # vertices closer than this are one point
        self.grid = 1e-12 * self.scale    # snapping grid of E with float coordinates
        # group identical shapes: one branch per distinct outline
        kinds: dict = {}
        self.kind_of = []
        for i, s in enumerate(shapes):
            key = (shapely.normalize(s.polygon).wkb, s.rotations, s.mirror)
            self.kind_of.append(kinds.setdefault(key, len(kinds)))
        self.members: list[list[int]] = [[] for _ in kinds]
        for i in range(len(shapes) - 1, -1, -1):
            self.members[self.kind_of[i]].append(i)      # pop() gives the lowest index first
        self.orients = [None] * len(kinds)
        for i, s in enumerate(shapes):
            k = self.kind_of[i]
            if self.orients[k] is None:
                self.orients[k] = orientations(s)
        self.kind_area = [float(shapes[m[-1]].polygon.area) for m in self.members]
        total = float(sum(s.polygon.area for s in shapes))
        self.allowance = bins * self.plate_area - total
        self.left_area = total
        self.noise = np.zeros(len(kinds))
        self.by_match = True       # rank candidates by matched edges first (else by area)
        self.plates: list[list[tuple]] = []
        self.nodes = 0
        self.limit = 0

    # -- helpers -------------------------------------------------------------------------

    def _in_box(self, o: Orient, at, cb) -> bool:
        """The shape's bounding box with its anchor at ``at`` lies in the box ``cb``."""
        b, tol = o.bounds, 1e-9 * self.scale
        return bool(at[0] + b[0] >= cb[0] - tol and at[0] + b[2] <= cb[2] + tol
                    and at[1] + b[1] >= cb[1] - tol and at[1] + b[3] <= cb[3] + tol)

    def _min_left_area(self) -> float:
        areas = [a for a, m in zip(self.kind_area, self.members) if m]
        return min(areas) if areas else 0.0

    def _anchor_of(self, free):
        """Anchor point, its component, E's corners there [(first, last), ...], and E.

        A corner of zero angle at the anchor (a needle of float noise left by an overlay)
        is trimmed off E first, so E is returned too.
        """
        for _ in range(100):
            parts = polygon_parts(free)
            best = None
            for n, comp in enumerate(parts):
                for ring in [comp.exterior, *comp.interiors]:
                    c = np.asarray(ring.coords)[:-1]
                    j = anchor(c)
                    key = (c[j, 0], c[j, 1])
                    if best is None or key < best[0]:
                        best = (key, n)
            (px, py), n = best
            oriented = shapely.orient_polygons(parts[n])   # overlays may return clockwise shells
            p = np.array([px, py])
            corners, needle = [], None
            rings = [np.asarray(r.coords)[:-1] for r in [oriented.exterior, *oriented.interiors]]
            for r, c in enumerate(rings):
                for j in np.flatnonzero((c[:, 0] == px) & (c[:, 1] == py)):
                    first, last = corner(c, int(j), self.snap)
                    if same_dir(first, last, self.eps):
                        needle = (r, int(j))
                    corners.append((first, last))
            if needle is None:
                break
            r, j = needle
            rings[r] = np.delete(rings[r], j, axis=0)
            trimmed = shapely.make_valid(shapely.Polygon(rings[0], rings[1:]))
            free = shapely.union_all([*parts[:n], trimmed, *parts[n + 1:]])
            self.budget.meter.charge("exact_overlay")
        return p, oriented, corners, free

    def _drop_small(self, free):
        """Write off components smaller than every remaining shape; returns (free, wasted area)."""
        small = self._min_left_area()
        keep, waste = [], 0.0
        for comp in polygon_parts(free):
            a = comp.area
            if a <= self.area_tol:
                waste += max(a, 0.0)
            elif a < small - self.area_tol:
                waste += a
            else:
                keep.append(comp)
        if len(keep) == len(polygon_parts(free)) and waste == 0.0:
            return free, 0.0
        return (shapely.MultiPolygon(keep) if len(keep) > 1 else (keep[0] if keep else shapely.Polygon())), waste

    # -- search --------------------------------------------------------------------------

    def _out_of_work(self) -> bool:
        return self.nodes >= self.limit or self.budget.done()

    def run(self) -> bool:
        self.plates = [[]]
        return self._node(self.region, self.allowance)

    def _node(self, free, allowance: float, depth: int = 0) -> bool:
        if self.left_area <= 0 or not any(self.members):
            return True
        self.nodes += 1
        if self._out_of_work() or depth >= MAX_DEPTH:
            return False
        if free.is_empty or free.area <= self.area_tol:
            return self._next_plate(free, allowance, depth)
        p, comp, corners, free = self._anchor_of(free)
        # no empty space may remain: the shape covering E next to its first edge at p has p
        # as a vertex and an edge along that first edge; one such shape must come first
        tight = allowance <= self.area_tol
        cand = self._candidates(p, comp, corners, tight)
        if cand:
            shapely.prepare(comp)
        exact = bool(np.all(np.mod(shapely.get_coordinates(comp), 1.0) == 0.0))
        ear, ear_tried = None, tight
        for rank, _, k, o, at in cand:
            if rank == 1 and not ear_tried:
                # before shapes wedged off the anchor: write off a corner too small for any shape
                ear = self._ear(comp, corners, p)
                if ear.area < self._min_left_area():
                    ear_tried = True
                    if self._write_off(free, comp, ear, allowance, depth):
                        return True
                    if self._out_of_work():
                        return False
            tried = self._place(free, comp, k, o, at, exact, allowance, depth)
            if tried:
                return True
            if tried is not None and self._out_of_work():
                return False
        if ear_tried:
            return False
        return self._write_off(free, comp, ear if ear is not None else self._ear(comp, corners, p),
                               allowance, depth)

    def _next_plate(self, free, allowance: float, depth: int) -> bool:
        """E is used up: go on with an empty plate (writing off what is left), if one is allowed."""
        if len(self.plates) >= self.bins:
            return False
        self.plates.append([])
        if self._node(self.region, allowance - max(free.area, 0.0), depth + 1):
            return True
        self.plates.pop()
        return False

    def _candidates(self, p, comp, corners, tight: bool) -> list[tuple]:
        """(rank, -area, kind, orientation, anchor position) of every shape that may go at p.

        Rank: more edges matched along E's corner first (when ``by_match``); rank 1 is a
        shape wedged into the corner off the anchor (only where waste is allowed).
        """
        comp_area, cb = comp.area, comp.bounds
        cand = []
        for k, members in enumerate(self.members):
            if not members or self.kind_area[k] > comp_area + self.area_tol:
                continue
            for o in self.orients[k]:
                self.budget.meter.charge("exact_cand")
                here = False
                if self._in_box(o, p, cb):
                    for first, last in corners:
                        if fits_corner(o, first, last, self.eps):
                            head = same_dir(first, o.first, self.eps)
                            if tight and not head:
                                continue
                            match = int(head) + int(same_dir(last, o.last, self.eps))
                            cand.append((-match if self.by_match else 0, -o.area * (1.0 + self.noise[k]), k, o, p))
                            here = True
                            break
                if here or tight:
                    continue
                # waste allowed: the shape wedged into the corner, off the anchor
                at = p + wedged(o, *corners[0])
                if self._in_box(o, at, cb):
                    cand.append((1, -o.area * (1.0 + self.noise[k]), k, o, at))
        cand.sort(key=lambda t: (t[0], t[1], t[2]))
        return cand

    def _place(self, free, comp, k: int, o: Orient, at, exact: bool, allowance: float, depth: int) -> bool | None:
        """Put a shape of kind ``k`` in orientation ``o`` at ``at`` and search on.

        True: solved; False: tried without success; None: the shape does not lie in E here.
        """
        placed = shapely.transform(o.polygon, lambda c: c + at)
        self.budget.meter.charge("exact_covers")
        if not comp.covers(placed):
            if exact:
                return None
            self.budget.meter.charge("exact_overlay")
            if placed.difference(comp).area > self.grid * placed.length:
                return None
        self.budget.meter.charge("exact_overlay")
        rest = free.difference(placed)
        if not exact or not float(at[0]).is_integer() or not float(at[1]).is_integer():
            # float coordinates: snap E to a fine grid so needles of rounding noise vanish
            self.budget.meter.charge("exact_overlay")
            rest = shapely.set_precision(rest, self.grid)
        i = self.members[k].pop()
        self.left_area -= self.kind_area[k]
        rest, waste = self._drop_small(rest)
        if waste <= allowance + self.area_tol:
            self.plates[-1].append((i, o, at))
            if self._node(rest, allowance - waste, depth + 1):
                return True
            self.plates[-1].pop()
        self.members[k].append(i)
        self.left_area += self.kind_area[k]
        return False

    def _ear(self, comp, corners, p):
        """The corner at p: the triangle of p and its two neighbours on E's boundary, cut to E."""
        self.budget.meter.charge("exact_overlay")
        first, last = corners[0]
        return shapely.Polygon([tuple(p), tuple(p + first), tuple(p + last)]).intersection(comp)

    def _write_off(self, free, comp, cut, allowance: float, depth: int) -> bool:
        """Give up ``cut`` (the corner at the anchor; its whole component if the corner is
        empty) within the allowance, and go on."""
        if allowance <= self.area_tol:
            return False
        self.budget.meter.charge("exact_overlay")
        if cut.area <= self.area_tol:
            cut = comp
        if cut.area > allowance + self.area_tol:
            return False
        rest = free.difference(cut)
        rest, waste = self._drop_small(rest)
        waste += cut.area
        if waste > allowance + self.area_tol:
            return False
        return self._node(rest, allowance - waste, depth + 1)

    def placements(self) -> list[tuple[Placement, ...]]:
        out = []
        for plate in self.plates:
            if not plate:
                continue
            pl = [Placement(int(i), o.rotation, float(p[0] - o.shift[0]), float(p[1] - o.shift[1]), o.mirror)
                  for i, o, p in plate]
            out.append(tuple(sorted(pl, key=lambda q: q.index)))
        return out


def exact_fill(shapes: Sequence[Shape], container: Container, *, bins: int, budget: Budget,
               seed: int = 0) -> list[tuple[Placement, ...]] | None:
    """All shapes on at most ``bins`` plates by exact-fill search, or None.

    Shapes touch exactly (no clearance).  The search is complete for a given
    node limit only in the sense of depth-first search: it restarts with
    growing node limits and seeded tie-breaks until the budget is spent.

    Parameters
    ----------
    shapes : sequence of Shape
        Footprints (every one must fit an empty plate).
    container : Container
        One plate's usable region.
    bins : int
        Plates allowed; the empty space allowed is ``bins * area - total area``.
    budget : Budget
        Deterministic work budget (:mod:`packer.nest.budget`).
    seed : int
        Seeds the tie-breaks among candidates (an even seed's first run uses none).

    Returns
    -------
    list of tuple of Placement, or None
        Plates in order (shape indices into ``shapes``), or None if no layout
        was found within the budget.

    Examples
    --------
    >>> import shapely
    >>> from packer.nest.budget import Budget
    >>> sq = Shape(shapely.box(0, 0, 1, 1), rotations=(0.0,))
    >>> tri = Shape(shapely.Polygon([(0, 0), (2, 0), (0, 1)]), rotations=(0.0, 180.0))
    >>> plates = exact_fill([sq, sq, tri, tri], Container.rectangle(2, 2), bins=1, budget=Budget(1.0))
    >>> len(plates), len(plates[0])
    (1, 4)
    """
    shapes = tuple(shapes)
    if not shapes:
        return []
    if len(shapes) >= MAX_DEPTH:
        return None
    search = _Search(shapes, container, int(bins), budget, np.random.default_rng(seed))
    if search.allowance < -search.area_tol:
        return None
    limit = float(FIRST_LIMIT)
    restart = 0
    while not budget.done():
        search.limit = int(min(limit, 1e12))
        search.nodes = 0
        if restart or seed % 2:
            search.noise = search.rng.uniform(-0.4, 0.4, size=len(search.members))
        search.by_match = restart % 2 == 0
        if search.run():
            return search.placements()
        restart += 1
        limit *= GROWTH
    return None
