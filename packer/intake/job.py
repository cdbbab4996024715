"""Job files (``jobs/*.yaml``): a day's orders, the fleet and the rules.

Loading validates the whole file and reports every problem at once, each
naming the file, the line and the key path. A problem confined to one order
line (missing mesh, unknown material, bad quantity) does not stop the job: the
line is kept out, and its copies, when it has any, are listed as unplaced with
the reason. Problems that leave nothing to plan raise :class:`InputError`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import datetime, time
from pathlib import Path

from packer.errors import InputError
from packer.intake.fields import Reader
from packer.limits import LimitError, env_name
from packer.intake.orders import MESH_KEYS, MESH_SUFFIXES, Line, Order, check_materials, read_orders
from packer.intake.profile import PROFILE_NAME, PlateProfile, load_profile, usable_area
from packer.intake.source import Problem, key_path, load_yaml, shown

__all__ = ["Line", "Order", "Printer", "Rules", "Calendar", "Job", "load_job", "read_orders", "check_materials",
           "MESH_SUFFIXES", "MESH_KEYS", "DAY_NAMES"]

DAY_NAMES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


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


_TOP = {"name", "start", "plates_folder", "mesh_roots", "rules", "calendar", "fleet", "orders", "notes", "units",
        "meshes", "repair"}
_PRINTER = {"name", "profile", "available_from", "materials"}


def load_job(path: str | Path, *, plates_dir: str | Path | None = None) -> Job:
    """Load and validate a job file.

    Parameters
    ----------
    path
        The job YAML file. Mesh paths resolve from its folder and must lie
        inside it or inside a folder listed under ``mesh_roots``.
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
        When nothing could be planned (bad YAML, no usable printer, no order
        line without a problem); the message lists every problem found.
    LimitError
        When the job is over a limit as a whole (file size, YAML depth or
        values, copies per job).
    """
    path = Path(path)
    doc = load_yaml(path)
    r = Reader(doc)
    top = r.mapping(doc.data, "", allowed=_TOP, required={"fleet", "orders"})
    if top is None:
        raise InputError("\n".join(map(str, r.problems)))
    name = r.text(top, "name", "", path.stem[:r.limits.text_chars]) or path.stem[:r.limits.text_chars]
    start = r.moment(top, "start", "", None)
    rules = _read_rules(r, top.get("rules", {}))
    calendar = _read_calendar(r, top.get("calendar", {}))
    folder = _plates_folder(path, r.path_text(top, "plates_folder", ""), plates_dir)
    fleet = _read_fleet(r, top.get("fleet"), folder, start)
    if start is None:
        start = min((p.available_from for p in fleet if p.available_from), default=None) or datetime.now().replace(
            minute=0, second=0, microsecond=0)
    fleet = _with_room(r, tuple(p if p.available_from else _with_start(p, start) for p in fleet), rules)
    roots = _mesh_roots(r, top.get("mesh_roots"), path.parent)
    mesh_defaults = {k: r.choice(top, k, "", options, None) for k, options in MESH_KEYS.items()}
    mesh_defaults["repair"] = r.flag(top, "repair", "", None)
    orders = check_materials(r, read_orders(r, top.get("orders"), path.parent, roots=roots, start=start,
                                            defaults=mesh_defaults), fleet)
    total = sum(ln.quantity for o in orders for ln in o.lines)
    if total > r.limits.copies_per_job:
        raise LimitError("\n".join([*map(str, r.problems), f"{path}: {total} copies in the job, more than the limit "
                                    f"of {r.limits.copies_per_job} ({env_name('copies_per_job')}); split the job"]))
    plannable = any(ln.problem is None for o in orders for ln in o.lines)
    fatal = [msg for msg, bad in (("no usable printer in the fleet", not fleet),
                                  ("no order line without a problem: nothing to plan", not plannable)) if bad]
    if fatal:
        problems = list(map(str, r.problems)) + [f"{path}: {m}" for m in fatal]
        raise InputError("\n".join(problems))
    return Job(name=str(name), file=str(path), start=start, orders=orders, fleet=fleet,
               rules=rules, calendar=calendar, problems=tuple(r.problems))


def _mesh_roots(r: Reader, value, base: Path) -> tuple[Path, ...]:
    """The job's folder plus the folders listed under ``mesh_roots`` (relative to it), resolved."""
    roots = [base.resolve()]
    if value is None:
        return tuple(roots)
    if not isinstance(value, list):
        r.report("mesh_roots", "must be a list of folders (relative to the job file's folder)")
        return tuple(roots)
    for i, raw in enumerate(value):
        where = key_path("mesh_roots", i)
        text = r.path_text({"x": raw}, "x", where)
        if text is None:
            continue
        try:
            folder = (base / text).resolve()
        except (OSError, ValueError, RuntimeError) as exc:
            r.report(where, f"cannot resolve {shown(text)} ({exc})")
            continue
        if not folder.is_dir():
            r.report(where, f"not a folder: {shown(str(folder), limit=200)}")
            continue
        roots.append(folder)
    return tuple(roots)


def _with_room(r: Reader, fleet: tuple, rules: Rules) -> tuple:
    """Printers whose plate keeps some area free of the margin; the others are reported and left out."""
    kept = []
    for p in fleet:
        margin = rules.margin_for(p.profile)
        spacing = rules.spacing_for(p.profile)
        where = "rules.margin" if rules.margin is not None else "fleet"
        if usable_area(p.profile, margin) <= 0:
            r.report(where, f"a margin of {margin:g} mm leaves no usable area on the plate of profile "
                            f"'{p.profile.name}' ({p.profile.file}); printer '{p.name}' is left out")
            continue
        if spacing > max(p.profile.build_volume):
            where = "rules.spacing" if rules.spacing is not None else "fleet"
            r.report(where, f"a spacing of {spacing:g} mm is larger than the build volume of profile "
                            f"'{p.profile.name}' ({p.profile.file}); printer '{p.name}' is left out")
            continue
        kept.append(p)
    return tuple(kept)


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
        if prof_name is not None and not re.fullmatch(PROFILE_NAME, prof_name):
            r.report(key_path(where, "profile"), f"a profile is named, not given as a path: {shown(prof_name)} "
                                                 "(letters, digits, '.', '_', '+', '-'; not starting with '.')")
            prof_name = None
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
        r.report(where, f"unknown profile {shown(name)} (looked in {folder}; known: {', '.join(known) or 'none'})")
        return None
    try:
        return load_profile(found)
    except InputError as exc:
        r.report(where, f"profile '{name}' is invalid:\n  " + str(exc).replace("\n", "\n  "))
        return None
