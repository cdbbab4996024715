"""Plate profiles: what one kind of printer offers (``plates/*.yaml``).

A profile names its technology (``filament``, ``resin`` or ``powder``), its
build volume, the shape of its plate with keep-out zones, the default spacing
and margin, the parameters of its time model and the materials it runs.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from pathlib import Path

from shapely.geometry import Point, Polygon, box

from packer.errors import InputError
from packer.intake.fields import Reader
from packer.intake.source import load_yaml

__all__ = [
    "TECHNOLOGIES", "FilamentTime", "ResinTime", "PowderTime", "Material", "PostStep",
    "PlateProfile", "load_profile", "usable_area", "PROFILE_NAME",
]

#: What a profile name may look like: a name, never a path (no separators, no leading dot).
PROFILE_NAME = r"[A-Za-z0-9][A-Za-z0-9_.+-]{0,99}"

TECHNOLOGIES = ("filament", "resin", "powder")


@dataclass(frozen=True)
class FilamentTime:
    """Parameters of the filament time model (see packer/fleet/timemodel.py)."""

    layer_height_mm: float = 0.2
    line_width_mm: float = 0.45
    flow_mm3_s: float = 10.0          # effective volumetric flow while depositing
    walls: int = 2                    # perimeter lines
    infill: float = 0.2               # infill fraction of the interior
    layer_change_s: float = 2.0       # per layer: z move, retraction, wipe
    travel_per_part_s: float = 0.6    # per part per layer: travel between parts
    warmup_s: float = 300.0           # heat bed and nozzle, level
    clear_s: float = 300.0            # operator: remove parts and ready the plate


@dataclass(frozen=True)
class ResinTime:
    """Parameters of the resin time model: layers set by the tallest part."""

    layer_height_mm: float = 0.05
    bottom_layers: int = 5
    bottom_exposure_s: float = 30.0
    exposure_s: float = 2.5
    lift_mm: float = 5.0
    lift_speed_mm_s: float = 2.0
    retract_speed_mm_s: float = 2.0
    rest_s: float = 1.0
    warmup_s: float = 120.0
    clear_s: float = 900.0            # operator: remove, wash and cure handling


@dataclass(frozen=True)
class PowderTime:
    """Parameters of the powder-bed time model: layers from build height."""

    layer_height_mm: float = 0.1
    recoat_s: float = 10.0
    hatch_mm: float = 0.1
    scan_speed_mm_s: float = 3000.0
    warmup_s: float = 5400.0
    cooldown_factor: float = 1.0      # cool-down time as a multiple of the build time
    refresh_ratio: float = 0.3        # fresh powder share of the unfused powder used
    clear_s: float = 1800.0           # operator: unpack and depowder


TIME_MODELS = {"filament": FilamentTime, "resin": ResinTime, "powder": PowderTime}


@dataclass(frozen=True)
class Material:
    """A material a profile runs, with its density in g/cm3."""

    name: str
    density_g_cm3: float
    powder_density_g_cm3: float | None = None   # loose powder, powder beds only


@dataclass(frozen=True)
class PostStep:
    """One post-processing step a plate's parts go through after the plate is cleared.

    Attributes
    ----------
    step : str
        What is done (for example ``wash``, ``cure``, ``cool-down``, ``depowder``).
    duration_s : float
        How long it takes (s).
    operator : bool
        True when an operator works through it (it then lies inside one shift);
        False when it runs by itself (it may run overnight).
    """

    step: str
    duration_s: float
    operator: bool


@dataclass(frozen=True)
class PlateProfile:
    """One kind of printer plate or build volume.

    ``material_change_s`` is the time to change a printer of this kind from one
    material to another (spool change and purge, vat change, powder change), done
    by an operator before the plate; ``post_processing`` the steps the parts go
    through after the plate is cleared, in order.
    """

    name: str
    file: str
    technology: str
    build_volume: tuple[float, float, float]        # x, y, z in mm
    plate_shape: str                                # rectangle | circle | polygon
    plate_points: tuple[tuple[float, float], ...]   # polygon corners (polygon plates)
    keep_out: tuple[tuple[float, float, float, float], ...]  # rectangles x0, y0, x1, y1
    spacing: float
    margin: float
    time: FilamentTime | ResinTime | PowderTime
    materials: tuple[Material, ...]
    material_change_s: float = 0.0
    post_processing: tuple[PostStep, ...] = ()

    def material(self, name: str) -> Material | None:
        return next((m for m in self.materials if m.name == name), None)


_TOP = {"name", "technology", "build_volume", "plate", "keep_out", "spacing", "margin",
        "time_model", "materials", "notes", "material_change_s", "post_processing"}


def load_profile(path: str | Path) -> PlateProfile:
    """Load and validate one plate profile.

    Raises
    ------
    InputError
        Listing every problem of the file, each with its line and key.
    """
    doc = load_yaml(path)
    r = Reader(doc)
    m = r.mapping(doc.data, "", allowed=_TOP,
                  required={"name", "technology", "build_volume", "spacing", "margin", "materials"})
    if m is None:
        raise InputError("\n".join(map(str, r.problems)))
    name = r.text(m, "name", "")
    tech = r.choice(m, "technology", "", TECHNOLOGIES)
    volume = r.numbers(m, "build_volume", "", count=3, above=0.0)
    spacing = r.number(m, "spacing", "", minimum=0.0)
    margin = r.number(m, "margin", "", minimum=0.0)
    shape, points = _read_plate(r, m.get("plate", {"shape": "rectangle"}), volume)
    keep_out = _read_keep_out(r, m.get("keep_out", []))
    time = _read_time(r, m.get("time_model", {}), tech)
    materials = _read_materials(r, m.get("materials"), tech)
    change = r.number(m, "material_change_s", "", 0.0, minimum=0.0)
    post = _read_post(r, m.get("post_processing", []))
    if r.problems:
        raise InputError("\n".join(map(str, r.problems)))
    return PlateProfile(name=name, file=str(path), technology=tech, build_volume=volume,
                        plate_shape=shape, plate_points=points, keep_out=keep_out,
                        spacing=spacing, margin=margin, time=time, materials=materials,
                        material_change_s=change, post_processing=post)


def _read_plate(r: Reader, value, volume) -> tuple[str, tuple]:
    m = r.mapping(value, "plate", allowed={"shape", "points"}, required={"shape"})
    if m is None:
        return "rectangle", ()
    shape = r.choice(m, "shape", "plate", ("rectangle", "circle", "polygon")) or "rectangle"
    points: tuple = ()
    if shape == "polygon":
        raw = m.get("points")
        if not isinstance(raw, list) or len(raw) < 3:
            r.report("plate.points", "a polygon plate needs a list of at least 3 [x, y] corners")
        else:
            pts = []
            for i, p in enumerate(raw):
                ok = isinstance(p, list) and len(p) == 2 and all(
                    isinstance(v, (int, float)) and not isinstance(v, bool) for v in p)
                if not ok:
                    r.report(f"plate.points[{i}]", "must be [x, y] in mm")
                    return shape, ()
                pts.append((float(p[0]), float(p[1])))
            poly = Polygon(pts)
            if not poly.is_valid or poly.area <= 0:
                r.report("plate.points", "the corners do not make a simple polygon")
            elif volume and not box(0, 0, *volume[:2]).buffer(1e-9).covers(poly):
                r.report("plate.points", "the polygon leaves the build volume's x-y extent")
            points = tuple(pts)
    elif "points" in m:
        r.report("plate.points", f"only polygon plates take points, this plate is a {shape}")
    return shape, points


def _read_keep_out(r: Reader, value) -> tuple:
    if not isinstance(value, list):
        r.report("keep_out", "must be a list of rectangles [x0, y0, x1, y1]")
        return ()
    out = []
    for i, rect in enumerate(value):
        ok = isinstance(rect, list) and len(rect) == 4 and all(
            isinstance(v, (int, float)) and not isinstance(v, bool) for v in rect)
        if not ok or rect[2] <= rect[0] or rect[3] <= rect[1]:
            r.report(f"keep_out[{i}]", "must be [x0, y0, x1, y1] with x1 > x0 and y1 > y0")
            continue
        out.append(tuple(float(v) for v in rect))
    return tuple(out)


def _read_time(r: Reader, value, tech: str | None):
    if tech is None:
        return None
    model = TIME_MODELS[tech]
    names = {f.name: f for f in fields(model)}
    m = r.mapping(value, "time_model", allowed=set(names))
    if m is None:
        return model()
    kwargs = {}
    for key in m:
        if key not in names:
            continue
        integer = names[key].type in ("int", int)
        v = r.number(m, key, "time_model", minimum=0.0, integer=integer)
        if v is not None:
            kwargs[key] = v
    return model(**kwargs)


def _read_materials(r: Reader, value, tech: str | None) -> tuple[Material, ...]:
    if not isinstance(value, dict) or not value:
        r.report("materials", "must be a mapping of material name to {density: g/cm3}")
        return ()
    out = []
    for name, spec in value.items():
        where = f"materials.{name}"
        allowed = {"density", "powder_density"} if tech == "powder" else {"density"}
        m = r.mapping(spec, where, allowed=allowed, required={"density"})
        if m is None:
            continue
        density = r.number(m, "density", where, above=0.0)
        powder = r.number(m, "powder_density", where, None, above=0.0)
        if density is not None:
            out.append(Material(str(name), density, powder))
    return tuple(out)


def usable_area(profile: PlateProfile, margin: float) -> float:
    """What is left for parts once ``margin`` is kept from the edge and keep-out zones.

    mm2 of plate for filament and resin plates, mm3 of build volume for powder;
    0 when the margin leaves nothing.
    """
    x, y, z = profile.build_volume
    if profile.technology == "powder":
        sides = [v - 2 * margin for v in (x, y, z)]
        return float(sides[0] * sides[1] * sides[2]) if min(sides) > 0 else 0.0
    if profile.plate_shape == "circle":
        plate = Point(x / 2, y / 2).buffer(min(x, y) / 2, quad_segs=24)
    elif profile.plate_shape == "polygon":
        plate = Polygon(profile.plate_points)
    else:
        plate = box(0.0, 0.0, x, y)
    inner = plate.buffer(-margin, join_style="mitre") if margin > 0 else plate
    for rect in profile.keep_out:
        if inner.is_empty:
            break
        inner = inner.difference(box(*rect).buffer(margin, join_style="mitre") if margin > 0 else box(*rect))
    return float(inner.area)


def _read_post(r: Reader, value) -> tuple[PostStep, ...]:
    if not isinstance(value, list):
        r.report("post_processing", "must be a list of {step, duration_s, operator}")
        return ()
    out = []
    for i, spec in enumerate(value):
        where = f"post_processing[{i}]"
        m = r.mapping(spec, where, allowed={"step", "duration_s", "operator"}, required={"step", "duration_s"})
        if m is None:
            continue
        step = r.text(m, "step", where)
        duration = r.number(m, "duration_s", where, minimum=0.0)
        operator = m.get("operator", True)
        if not isinstance(operator, bool):
            r.report(f"{where}.operator", f"must be true or false, got {operator!r}")
            continue
        if step is not None and duration is not None:
            out.append(PostStep(step, duration, operator))
    return tuple(out)
