"""Generated nesting instances for development: many problems no one tuned the engine for.

A seeded generator of strip and plate instances in the shared benchmark format
(``{"name", "source", "strip_width" | "bin", "allowed_rotations_deg", "items"}``,
see :mod:`packer.bench.instances`).  Outlines come from three sources:

- footprints of :func:`packer.bench.partgen.make_part` meshes (brackets, gears, clips,
  hooks, housings ...: holes, arcs, thin arms);
- procedural outlines of the kinds real cutting and printing sets have and the
  engine finds hard: long thin slats with notches, very concave combs, crosses
  and U/L/T profiles, star-like blobs, garment-like curved panels;
- footprints of the real-parts data set (``ampp_dir``, the folder of
  ``shared/datasets/ampp-parts``), only when a folder is given.

Each seed picks one *character* (many outline types with one or two copies
each; long thin pieces; eight rotations; very concave pieces; printed parts;
a mix), so a sample of seeds covers the cases the shared benchmark set
under-represents.  The same seed (and folder) always gives the same instance.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import shapely
from shapely import affinity

__all__ = ["CHARACTERS", "generate_instance", "outline_pool"]

#: the instance characters, cycled by seed
CHARACTERS = ("many_types", "long_thin", "rotations", "concave", "printed", "mixed")


def _clean(poly: shapely.Polygon, size: float, *, holes: bool) -> shapely.Polygon | None:
    """Largest polygon of ``poly`` scaled to ``size``, simplified, rounded to 1e-3, CCW, at the origin."""
    poly = shapely.make_valid(poly)
    if poly.geom_type != "Polygon":
        polys = [g for g in getattr(poly, "geoms", []) if g.geom_type == "Polygon"]
        if not polys:
            return None
        poly = max(polys, key=lambda g: g.area)
    if not holes:
        poly = shapely.Polygon(poly.exterior)
    x0, y0, x1, y1 = poly.bounds
    ext = max(x1 - x0, y1 - y0)
    if ext <= 0:
        return None
    poly = affinity.scale(affinity.translate(poly, -x0, -y0), size / ext, size / ext, origin=(0, 0))
    poly = poly.simplify(0.004 * size, preserve_topology=True)
    poly = shapely.set_precision(poly, 1e-3)
    if poly.geom_type != "Polygon" or poly.is_empty or not poly.is_valid or poly.area <= 0:
        return None
    return shapely.geometry.polygon.orient(poly)


def _slat(rng, size):
    """Long thin piece (aspect 5-14), some with notches or a tapered end."""
    w = size / rng.uniform(5.0, 14.0)
    pts = [(0, 0), (size, 0), (size, w), (0, w)]
    if rng.random() < 0.5:
        pts[2] = (size - rng.uniform(0, 2) * w, w)
    poly = shapely.Polygon(pts)
    for _ in range(int(rng.integers(0, 4))):
        x = rng.uniform(0.1, 0.85) * size
        d = rng.uniform(0.3, 0.6) * w
        y = 0.0 if rng.random() < 0.5 else w - d
        poly = poly.difference(shapely.box(x, y, x + rng.uniform(0.3, 1.5) * w, y + d))
    return poly


def _comb(rng, size):
    """Very concave piece: a spine with 2-6 teeth (a comb or an E)."""
    teeth = int(rng.integers(2, 7))
    spine = size * rng.uniform(0.12, 0.25)
    depth = size * rng.uniform(0.4, 0.9)
    tw = size / (2 * teeth - 1)
    parts = [shapely.box(0, 0, size, spine)]
    for k in range(teeth):
        h = depth * rng.uniform(0.6, 1.0)
        parts.append(shapely.box(2 * k * tw, spine - 1e-9, (2 * k + 1) * tw, spine + h))
    return shapely.union_all(parts)


def _profile(rng, size):
    """L, U, T or cross profile with arms of random thickness."""
    t = size * rng.uniform(0.12, 0.35)
    h = size * rng.uniform(0.5, 1.0)
    kind = int(rng.integers(0, 4))
    if kind == 0:
        shapes = [shapely.box(0, 0, size, t), shapely.box(0, 0, t, h)]
    elif kind == 1:
        shapes = [shapely.box(0, 0, size, t), shapely.box(0, 0, t, h), shapely.box(size - t, 0, size, h)]
    elif kind == 2:
        shapes = [shapely.box(0, h - t, size, h), shapely.box((size - t) / 2, 0, (size + t) / 2, h)]
    else:
        shapes = [shapely.box(0, (h - t) / 2, size, (h + t) / 2), shapely.box((size - t) / 2, 0, (size + t) / 2, h)]
    return shapely.union_all(shapes)


def _blob(rng, size):
    """Star-like outline: random radii around a centre (4-12 lobes, 12-40 vertices)."""
    n = int(rng.integers(12, 41))
    lobes = int(rng.integers(2, 7))
    a = np.sort(rng.uniform(0, 2 * math.pi, n))
    depth = rng.uniform(0.1, 0.6)
    r = 1.0 - depth * (0.5 + 0.5 * np.cos(lobes * a + rng.uniform(0, 2 * math.pi))) * rng.uniform(0.6, 1.0, n)
    return shapely.Polygon(np.c_[r * np.cos(a), r * np.sin(a)] * size / 2)


def _panel(rng, size):
    """Garment-like panel: a quadrilateral with two bulging and one hollow curved side."""
    w, h = size, size * rng.uniform(0.3, 0.9)
    t = np.linspace(0, 1, 8)[1:-1]
    bottom = [(x * w, -rng.uniform(0, 0.1) * h * math.sin(math.pi * x)) for x in t]
    right = [(w + rng.uniform(-0.15, 0.1) * w * math.sin(math.pi * y), y * h) for y in t]
    top = [(w * (1 - x), h - rng.uniform(0.1, 0.3) * h * math.sin(math.pi * x)) for x in t]
    return shapely.Polygon([(0, 0), *bottom, (w, 0), *right, (w * rng.uniform(0.7, 1.0), h), *top,
                            (0, h * rng.uniform(0.6, 1.0))])


_PROCEDURAL = {"slat": _slat, "comb": _comb, "profile": _profile, "blob": _blob, "panel": _panel}


def _printed(rng, size):
    """Footprint of a generated mechanical part (holes kept)."""
    from packer.intake.mesh.shadow import footprint_of
    from packer.bench.partgen import PART_KINDS, make_part

    kind = PART_KINDS[int(rng.integers(len(PART_KINDS)))]
    return footprint_of(make_part(kind, size=float(size), seed=int(rng.integers(1 << 16))))


def _ampp_footprints(folder: Path) -> list[shapely.Polygon]:
    """Footprints of the data set's meshes that read and check cleanly (laid flat), in file order."""
    from packer.intake.parts import load_part

    out = []
    for path in sorted((folder / "meshes").glob("*.stl"), key=lambda p: int(p.stem) if p.stem.isdigit() else 0):
        try:
            out.append(load_part(path).footprint)
        except Exception:   # meshes that do not check out are simply not used as outlines
            continue
    return out


