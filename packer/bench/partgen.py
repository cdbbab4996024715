"""Procedural mechanical parts: closed, consistently wound meshes for demos and benchmarks.

Each kind is a small function that draws the part from extrusions of 2D
outlines, solids of revolution and boolean unions or differences. A seed varies
proportions, hole counts and tooth counts; the same ``(kind, size, seed)``
always gives the same mesh.

Every mesh is returned in a natural print orientation (its largest flat face on
z = 0 where it has one), scaled so its largest bounding-box extent is exactly
``size`` millimetres, and translated so its bounds minimum is the origin.

Booleans use the ``manifold3d`` engine through :mod:`trimesh.boolean`.

Examples
--------
>>> mesh = make_part("gear", size=40.0, seed=3)
>>> bool(mesh.is_watertight), round(float(mesh.extents.max()), 6)
(True, 40.0)
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
import shapely
import shapely.affinity
import trimesh

from packer.errors import InputError

__all__ = ["PART_KINDS", "make_part"]


# --- small builders ------------------------------------------------------------------

def _segments(radius: float, size: float) -> int:
    """Segments for a circle of ``radius`` on a part of ``size``: 24 for small holes, up to 64."""
    return int(np.clip(24 + 80 * radius / max(size, 1e-9), 24, 64)) // 4 * 4


def _circle(x: float, y: float, r: float, n: int) -> shapely.Polygon:
    """Regular n-gon inscribed in the circle of radius ``r`` centred at (x, y), CCW."""
    t = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
    return shapely.Polygon(np.column_stack([x + r * np.cos(t), y + r * np.sin(t)]))


def _rounded_rect(w: float, h: float, r: float, n: int = 8) -> shapely.Polygon:
    """Rectangle [0, w] x [0, h] with corners rounded to radius ``r`` (n segments per quarter)."""
    r = min(r, 0.49 * min(w, h))
    if r <= 0:
        return shapely.box(0.0, 0.0, w, h)
    pts = []
    for cx, cy, a0 in ((w - r, r, -90), (w - r, h - r, 0), (r, h - r, 90), (r, r, 180)):
        for a in np.radians(np.linspace(a0, a0 + 90, n + 1)):
            pts.append((cx + r * math.cos(a), cy + r * math.sin(a)))
    return shapely.Polygon(pts)


def _slot(x0: float, y0: float, x1: float, y1: float, r: float, n: int = 8) -> shapely.Polygon:
    """Stadium (slot) of half-width ``r`` between two centre points."""
    return shapely.LineString([(x0, y0), (x1, y1)]).buffer(r, quad_segs=n)


def _extrude(poly: shapely.Polygon, height: float, z0: float = 0.0) -> trimesh.Trimesh:
    """Extrude an outline (holes allowed) along +z from ``z0``."""
    # snap to a 0.1 um grid: drops the near-duplicate vertices that set operations leave behind
    poly = shapely.set_precision(poly, 1e-4)
    if not isinstance(poly, shapely.Polygon) or poly.is_empty:
        raise RuntimeError(f"partgen bug: outline is a {poly.geom_type}, not one polygon")
    mesh = trimesh.creation.extrude_polygon(shapely.geometry.polygon.orient(poly), height)
    if z0:
        mesh.apply_translation([0.0, 0.0, z0])
    return mesh


def _cylinder(r: float, h: float, n: int, *, at=(0.0, 0.0, 0.0), axis: str = "z") -> trimesh.Trimesh:
    """Cylinder of radius ``r``, length ``h`` starting at ``at`` along +``axis``."""
    m = trimesh.creation.cylinder(radius=r, height=h, sections=n)
    m.apply_translation([0.0, 0.0, h / 2.0])
    if axis == "x":
        m.apply_transform(trimesh.transformations.rotation_matrix(math.pi / 2, [0, 1, 0]))
    elif axis == "y":
        m.apply_transform(trimesh.transformations.rotation_matrix(-math.pi / 2, [1, 0, 0]))
    m.apply_translation(at)
    return m


def _box(x0, y0, z0, x1, y1, z1) -> trimesh.Trimesh:
    m = trimesh.creation.box(extents=[x1 - x0, y1 - y0, z1 - z0])
    m.apply_translation([(x0 + x1) / 2, (y0 + y1) / 2, (z0 + z1) / 2])
    return m


def _xz_profile(poly: shapely.Polygon, depth: float) -> trimesh.Trimesh:
    """Extrude an outline drawn in the (x, z) plane along +y by ``depth``."""
    m = _extrude(poly, depth)
    # a rotation about x by +90 deg takes the outline's y to z and the extrusion (z) to -y; then shift back
    m.apply_transform(trimesh.transformations.rotation_matrix(math.pi / 2, [1, 0, 0]))
    m.apply_translation([0.0, depth, 0.0])
    return m


def _union(meshes) -> trimesh.Trimesh:
    return trimesh.boolean.union(list(meshes), engine="manifold")


def _minus(mesh: trimesh.Trimesh, cutters) -> trimesh.Trimesh:
    cutters = list(cutters)
    if not cutters:
        return mesh
    return trimesh.boolean.difference([mesh, *cutters], engine="manifold")


# --- the kinds -------------------------------------------------------------------------

def _bracket(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """L-angle bracket with holes in both legs, modelled lying on its long leg."""
    a = s
    b = s * rng.uniform(0.45, 0.8)
    t = max(2.0, s * rng.uniform(0.05, 0.09))
    w = s * rng.uniform(0.3, 0.55)
    profile = shapely.Polygon([(0, 0), (a, 0), (a, t), (t, t), (t, b), (0, b)])
    body = _xz_profile(profile, w)
    d = max(1.0, min(w, b) * rng.uniform(0.15, 0.25))
    n_long = int(rng.integers(1, 4))
    xs = t + (a - t) * np.arange(1, n_long + 1) / (n_long + 1)     # evenly along the long leg
    nseg = _segments(d / 2, s)
    cut = [_cylinder(d / 2, t + 2, nseg, at=(x, w / 2, -1)) for x in xs]
    if rng.random() < 0.5:  # the outermost hole becomes an adjustment slot across the leg
        half = min(w * 0.25, (a - xs[-1]) * 0.5)
        cut[-1] = _extrude(_slot(xs[-1], w / 2 - half, xs[-1], w / 2 + half, d / 2), t + 2, -1)
    cut.append(_cylinder(d / 2, t + 2, nseg, at=(-1, w / 2, t + (b - t) / 2), axis="x"))
    return _minus(body, cut)


def _ring(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat washer: a ring with a big hole."""
    r_out = s / 2
    r_in = r_out * rng.uniform(0.45, 0.72)
    t = max(1.0, s * rng.uniform(0.04, 0.12))
    n = _segments(r_out, s)
    return _extrude(shapely.Polygon(_circle(0, 0, r_out, n).exterior, [_circle(0, 0, r_in, n).exterior]), t)


