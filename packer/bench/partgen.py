"""Procedural mechanical parts: closed, consistently wound meshes for demos and benchmarks.

Each kind is a small function that draws the part from extrusions of 2D
outlines, solids of revolution and boolean unions or differences. A seed varies
proportions, hole counts and tooth counts; the same ``(kind, size, seed)``
always gives the same mesh.

Every mesh is returned in a natural print orientation (its largest flat face on
z = 0 where it has one), scaled so its largest bounding-box extent is exactly
``size`` millimetres, and translated so its bounds minimum is the origin.

The outline and solid builders (and the booleans, through the ``manifold3d``
engine of :mod:`trimesh.boolean`) are in :mod:`packer.bench.solids`.

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

from packer.bench.meshcheck import check_mesh
from packer.bench.solids import (box, circle, cylinder, extrude, gear_outline, minus, rounded_rect, segments, slot,
                                 union, xz_profile)
from packer.errors import InputError

__all__ = ["PART_KINDS", "make_part"]


# --- the kinds -------------------------------------------------------------------------

def _bracket(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """L-angle bracket with holes in both legs, modelled lying on its long leg."""
    a = s
    b = s * rng.uniform(0.45, 0.8)
    t = max(2.0, s * rng.uniform(0.05, 0.09))
    w = s * rng.uniform(0.3, 0.55)
    profile = shapely.Polygon([(0, 0), (a, 0), (a, t), (t, t), (t, b), (0, b)])
    body = xz_profile(profile, w)
    d = max(1.0, min(w, b) * rng.uniform(0.15, 0.25))
    n_long = int(rng.integers(1, 4))
    xs = t + (a - t) * np.arange(1, n_long + 1) / (n_long + 1)     # evenly along the long leg
    nseg = segments(d / 2, s)
    cut = [cylinder(d / 2, t + 2, nseg, at=(x, w / 2, -1)) for x in xs]
    if rng.random() < 0.5:  # the outermost hole becomes an adjustment slot across the leg
        half = min(w * 0.25, (a - xs[-1]) * 0.5)
        cut[-1] = extrude(slot(xs[-1], w / 2 - half, xs[-1], w / 2 + half, d / 2), t + 2, -1)
    cut.append(cylinder(d / 2, t + 2, nseg, at=(-1, w / 2, t + (b - t) / 2), axis="x"))
    return minus(body, cut)


def _ring(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat washer: a ring with a big hole."""
    r_out = s / 2
    r_in = r_out * rng.uniform(0.45, 0.72)
    t = max(1.0, s * rng.uniform(0.04, 0.12))
    n = segments(r_out, s)
    return extrude(shapely.Polygon(circle(0, 0, r_out, n).exterior, [circle(0, 0, r_in, n).exterior]), t)


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
    cut = [cylinder(fr, skirt * 0.9 + 1, 16, at=(1.03 * r * math.cos(q), 1.03 * r * math.sin(q), -1)) for q in ang]
    bore_r = max(1.2, r * rng.uniform(0.15, 0.25))
    d_shape = circle(0, 0, bore_r, 24).intersection(shapely.box(-bore_r, -bore_r, bore_r * 0.6, bore_r))
    cut.append(extrude(d_shape, h * 0.6 + 1, -1))
    return minus(body, cut)