_AMPP_CACHE: dict = {}


def outline_pool(character: str, rng: np.random.Generator, count: int, *, ampp_dir=None):
    """``count`` outlines (shapely, mm, at the origin) of one instance character."""
    mix = {"many_types": ("blob", "panel", "profile", "slat", "printed"),
           "long_thin": ("slat", "slat", "profile"),
           "rotations": ("blob", "profile", "panel", "printed"),
           "concave": ("comb", "profile", "blob"),
           "printed": ("printed", "printed", "ampp"),
           "mixed": ("blob", "comb", "slat", "panel", "profile", "printed", "ampp")}[character]
    if ampp_dir is None:
        mix = tuple(m for m in mix if m != "ampp")
    elif str(ampp_dir) not in _AMPP_CACHE:
        _AMPP_CACHE[str(ampp_dir)] = _ampp_footprints(Path(ampp_dir))
    out = []
    while len(out) < count:
        kind = mix[int(rng.integers(len(mix)))]
        size = float(rng.uniform(20.0, 120.0))
        if kind == "printed":
            poly = _printed(rng, size)
        elif kind == "ampp":
            pool = _AMPP_CACHE[str(ampp_dir)]
            if not pool:
                continue
            poly = pool[int(rng.integers(len(pool)))]
        else:
            poly = _PROCEDURAL[kind](rng, size)
        poly = _clean(poly, size, holes=kind in ("printed", "ampp"))
        if poly is not None and len(poly.exterior.coords) >= 4:
            out.append(poly)
    return out


def generate_instance(seed: int, *, kind: str = "strip", ampp_dir=None) -> dict:
    """One generated instance (a dict in the shared benchmark format).

    Parameters
    ----------
    seed : int
        Picks the character (``CHARACTERS[seed % 6]``) and everything else.
    kind : {"strip", "plate"}
        A strip of fixed width, or bins of a fixed size (about 2-4 bins of area).
    ampp_dir : path, optional
        Folder of the real-parts data set; its footprints join the outline pool.
    """
    if kind not in ("strip", "plate"):
        raise ValueError(f"kind must be 'strip' or 'plate', not {kind!r}")
    character = CHARACTERS[seed % len(CHARACTERS)]
    rng = np.random.default_rng([seed, 0 if kind == "strip" else 1, 0 if ampp_dir is None else 1])
    if character == "many_types":
        types, copies = int(rng.integers(25, 45)), (1, 2)
    else:
        types, copies = int(rng.integers(5, 16)), (1, 6)
    rotations = {"rotations": [45.0 * k for k in range(8)], "long_thin": [0.0, 90.0, 180.0, 270.0]}.get(
        character, [[0.0, 180.0], [0.0, 90.0, 180.0, 270.0]][int(rng.integers(2))])
    outlines = outline_pool(character, rng, types, ampp_dir=ampp_dir)
    items = []
    for k, poly in enumerate(outlines):
        item = {"id": f"p{k}", "quantity": int(rng.integers(copies[0], copies[1] + 1)),
                "polygon": [list(map(float, c)) for c in poly.exterior.coords[:-1]]}
        if poly.interiors:
            item["holes"] = [[list(map(float, c)) for c in r.coords[:-1]] for r in poly.interiors]
        items.append(item)
    area = sum(shapely.Polygon(i["polygon"], i.get("holes")).area * i["quantity"] for i in items)
    largest = max(max(p.bounds[2], p.bounds[3]) for p in outlines)
    name = f"gen_{kind}_{seed}_{character}"
    out = {"name": name, "source": f"packer.bench.nestgen seed {seed}" + (" with ampp-parts" if ampp_dir else ""),
           "allowed_rotations_deg": rotations, "items": items}
    if kind == "strip":
        out["strip_width"] = round(max(largest * 1.05, math.sqrt(area) * rng.uniform(0.5, 0.9)), 3)
    else:
        side = max(largest * 1.1, math.sqrt(area / rng.uniform(2.0, 4.0)))
        out["bin"] = {"width": round(side * 1.2, 3), "height": round(side, 3)}
    return out
