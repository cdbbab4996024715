"""Job files (``jobs/*.yaml``): a day's orders, the fleet and the rules.

Loading validates the whole file and reports every problem at once, each
naming the file, the line and the key path. A problem confined to one order
line (missing mesh, unknown material, bad quantity) does not stop the job: the
line is kept out, and its copies, when it has any, are listed as unplaced with
the reason. Problems that leave nothing to plan raise :class:`InputError`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import datetime, time
from pathlib import Path

from packer.errors import InputError
from packer.fields import Reader
from packer.profile import PlateProfile, load_profile
from packer.source import Problem, key_path, load_yaml

__all__ = ["Line", "Order", "Printer", "Rules", "Calendar", "Job", "load_job", "read_orders", "check_materials",
           "MESH_SUFFIXES", "DAY_NAMES"]

MESH_SUFFIXES = (".stl", ".obj", ".ply", ".3mf")
DAY_NAMES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


@dataclass(frozen=True)
class Line:
    """One line of an order: a part mesh, how many copies, in which material."""

    part: str                         # part name, unique within the order
    mesh: Path                        # resolved from the job file's folder
    quantity: int
    material: str
    rotations: tuple[float, ...]      # allowed turns about z, degrees
    lock_orientation: bool            # keep the mesh as modelled (no lay-flat)
    where: str                        # key path in the job file, for messages
    problem: str | None = None        # why its copies cannot be planned, if so
    line_no: int | None = None        # line of the mesh key in the job file
    units: str | None = None          # unit of a mesh file without one (mm, cm, m, inch); None: mm
    meshes: str = "plan"              # "strict": refuse meshes with caution-class defects too


@dataclass(frozen=True)
class Order:
    id: str
    due: datetime
    priority: int
    lines: tuple[Line, ...]


@dataclass(frozen=True)
class Printer:
    name: str
    profile: PlateProfile
    available_from: datetime
    materials: tuple[str, ...]        # what it is set up to run (default: all of its profile's)


CANCELLED_COPIES = ("stock", "scrap")
"""What is done with copies of a cancelled order that are printed or printing: kept as stock or scrapped."""


@dataclass(frozen=True)
class Rules:
    """Spacing and margin overrides for the whole job (None: the profile's default)."""

    spacing: float | None = None
    margin: float | None = None
    cancelled_copies: str = "stock"   # what to do with printed copies of a cancelled order: stock | scrap

    def spacing_for(self, profile: PlateProfile) -> float:
        return profile.spacing if self.spacing is None else self.spacing

    def margin_for(self, profile: PlateProfile) -> float:
        return profile.margin if self.margin is None else self.margin


@dataclass(frozen=True)
class Calendar:
    """When operators are present to start and clear plates."""

    shift_start: time = time(7, 0)
    shift_end: time = time(19, 0)
    days: tuple[int, ...] = (0, 1, 2, 3, 4)   # Monday = 0


@dataclass(frozen=True)
class Job:
    name: str
    file: str
    start: datetime
    orders: tuple[Order, ...]
    fleet: tuple[Printer, ...]
    rules: Rules
    calendar: Calendar
    problems: tuple[Problem, ...] = field(default=())


_TOP = {"name", "start", "plates_folder", "rules", "calendar", "fleet", "orders", "notes", "units", "meshes"}
_ORDER = {"id", "due", "priority", "lines", "notes"}
_LINE = {"part", "mesh", "quantity", "material", "rotations", "orientation", "units", "meshes"}
#: Mesh intake keys a line takes, with the job-level value as its default (packer/mesh/).
MESH_KEYS = {"units": ("mm", "cm", "m", "inch"), "meshes": ("plan", "strict")}
_PRINTER = {"name", "profile", "available_from", "materials"}


def load_job(path: str | Path, *, plates_dir: str | Path | None = None) -> Job:
    """Load and validate a job file.

    Parameters
    ----------
    path
        The job YAML file. Mesh paths resolve from its folder.
    plates_dir
        Folder of plate profiles; default: ``plates_folder`` in the job, else
        ``../plates`` beside the job's folder, else ``plates`` in the working folder.

    Returns
    -------
    Job
        With ``problems`` listing what was wrong but did not stop planning.

    Raises
    ------
    InputError
        When nothing could be planned (bad YAML, no usable printer, no order);
        the message lists every problem found.
    """
    path = Path(path)
    doc = load_yaml(path)
    r = Reader(doc)
    top = r.mapping(doc.data, "", allowed=_TOP, required={"fleet", "orders"})
    if top is None:
        raise InputError("\n".join(map(str, r.problems)))
    name = r.text(top, "name", "", path.stem) or path.stem
    start = r.moment(top, "start", "", None)
    rules = _read_rules(r, top.get("rules", {}))
    calendar = _read_calendar(r, top.get("calendar", {}))
    folder = _plates_folder(path, top.get("plates_folder"), plates_dir)
    fleet = _read_fleet(r, top.get("fleet"), folder, start)
    mesh_defaults = {k: r.choice(top, k, "", options, None) for k, options in MESH_KEYS.items()}
    orders = read_orders(r, top.get("orders"), path.parent, defaults=mesh_defaults)
    if start is None:
        start = min((p.available_from for p in fleet), default=None) or datetime.now().replace(
            minute=0, second=0, microsecond=0)
    fleet = tuple(p if p.available_from else _with_start(p, start) for p in fleet)
    orders = check_materials(r, orders, fleet)
    fatal = [msg for msg, bad in (("no usable printer in the fleet", not fleet),
                                  ("no usable order", not orders)) if bad]
    if fatal:
        problems = list(map(str, r.problems)) + [f"{path}: {m}" for m in fatal]
        raise InputError("\n".join(problems))
    return Job(name=str(name), file=str(path), start=start, orders=orders, fleet=fleet,
               rules=rules, calendar=calendar, problems=tuple(r.problems))


def check_materials(r: Reader, orders: tuple[Order, ...], fleet: tuple[Printer, ...]) -> tuple[Order, ...]:
    """Mark lines whose material no printer of the fleet runs."""
    if not fleet:
        return orders
    runs = sorted({m for p in fleet for m in p.materials})
    out = []
    for order in orders:
        lines = []
        for line in order.lines:
            if line.problem is None and line.material not in runs:
                why = f"no printer in the fleet runs material '{line.material}' (fleet runs: {', '.join(runs)})"
                r.report(key_path(line.where, "material"), why)
                line = replace(line, problem=why)
            lines.append(line)
        out.append(replace(order, lines=tuple(lines)))
    return tuple(out)


def _with_start(p: Printer, start: datetime) -> Printer:
    return Printer(p.name, p.profile, start, p.materials)


def _plates_folder(job_path: Path, given, override) -> Path:
    if override is not None:
        return Path(override)
    if given:
        return (job_path.parent / str(given)).resolve()
    beside = job_path.resolve().parent.parent / "plates"
    return beside if beside.is_dir() else Path("plates").resolve()


def _read_rules(r: Reader, value) -> Rules:
    m = r.mapping(value, "rules", allowed={"spacing", "margin", "cancelled_copies"})
    if m is None:
        return Rules()
    return Rules(spacing=r.number(m, "spacing", "rules", None, minimum=0.0),
                 margin=r.number(m, "margin", "rules", None, minimum=0.0),
                 cancelled_copies=r.choice(m, "cancelled_copies", "rules", CANCELLED_COPIES, "stock") or "stock")


def _read_calendar(r: Reader, value) -> Calendar:
    m = r.mapping(value, "calendar", allowed={"shift", "days"})
    if m is None:
        return Calendar()
    cal = Calendar()
    shift = m.get("shift")
    if shift is not None:
        try:
            a, b = (time.fromisoformat(str(v)) for v in shift)
            if b <= a:
                raise ValueError
            cal = Calendar(a, b, cal.days)
        except (TypeError, ValueError):
            r.report("calendar.shift", "must be [start, end] like ['07:00', '19:00'] with end after start")
    days = m.get("days")
    if days is not None:
        if not isinstance(days, list) or not days or any(str(d).lower()[:3] not in DAY_NAMES for d in days):
            r.report("calendar.days", f"must be a list of day names from: {', '.join(DAY_NAMES)}")
        else:
            cal = Calendar(cal.shift_start, cal.shift_end,
                           tuple(sorted({DAY_NAMES.index(str(d).lower()[:3]) for d in days})))
    return cal


def _read_fleet(r: Reader, value, folder: Path, start) -> tuple[Printer, ...]:
    if not isinstance(value, list) or not value:
        r.report("fleet", "must be a list of printers, each with a name and a profile")
        return ()
    printers, names, profiles = [], set(), {}
    for i, raw in enumerate(value):
        where = key_path("fleet", i)
        m = r.mapping(raw, where, allowed=_PRINTER, required={"name", "profile"})
        if m is None:
            continue
        name = r.text(m, "name", where)
        prof_name = r.text(m, "profile", where)
        avail = r.moment(m, "available_from", where, None)
        if name in names:
            r.report(key_path(where, "name"), f"printer name '{name}' is used twice")
            continue
        if name is None or prof_name is None:
            continue
        names.add(name)
        if prof_name not in profiles:
            profiles[prof_name] = _find_profile(r, key_path(where, "profile"), folder, prof_name)
        profile = profiles[prof_name]
        if profile is None:
            continue
        mats = m.get("materials")
        known = tuple(x.name for x in profile.materials)
        if mats is None:
            mats = known
        elif not isinstance(mats, list) or any(str(x) not in known for x in mats):
            r.report(key_path(where, "materials"),
                     f"must be a list of materials of profile '{prof_name}': {', '.join(known)}")
            mats = known
        printers.append(Printer(name, profile, avail, tuple(str(x) for x in mats)))
    return tuple(printers)


def _find_profile(r: Reader, where: str, folder: Path, name: str) -> PlateProfile | None:
    candidates = [folder / f"{name}.yaml", folder / f"{name}.yml"]
    found = next((c for c in candidates if c.is_file()), None)
    if found is None:
        known = sorted(p.stem for p in folder.glob("*.y*ml")) if folder.is_dir() else []
        r.report(where, f"unknown profile '{name}' (looked in {folder}; known: {', '.join(known) or 'none'})")
        return None
    try:
        return load_profile(found)
    except InputError as exc:
        r.report(where, f"profile '{name}' is invalid:\n  " + str(exc).replace("\n", "\n  "))
        return None


def read_orders(r: Reader, value, base: Path, *, defaults: dict | None = None) -> tuple[Order, ...]:
    if not isinstance(value, list) or not value:
        r.report("orders", "must be a list of orders, each with an id, a due time and lines")
        return ()
    orders, ids = [], set()
    for i, raw in enumerate(value):
        where = key_path("orders", i)
        m = r.mapping(raw, where, allowed=_ORDER, required={"id", "due", "lines"})
        if m is None:
            continue
        oid = r.text(m, "id", where)
        due = r.moment(m, "due", where)
        priority = r.number(m, "priority", where, 1, minimum=1, integer=True)
        if oid in ids:
            r.report(key_path(where, "id"), f"order id '{oid}' is used twice")
            continue
        if oid is None or due is None:
            continue
        ids.add(oid)
        lines = _read_lines(r, m.get("lines"), key_path(where, "lines"), base, defaults or {})
        if lines:
            orders.append(Order(oid, due, int(priority or 1), lines))
    return tuple(orders)


def _read_lines(r: Reader, value, where: str, base: Path, defaults: dict) -> tuple[Line, ...]:
    if not isinstance(value, list) or not value:
        r.report(where, "must be a list of lines with mesh, quantity and material")
        return ()
    lines, parts = [], set()
    for i, raw in enumerate(value):
        at = key_path(where, i)
        m = r.mapping(raw, at, allowed=_LINE, required={"mesh", "quantity", "material"})
        if m is None:
            continue
        mesh = r.text(m, "mesh", at)
        qty = r.number(m, "quantity", at, minimum=1, integer=True)
        material = r.text(m, "material", at)
        rotations = _read_rotations(r, m, at)
        orient = r.choice(m, "orientation", at, ("lay-flat", "as-modelled"), "lay-flat")
        mesh_keys = {k: r.choice(m, k, at, options, defaults.get(k)) for k, options in MESH_KEYS.items()}
        if mesh is None or qty is None or material is None:
            continue
        mesh_path = (base / mesh).resolve()
        part = r.text(m, "part", at, Path(mesh).stem) or Path(mesh).stem
        if part in parts:
            r.report(key_path(at, "part"), f"part name '{part}' appears twice in this order; name the lines apart")
            continue
        parts.add(part)
        problem = None
        if mesh_path.suffix.lower() not in MESH_SUFFIXES:
            problem = f"mesh format '{mesh_path.suffix}' is not one of {', '.join(MESH_SUFFIXES)}"
        elif not mesh_path.is_file():
            problem = f"mesh file not found: {mesh_path}"
        if problem:
            r.report(key_path(at, "mesh"), problem)
        lines.append(Line(part=part, mesh=mesh_path, quantity=int(qty), material=material,
                          rotations=rotations, lock_orientation=(orient == "as-modelled"),
                          where=at, problem=problem, line_no=r.doc.line_of(key_path(at, "mesh")),
                          units=mesh_keys["units"], meshes=mesh_keys["meshes"] or "plan"))
    return tuple(lines)


def _read_rotations(r: Reader, m: dict, at: str) -> tuple[float, ...]:
    value = m.get("rotations", "quarter-turns")
    presets = {"quarter-turns": (0.0, 90.0, 180.0, 270.0), "none": (0.0,),
               "half-turns": (0.0, 180.0), "fine": tuple(float(a) for a in range(0, 360, 15))}
    if isinstance(value, str):
        if value in presets:
            return presets[value]
        r.report(key_path(at, "rotations"), f"must be one of {', '.join(presets)} or a list of angles in degrees")
        return presets["quarter-turns"]
    got = r.numbers(m, "rotations", at)
    if not got:
        return presets["quarter-turns"]
    return tuple(sorted({a % 360.0 for a in got}))