def _gear(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Spur gear with N teeth, a keyed bore, optional lightening holes and hub."""
    teeth = int(rng.integers(12, 37))
    module = s / (teeth + 2)
    outline = gear_outline(teeth, module)
    rf = module * teeth / 2 - 1.25 * module
    bore = max(1.0, rf * rng.uniform(0.15, 0.28))
    key = shapely.box(-bore * 0.25, 0, bore * 0.25, bore * 1.25)
    hole = shapely.union(circle(0, 0, bore, 32), key)
    holes = [hole]
    if teeth >= 20 and rng.random() < 0.7:
        n_light = int(rng.integers(4, 7))
        rc = (bore * 1.3 + rf * 0.8) / 2
        rl = min((rf * 0.8 - bore * 1.3) / 2 * 0.8, rc * math.sin(math.pi / n_light) * 0.7)
        if rl > 0.8:
            for q in 2 * math.pi * (np.arange(n_light) + 0.5) / n_light:
                holes.append(circle(rc * math.cos(q), rc * math.sin(q), rl, 24))
    shape = outline.difference(shapely.union_all(holes))
    t = max(2.0, s * rng.uniform(0.12, 0.25))
    body = extrude(shape, t)
    if rng.random() < 0.5:
        hub_r = bore * 1.9
        hub_ring = shapely.Polygon(circle(0, 0, hub_r, 32).exterior, [circle(0, 0, bore * 0.999, 32).exterior])
        hub = extrude(hub_ring, t * 0.6 + 0.01, t - 0.01)
        body = minus(union([body, hub]), [extrude(hole, t * 2 + 2, -1)])
    return body


def _clip(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """C-shaped spring clip: an open ring with eyelets at the ends, or a cable clip with a screw tab."""
    t = max(1.2, s * rng.uniform(0.06, 0.15))
    if rng.random() < 0.5:
        r_out = s * 0.42
        r_in = r_out * rng.uniform(0.7, 0.82)
        gap = math.radians(rng.uniform(40, 70))
        ring = circle(0, 0, r_out, 48).difference(circle(0, 0, r_in, 48))
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
            eyes.append(circle(ex, ey, re, 24))
            eye_holes.append(circle(ex, ey, re * 0.45, 16))
        shape = shapely.union_all([c_shape, *eyes]).difference(shapely.union_all(eye_holes))
    else:
        r_in = s * rng.uniform(0.18, 0.26)
        wall = max(1.2, r_in * rng.uniform(0.25, 0.4))
        r_out = r_in + wall
        ring = circle(0, r_out, r_out, 48).difference(circle(0, r_out, r_in, 48))
        opening = shapely.box(-r_in * 0.55, r_out, r_in * 0.55, 2 * r_out + 1)
        ring = ring.difference(opening).buffer(0)
        tab_len = s - 2 * r_out
        tab = shapely.box(r_out * 0.5, 0, r_out + tab_len, wall * 1.6)
        depth = max(t, s * 0.25)
        body = extrude(shapely.union(ring, tab), depth)
        hr = min(wall * 1.6, depth) * 0.3
        screw = cylinder(hr, wall * 1.6 + 2, 16, at=(r_out + tab_len * 0.7, -1, depth / 2), axis="y")
        return minus(body, [screw])
    return extrude(shape, t)


def _enclosure(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Small open-top box with rounded walls, corner screw bosses and a cable hole."""
    L = s
    W = s * rng.uniform(0.5, 0.9)
    H = s * rng.uniform(0.3, 0.6)
    wall = max(1.2, s * rng.uniform(0.025, 0.05))
    r = min(W, L) * rng.uniform(0.05, 0.15)
    outer = extrude(rounded_rect(L, W, r), H)
    cavity = rounded_rect(L - 2 * wall, W - 2 * wall, max(0.0, r - wall))
    inner = extrude(shapely.affinity.translate(cavity, wall, wall), H + 1, wall)
    box = minus(outer, [inner])
    boss_r = wall * 1.8
    if min(L, W) > 8 * boss_r:
        bosses, holes = [], []
        inset = wall + boss_r * 0.7          # bosses merge into the walls (no tangent contact)
        for x in (inset, L - inset):
            for y in (inset, W - inset):
                bosses.append(cylinder(boss_r, H * 0.8 - wall, 24, at=(x, y, wall * 0.5)))
                holes.append(cylinder(boss_r * 0.45, H, 16, at=(x, y, wall * 1.5)))
        box = minus(union([box, *bosses]), holes)
    cable_r = min(H, W) * rng.uniform(0.08, 0.15)
    return minus(box, [cylinder(cable_r, wall * 3, 24, at=(L - 2 * wall, W / 2, H * 0.5), axis="x")])


def _lid(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat lid with a locating lip on one side and corner screw holes."""
    L = s
    W = s * rng.uniform(0.5, 0.9)
    t = max(1.2, s * rng.uniform(0.02, 0.04))
    wall = max(1.2, s * rng.uniform(0.025, 0.05))
    r = min(W, L) * rng.uniform(0.05, 0.15)
    plate = rounded_rect(L, W, r)
    hr = wall * 0.8
    inset = wall * 2.2 + hr
    holes = [circle(x, y, hr, 16) for x in (inset, L - inset) for y in (inset, W - inset)]
    body = extrude(plate.difference(shapely.union_all(holes)), t)
    clear = wall * 1.1
    lip_out = shapely.affinity.translate(rounded_rect(L - 2 * clear, W - 2 * clear, max(0.0, r - clear)), clear, clear)
    lip_in = lip_out.buffer(-wall, quad_segs=4)
    lip_in = lip_in.difference(shapely.union_all([h.buffer(wall) for h in holes]))
    lip_shape = lip_out.difference(lip_in) if not lip_in.is_empty else lip_out
    lip_shape = lip_shape.difference(shapely.union_all(holes))
    lip = extrude(lip_shape, s * rng.uniform(0.03, 0.06) + 0.01, t - 0.01)
    return union([body, lip])


def _tube(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Tall round tube, optionally with a flange at its base."""
    H = s
    r_out = s * rng.uniform(0.1, 0.22)
    r_in = r_out * rng.uniform(0.6, 0.85)
    n = segments(r_out, s * 0.5)
    ring = shapely.Polygon(circle(0, 0, r_out, n).exterior, [circle(0, 0, r_in, n).exterior])
    body = extrude(ring, H)
    if rng.random() < 0.5:
        rf = r_out * rng.uniform(1.5, 2.0)
        flange = shapely.Polygon(circle(0, 0, rf, n).exterior, [circle(0, 0, r_in, n).exterior])
        body = union([body, extrude(flange, max(1.5, H * 0.05))])
    return body


def _housing(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Bearing housing (pillow block): a base with a round boss and bore, two mounting holes."""
    L = s
    D = s * rng.uniform(0.25, 0.4)
    hb = max(2.0, s * rng.uniform(0.1, 0.16))
    rb = s * rng.uniform(0.2, 0.28)
    zc = hb + rb * 0.6
    bore = rb * rng.uniform(0.5, 0.7)
    n = segments(rb, s)
    profile = shapely.union(shapely.box(0, 0, L, hb),
                            shapely.union(circle(L / 2, zc, rb, n), shapely.box(L / 2 - rb, 0, L / 2 + rb, zc)))
    profile = profile.difference(circle(L / 2, zc, bore, n))
    body = xz_profile(profile, D)
    hr = max(1.0, min(D, L / 2 - rb) * 0.18)
    cut = [cylinder(hr, hb + 2, 16, at=(x, D / 2, -1)) for x in ((L / 2 - rb) / 2, L - (L / 2 - rb) / 2)]
    return minus(body, cut)


def _hinge(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Hinge leaf: a plate with knuckles along one edge, a pin hole and screw holes."""
    L = s
    W = s * rng.uniform(0.3, 0.55)
    t = max(1.5, s * rng.uniform(0.03, 0.05))
    rk = max(t, s * rng.uniform(0.05, 0.08))
    n_k = int(rng.choice([3, 5]))
    seg = L / n_k
    hr = max(0.8, W * 0.08)
    holes = [circle(x, rk + (W - rk) * 0.55, hr, 16) for x in np.linspace(L * 0.2, L * 0.8, int(rng.integers(2, 4)))]
    plate = extrude(shapely.box(0, rk * 0.5, L, W).difference(shapely.union_all(holes)), t)
    knuckles = [cylinder(rk, seg - 0.6, 32, at=(k * seg + 0.3, rk, rk), axis="x") for k in range(0, n_k, 2)]
    bridges = [box(k * seg + 0.3, rk * 0.0 + rk, 0, (k + 1) * seg - 0.3, rk * 1.2, rk) for k in range(0, n_k, 2)]
    body = union([plate, *knuckles, *bridges])
    pin = cylinder(rk * 0.45, L + 2, 16, at=(-1, rk, rk), axis="x")
    return minus(body, [pin])


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
        outer = circle(0, 0, af / 2 / math.cos(math.pi / 6), 6)
    else:
        outer = circle(0, 0, af / 2, segments(af / 2, s))
    return extrude(shapely.Polygon(outer.exterior, [circle(0, 0, hole, 24).exterior]), H)


def _hook(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Flat J-hook with a mounting plate and two screw holes."""
    w = max(2.0, s * rng.uniform(0.08, 0.14))
    stem = s * rng.uniform(0.55, 0.7)
    rc = (s - stem) * rng.uniform(0.5, 0.8)
    # stem down to the origin, then a J-curve around the centre (rc, 0), its tip turning back up
    arc = [(rc + rc * math.cos(a), rc * math.sin(a)) for a in np.linspace(math.pi, 2.15 * math.pi, 14)]
    path = [(0.0, stem), *arc]
    hook = shapely.LineString(path).buffer(w / 2, quad_segs=6)
    plate = rounded_rect(w * 2.6, stem * 0.7, w * 0.6)
    plate = shapely.affinity.translate(plate, -w * 1.3, stem * 0.3 + w / 2)
    hr = w * 0.35
    holes = [circle(0, stem * 0.3 + w / 2 + stem * 0.7 * f, hr, 16) for f in (0.25, 0.75)]
    shape = shapely.union(hook, plate).difference(shapely.union_all(holes))
    return extrude(shape, max(2.0, s * rng.uniform(0.06, 0.12)))


def _slotted_plate(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Mounting plate with rows of adjustment slots and corner holes."""
    L = s
    W = s * rng.uniform(0.4, 0.8)
    t = max(1.5, s * rng.uniform(0.03, 0.06))
    plate = rounded_rect(L, W, min(L, W) * 0.06)
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
            cuts.append(slot(margin + j * pitch + 2.5 * sw, y, margin + (j + 1) * pitch - 2.5 * sw, y, sw, 6))
    hr = sw * 1.1
    cuts += [circle(x, y, hr, 16) for x in (sw * 2.2, L - sw * 2.2) for y in (sw * 2.2, W - sw * 2.2)]
    return extrude(plate.difference(shapely.union_all(cuts)), t)


def _cover(s: float, rng: np.random.Generator) -> trimesh.Trimesh:
    """Thin large panel with a vent grille and corner holes."""
    L = s
    W = s * rng.uniform(0.6, 0.9)
    t = max(1.2, s * rng.uniform(0.012, 0.025))
    panel = rounded_rect(L, W, min(L, W) * 0.04)
    vw = max(0.6, W * 0.02)
    n_vents = max(2, min(int(rng.integers(4, 10)), int(W * 0.5 / (4 * vw)) + 1))
    rows = W * 0.25 + W * 0.5 * np.arange(n_vents) / (n_vents - 1)
    vents = [slot(L * 0.3, y, L * 0.7, y, vw, 4) for y in rows]
    hr = max(0.8, W * 0.02)
    ins = hr * 3
    vents += [circle(x, y, hr, 16) for x in (ins, L - ins) for y in (ins, W - ins)]
    return extrude(panel.difference(shapely.union_all(vents)), t)


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
    if not check_mesh(mesh).ok:
        raise RuntimeError(f"partgen bug: {kind} seed {seed} gave an unusable mesh")
    return mesh