def _knob(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Revolved knob with a fluted grip and a D-shaped blind bore from below."""
    r = s / 2
    h = s * rng.uniform(0.45, 0.8)
    skirt = h * rng.uniform(0.55, 0.75)
    top = r * rng.uniform(0.55, 0.8)
    profile = [(0, 0), (r, 0), (r, skirt), (top + (r - top) * 0.4, h * 0.93), (top, h), (0, h)]
    body = trimesh.creation.revolve(profile, sections=48)
    n_flutes = int(rng.integers(8, 17))
    fr = r * math.pi / n_flutes * 0.45
    ang = 2 * math.pi * np.arange(n_flutes) / n_flutes
    cut = [_cylinder(fr, skirt * 0.9 + 1, 16, at=(1.03 * r * math.cos(q), 1.03 * r * math.sin(q), -1)) for q in ang]
    bore_r = max(1.2, r * rng.uniform(0.15, 0.25))
    d_shape = _circle(0, 0, bore_r, 24).intersection(shapely.box(-bore_r, -bore_r, bore_r * 0.6, bore_r))
    cut.append(_extrude(d_shape, h * 0.6 + 1, -1))
    return _minus(body, cut)


def _gear_outline(teeth: int, module: float, pressure_deg: float = 20.0) -> shapely.Polygon:
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


def _gear(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Spur gear with N teeth, a keyed bore, optional lightening holes and hub."""
    teeth = int(rng.integers(12, 37))
    module = s / (teeth + 2)
    outline = _gear_outline(teeth, module)
    rf = module * teeth / 2 - 1.25 * module
    bore = max(1.0, rf * rng.uniform(0.15, 0.28))
    key = shapely.box(-bore * 0.25, 0, bore * 0.25, bore * 1.25)
    hole = shapely.union(_circle(0, 0, bore, 32), key)
    holes = [hole]
    if teeth >= 20 and rng.random() < 0.7:
        n_light = int(rng.integers(4, 7))
        rc = (bore * 1.3 + rf * 0.8) / 2
        rl = min((rf * 0.8 - bore * 1.3) / 2 * 0.8, rc * math.sin(math.pi / n_light) * 0.7)
        if rl > 0.8:
            for q in 2 * math.pi * (np.arange(n_light) + 0.5) / n_light:
                holes.append(_circle(rc * math.cos(q), rc * math.sin(q), rl, 24))
    shape = outline.difference(shapely.union_all(holes))
    t = max(2.0, s * rng.uniform(0.12, 0.25))
    body = _extrude(shape, t)
    if rng.random() < 0.5:
        hub_r = bore * 1.9
        hub_ring = shapely.Polygon(_circle(0, 0, hub_r, 32).exterior, [_circle(0, 0, bore * 0.999, 32).exterior])
        hub = _extrude(hub_ring, t * 0.6 + 0.01, t - 0.01)
        body = _minus(_union([body, hub]), [_extrude(hole, t * 2 + 2, -1)])
    return body


def _clip(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """C-shaped spring clip: an open ring with eyelets at the ends, or a cable clip with a screw tab."""
    t = max(1.2, s * rng.uniform(0.06, 0.15))
    if rng.random() < 0.5:
        r_out = s * 0.42
        r_in = r_out * rng.uniform(0.7, 0.82)
        gap = math.radians(rng.uniform(40, 70))
        ring = _circle(0, 0, r_out, 48).difference(_circle(0, 0, r_in, 48))
        far = 2 * r_out
        wedge = shapely.Polygon([(0, 0), *((far * math.cos(q - math.pi / 2), far * math.sin(q - math.pi / 2))
                                           for q in (-gap / 2, gap / 2))])
        c_shape = ring.difference(wedge)
        re = (r_out - r_in) * 0.9
        rm = (r_out + r_in) / 2
        eyes, eye_holes = [], []
        for sign in (-1, 1):
            q = -math.pi / 2 + sign * (gap / 2 + re / rm)
            ex, ey = rm * math.cos(q), rm * math.sin(q)
            eyes.append(_circle(ex, ey, re, 24))
            eye_holes.append(_circle(ex, ey, re * 0.45, 16))
        shape = shapely.union_all([c_shape, *eyes]).difference(shapely.union_all(eye_holes))
    else:
        r_in = s * rng.uniform(0.18, 0.26)
        wall = max(1.2, r_in * rng.uniform(0.25, 0.4))
        r_out = r_in + wall
        ring = _circle(0, r_out, r_out, 48).difference(_circle(0, r_out, r_in, 48))
        opening = shapely.box(-r_in * 0.55, r_out, r_in * 0.55, 2 * r_out + 1)
        ring = ring.difference(opening).buffer(0)
        tab_len = s - 2 * r_out
        tab = shapely.box(r_out * 0.5, 0, r_out + tab_len, wall * 1.6)
        depth = max(t, s * 0.25)
        body = _extrude(shapely.union(ring, tab), depth)
        hr = min(wall * 1.6, depth) * 0.3
        screw = _cylinder(hr, wall * 1.6 + 2, 16, at=(r_out + tab_len * 0.7, -1, depth / 2), axis="y")
        return _minus(body, [screw])
    return _extrude(shape, t)


def _enclosure(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Small open-top box with rounded walls, corner screw bosses and a cable hole."""
    L = s
    W = s * rng.uniform(0.5, 0.9)
    H = s * rng.uniform(0.3, 0.6)
    wall = max(1.2, s * rng.uniform(0.025, 0.05))
    r = min(W, L) * rng.uniform(0.05, 0.15)
    outer = _extrude(_rounded_rect(L, W, r), H)
    cavity = _rounded_rect(L - 2 * wall, W - 2 * wall, max(0.0, r - wall))
    inner = _extrude(shapely.affinity.translate(cavity, wall, wall), H + 1, wall)
    box = _minus(outer, [inner])
    boss_r = wall * 1.8
    if min(L, W) > 8 * boss_r:
        bosses, holes = [], []
        inset = wall + boss_r * 0.7          # bosses merge into the walls (no tangent contact)
        for x in (inset, L - inset):
            for y in (inset, W - inset):
                bosses.append(_cylinder(boss_r, H * 0.8 - wall, 24, at=(x, y, wall * 0.5)))
                holes.append(_cylinder(boss_r * 0.45, H, 16, at=(x, y, wall * 1.5)))
        box = _minus(_union([box, *bosses]), holes)
    cable_r = min(H, W) * rng.uniform(0.08, 0.15)
    return _minus(box, [_cylinder(cable_r, wall * 3, 24, at=(L - 2 * wall, W / 2, H * 0.5), axis="x")])


def _lid(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat lid with a locating lip on one side and corner screw holes."""
    L = s
    W = s * rng.uniform(0.5, 0.9)
    t = max(1.2, s * rng.uniform(0.02, 0.04))
    wall = max(1.2, s * rng.uniform(0.025, 0.05))
    r = min(W, L) * rng.uniform(0.05, 0.15)
    plate = _rounded_rect(L, W, r)
    hr = wall * 0.8
    inset = wall * 2.2 + hr
    holes = [_circle(x, y, hr, 16) for x in (inset, L - inset) for y in (inset, W - inset)]
    body = _extrude(plate.difference(shapely.union_all(holes)), t)
    clear = wall * 1.1
    lip_out = shapely.affinity.translate(_rounded_rect(L - 2 * clear, W - 2 * clear, max(0.0, r - clear)), clear, clear)
    lip_in = lip_out.buffer(-wall, quad_segs=4)
    lip_in = lip_in.difference(shapely.union_all([h.buffer(wall) for h in holes]))
    lip_shape = lip_out.difference(lip_in) if not lip_in.is_empty else lip_out
    lip_shape = lip_shape.difference(shapely.union_all(holes))
    lip = _extrude(lip_shape, s * rng.uniform(0.03, 0.06) + 0.01, t - 0.01)
    return _union([body, lip])


def _tube(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Tall round tube, optionally with a flange at its base."""
    H = s
    r_out = s * rng.uniform(0.1, 0.22)
    r_in = r_out * rng.uniform(0.6, 0.85)
    n = _segments(r_out, s * 0.5)
    ring = shapely.Polygon(_circle(0, 0, r_out, n).exterior, [_circle(0, 0, r_in, n).exterior])
    body = _extrude(ring, H)
    if rng.random() < 0.5:
        rf = r_out * rng.uniform(1.5, 2.0)
        flange = shapely.Polygon(_circle(0, 0, rf, n).exterior, [_circle(0, 0, r_in, n).exterior])
        body = _union([body, _extrude(flange, max(1.5, H * 0.05))])
    return body


def _housing(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Bearing housing (pillow block): a base with a round boss and bore, two mounting holes."""
    L = s
    D = s * rng.uniform(0.25, 0.4)
    hb = max(2.0, s * rng.uniform(0.1, 0.16))
    rb = s * rng.uniform(0.2, 0.28)
    zc = hb + rb * 0.6
    bore = rb * rng.uniform(0.5, 0.7)
    n = _segments(rb, s)
    profile = shapely.union(shapely.box(0, 0, L, hb),
                            shapely.union(_circle(L / 2, zc, rb, n), shapely.box(L / 2 - rb, 0, L / 2 + rb, zc)))
    profile = profile.difference(_circle(L / 2, zc, bore, n))
    body = _xz_profile(profile, D)
    hr = max(1.0, min(D, L / 2 - rb) * 0.18)
    cut = [_cylinder(hr, hb + 2, 16, at=(x, D / 2, -1)) for x in ((L / 2 - rb) / 2, L - (L / 2 - rb) / 2)]
    return _minus(body, cut)


def _hinge(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Hinge leaf: a plate with knuckles along one edge, a pin hole and screw holes."""
    L = s
    W = s * rng.uniform(0.3, 0.55)
    t = max(1.5, s * rng.uniform(0.03, 0.05))
    rk = max(t, s * rng.uniform(0.05, 0.08))
    n_k = int(rng.choice([3, 5]))
    seg = L / n_k
    hr = max(0.8, W * 0.08)
    holes = [_circle(x, rk + (W - rk) * 0.55, hr, 16) for x in np.linspace(L * 0.2, L * 0.8, int(rng.integers(2, 4)))]
    plate = _extrude(shapely.box(0, rk * 0.5, L, W).difference(shapely.union_all(holes)), t)
    knuckles = [_cylinder(rk, seg - 0.6, 32, at=(k * seg + 0.3, rk, rk), axis="x") for k in range(0, n_k, 2)]
    bridges = [_box(k * seg + 0.3, rk * 0.0 + rk, 0, (k + 1) * seg - 0.3, rk * 1.2, rk) for k in range(0, n_k, 2)]
    body = _union([plate, *knuckles, *bridges])
    pin = _cylinder(rk * 0.45, L + 2, 16, at=(-1, rk, rk), axis="x")
    return _minus(body, [pin])


def _spacer(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Hexagonal or round spacer with a through hole; short and wide or tall and thin."""
    tall = rng.random() < 0.5
    if tall:
        H = s
        af = s * rng.uniform(0.15, 0.3)
    else:
        af = s * 0.85
        H = s * rng.uniform(0.15, 0.4)
    hole = af * rng.uniform(0.3, 0.5) / 2
    if rng.random() < 0.5:
        outer = _circle(0, 0, af / 2 / math.cos(math.pi / 6), 6)
    else:
        outer = _circle(0, 0, af / 2, _segments(af / 2, s))
    return _extrude(shapely.Polygon(outer.exterior, [_circle(0, 0, hole, 24).exterior]), H)


def _hook(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat J-hook with a mounting plate and two screw holes."""
    w = max(2.0, s * rng.uniform(0.08, 0.14))
    stem = s * rng.uniform(0.55, 0.7)
    rc = (s - stem) * rng.uniform(0.5, 0.8)
    # stem down to the origin, then a J-curve around the centre (rc, 0), its tip turning back up
    arc = [(rc + rc * math.cos(a), rc * math.sin(a)) for a in np.linspace(math.pi, 2.15 * math.pi, 14)]
    path = [(0.0, stem), *arc]
    hook = shapely.LineString(path).buffer(w / 2, quad_segs=6)
    plate = _rounded_rect(w * 2.6, stem * 0.7, w * 0.6)
    plate = shapely.affinity.translate(plate, -w * 1.3, stem * 0.3 + w / 2)
    hr = w * 0.35
    holes = [_circle(0, stem * 0.3 + w / 2 + stem * 0.7 * f, hr, 16) for f in (0.25, 0.75)]
    shape = shapely.union(hook, plate).difference(shapely.union_all(holes))
    return _extrude(shape, max(2.0, s * rng.uniform(0.06, 0.12)))


def _slotted_plate(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Mounting plate with rows of adjustment slots and corner holes."""
    L = s
    W = s * rng.uniform(0.4, 0.8)
    t = max(1.5, s * rng.uniform(0.03, 0.06))
    plate = _rounded_rect(L, W, min(L, W) * 0.06)
    sw = max(0.8, W * rng.uniform(0.04, 0.07))          # slot half-width
    margin = sw * 3
    # rows at least 4 half-widths apart; slots at least 5 half-widths long
    rows = max(1, min(int(rng.integers(1, 4)), int((W - 2 * margin) / (4 * sw))))
    cols = max(1, min(int(rng.integers(1, 4)), int((L - 2 * margin) / (10 * sw))))
    pitch = (L - 2 * margin) / cols
    cuts = []
    for i in range(rows):
        y = margin + (W - 2 * margin) * (i + 0.5) / rows
        for j in range(cols):
            cuts.append(_slot(margin + j * pitch + 2.5 * sw, y, margin + (j + 1) * pitch - 2.5 * sw, y, sw, 6))
    hr = sw * 1.1
    cuts += [_circle(x, y, hr, 16) for x in (sw * 2.2, L - sw * 2.2) for y in (sw * 2.2, W - sw * 2.2)]
    return _extrude(plate.difference(shapely.union_all(cuts)), t)


def _cover(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Thin large panel with a vent grille and corner holes."""
    L = s
    W = s * rng.uniform(0.6, 0.9)
    t = max(1.2, s * rng.uniform(0.012, 0.025))
    panel = _rounded_rect(L, W, min(L, W) * 0.04)
    vw = max(0.6, W * 0.02)
    n_vents = max(2, min(int(rng.integers(4, 10)), int(W * 0.5 / (4 * vw)) + 1))
    rows = W * 0.25 + W * 0.5 * np.arange(n_vents) / (n_vents - 1)
    vents = [_slot(L * 0.3, y, L * 0.7, y, vw, 4) for y in rows]
    hr = max(0.8, W * 0.02)
    ins = hr * 3
    vents += [_circle(x, y, hr, 16) for x in (ins, L - ins) for y in (ins, W - ins)]
    return _extrude(panel.difference(shapely.union_all(vents)), t)


_BUILDERS: dict[str, Callable[[float, np.random.Generator], trimesh.Trimesh]] = {
    "bracket": _bracket,
    "ring": _ring,
    "knob": _knob,
    "gear": _gear,
    "clip": _clip,
    "enclosure": _enclosure,
    "lid": _lid,
    "tube": _tube,
    "housing": _housing,
    "hinge": _hinge,
    "spacer": _spacer,
    "hook": _hook,
    "plate-with-slots": _slotted_plate,
    "cover": _cover,
}

PART_KINDS: tuple[str, ...] = tuple(_BUILDERS)
_DRAW_MIN = 40.0    # mm: smaller parts are drawn at this size and scaled down


def make_part(kind: str, *, size: float, seed: int) -> trimesh.Trimesh:
    """Make one closed, consistently wound part mesh.

    Parameters
    ----------
    kind
        One of :data:`PART_KINDS`.
    size
        Largest bounding-box extent of the result, mm (> 0).
    seed
        Varies proportions, hole and tooth counts; the same seed gives the same mesh.

    Returns
    -------
    trimesh.Trimesh
        Watertight, consistently wound, positive volume; bounds minimum at the
        origin; largest extent exactly ``size`` mm.

    Raises
    ------
    InputError
        Unknown ``kind`` (the message lists the known kinds) or ``size <= 0``.
    """
    builder = _BUILDERS.get(kind)
    if builder is None:
        raise InputError(f"unknown part kind '{kind}'; known kinds: {', '.join(PART_KINDS)}")
    if not (size > 0 and math.isfinite(size)):
        raise InputError(f"part size must be a positive number of mm, got {size!r}")
    rng = np.random.default_rng([int(seed), sum(map(ord, kind))])
    # drawn at the size (wall floors in mm), small parts at 40 mm, then scaled to the exact size
    mesh = builder(max(float(size), _DRAW_MIN), rng)
    mesh = trimesh.Trimesh(vertices=mesh.vertices, faces=mesh.faces, process=True)
    mesh.merge_vertices()
    mesh.remove_unreferenced_vertices()
    mesh.apply_scale(size / float(mesh.extents.max()))
    mesh.apply_translation(-mesh.bounds[0])
    if not (mesh.is_watertight and mesh.is_winding_consistent and mesh.volume > 0):
        raise RuntimeError(f"partgen bug: {kind} seed {seed} gave an unusable mesh")
    return mesh
