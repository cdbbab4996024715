"""Plan versions in an output folder, and reading a written plan back.

The first plan lives in ``OUTDIR`` (version 1); replans write ``OUTDIR/v2/``,
``OUTDIR/v3/``... and point ``OUTDIR/latest`` at the newest (a symlink, or a
small text file naming the folder where symlinks are not allowed). A version
is never overwritten. Each replanned ``plan.json`` carries a ``replan``
section: the events applied, the orders added and cancelled, printer down
windows, the next plate number and the digest of version 1, so a folder whose
first plan was replaced (``packer plan --force``) is not replanned against
stale versions.
"""

from __future__ import annotations

import hashlib
import os
import re
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Sequence

import numpy as np

from packer.errors import InputError
from packer.fleet.planner import CopyRef
from packer.fleet.timemodel import part_mass_g
from packer.intake.cache import CACHE_DIR
from packer.intake.identity import copy_key
from packer.intake.job import Job, Line, Order, load_job
from packer.pipeline import catalog, expand_copies, intake
from packer.output.plan import PlacedCopy, UnplacedCopy, entry_key, plate_from_dict, read_plan_json
from packer.replan.events import Down
from packer.replan.state import PlanState, PlateState

__all__ = ["Written", "versions", "load_written", "set_latest", "digest", "order_to_dict", "order_from_dict"]


@dataclass(frozen=True)
class Written:
    """A written plan version, read back.

    Attributes
    ----------
    outdir : Path
        The plan's output folder (version 1 lives here).
    folder : Path
        The folder of this version's plan.json.
    version : int
    data : dict
        plan.json as read.
    job : Job
        The job file's job plus the orders added by earlier replans.
    parts, kinds, stats
        Parts per :class:`~packer.intake.identity.PartId`; the
        :class:`~packer.intake.identity.PartKind` of each ``CopyRef.kind``; ``stats[kind]``.
    refs : dict
        Copy key -> :class:`CopyRef` for every copy that can be planned.
    fixed_unplaced : tuple of UnplacedCopy
        Copies kept out by a problem of their order line (mesh missing or rejected).
    state : PlanState
    plates : dict
        Plate id -> :class:`PlatePlan` of this version (failed plates included).
    added : list of dict
        Orders added by earlier replans (plan.json form).
    new_orders, new_problems
        Orders added now and the problems of their files.
    new_groups : tuple of tuple of str
        Ids of the orders of each added file, in the order of ``added_files``.
    """

    outdir: Path
    folder: Path
    version: int
    data: dict
    job: Job
    parts: dict
    kinds: list
    stats: list
    refs: dict
    fixed_unplaced: tuple
    state: PlanState
    plates: dict
    added: list
    new_orders: tuple = ()
    new_problems: tuple = ()
    new_groups: tuple = ()


def digest(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def versions(outdir: Path) -> list[int]:
    """Version numbers present in ``outdir`` (1 is ``outdir/plan.json``)."""
    outdir = Path(outdir)
    found = [1] if (outdir / "plan.json").is_file() else []
    for d in outdir.glob("v*"):
        m = re.fullmatch(r"v(\d+)", d.name)
        if m and int(m.group(1)) >= 2 and (d / "plan.json").is_file():
            found.append(int(m.group(1)))
    return sorted(found)


def folder_of(outdir: Path, version: int) -> Path:
    return Path(outdir) if version == 1 else Path(outdir) / f"v{version}"


def set_latest(outdir: Path, version: int) -> str:
    """Point ``outdir/latest`` at a version; returns "symlink" or "text file"."""
    link = Path(outdir) / "latest"
    target = "." if version == 1 else f"v{version}"
    if link.is_symlink() or link.is_file():
        link.unlink()
    try:
        os.symlink(target, link, target_is_directory=True)
        return "symlink"
    except OSError:
        link.write_text(target + "\n", encoding="utf-8")
        return "text file"


def _moment(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None


def order_to_dict(order: Order, root: Path) -> dict:
    return {"id": order.id, "due": order.due.isoformat(timespec="seconds"), "priority": order.priority,
            "lines": [{"part": ln.part, "mesh": Path(os.path.relpath(ln.mesh, root)).as_posix(),
                       "quantity": ln.quantity, "material": ln.material, "rotations": list(ln.rotations),
                       "as_modelled": ln.lock_orientation, "problem": ln.problem,
                       "units": ln.units, "meshes": ln.meshes, "repair": ln.repair} for ln in order.lines]}


def order_from_dict(d: dict, root: Path) -> Order:
    lines = tuple(Line(part=ln["part"], mesh=(root / ln["mesh"]).resolve(), quantity=int(ln["quantity"]),
                       material=ln["material"], rotations=tuple(float(a) for a in ln["rotations"]),
                       lock_orientation=bool(ln["as_modelled"]), where=f"added order {d['id']}",
                       problem=ln.get("problem"), units=ln.get("units"), meshes=ln.get("meshes") or "plan",
                       repair=bool(ln.get("repair", False)))
                  for ln in d["lines"])
    return Order(d["id"], _moment(d["due"]), int(d["priority"]), lines)


def load_written(outdir: Path, *, plates_dir: Path | None = None, added_files: Sequence[Path] = ()) -> Written:
    """Read the newest plan version of ``outdir`` back, with its job and parts.

    ``added_files``: orders files added now (job-file schema); their orders join
    the job, their copies get part keys after the plan's own, and they are
    listed in ``new_orders`` (their copies are not expected in the plan yet).

    Raises
    ------
    InputError
        If there is no plan, version 1 was replaced after later versions were
        made, the job file is gone, or the job no longer matches the plan.
    """
    outdir = Path(outdir)
    found = versions(outdir)
    if not found or found[0] != 1:
        raise InputError(f"{outdir}: no plan.json here; run 'packer plan JOB -o {outdir}' first")
    version = found[-1]
    folder = folder_of(outdir, version)
    data = read_plan_json(folder)
    rp = data.get("replan", {})
    if version > 1 and rp.get("root_sha256") != digest(outdir / "plan.json"):
        raise InputError(f"{outdir}/plan.json was replaced after v{version} was made from it; move the "
                         f"v2..v{version} folders away or plan into a new folder")
    job_path = (folder / data["job_file"]).resolve()
    if not job_path.is_file():
        raise InputError(f"{folder / 'plan.json'}: its job file {job_path} is gone; the plan cannot be replanned")
    job = load_job(job_path, plates_dir=plates_dir)
    added = list(rp.get("added_orders", []))
    job = replace(job, orders=job.orders + tuple(order_from_dict(d, folder) for d in added))
    new_orders, new_problems, groups = [], [], []
    for f in added_files:
        from packer.replan.added import read_added_orders
        orders, probs = read_added_orders(f, replace(job, orders=job.orders + tuple(new_orders)))
        new_orders += orders
        new_problems += probs
        groups.append(tuple(o.id for o in orders))
    w = _read(outdir, folder, version, data, job, added, tuple(new_orders), tuple(new_problems))
    return replace(w, new_groups=tuple(groups))


def _read(outdir, folder, version, data, job, added, new_orders=(), new_problems=()) -> Written:
    rp = data.get("replan", {})
    fresh = {o.id for o in new_orders}
    job = replace(job, orders=job.orders + tuple(new_orders))
    parts, failures = intake(job, cache=Path(outdir) / CACHE_DIR)
    copies, line_unplaced, _ = expand_copies(job, parts, failures)
    table = catalog(copies, parts, later=fresh)
    kinds, stats, refs = table.kinds, table.stats, table.refs
    line_keys = {copy_key(u) for u in line_unplaced}
    printers = {p.name: p for p in job.fleet}
    cancelled = tuple(rp.get("cancelled", []))
    problems = []

    def ref(item: dict) -> CopyRef | None:
        k = entry_key(item)
        if k not in refs:
            problems.append(k.label)
            return None
        return replace(refs[k], boost=float(item.get("failures", 0)))

    plates, states = {}, []
    for d in list(data["plates"]) + list(rp.get("failed_plates", [])):
        if d["printer"] not in printers:
            raise InputError(f"{folder / 'plan.json'}: plate {d['id']} is on printer {d['printer']}, "
                             "which the job's fleet no longer has")
        prof = printers[d["printer"]].profile
        items, on = [], []
        for it in d["items"]:
            c = ref(it)
            if c is None:
                continue
            part_id = kinds[c.kind].part
            part = parts[part_id]
            items.append(PlacedCopy(c.order, c.part, c.copy, part_id.mesh, np.asarray(it["transform"], dtype=float),
                                    c.material, part.volume, part_mass_g(prof, c.material, stats[c.kind]),
                                    locked=part_id.locked, failures=int(it.get("failures", 0))))
            on.append(c)
        lost = tuple(c for c in (ref(it) for it in d.get("lost", [])) if c is not None)
        pp = plate_from_dict(d, items)
        plates[d["id"]] = pp
        states.append(PlateState(id=pp.id, printer=pp.printer, material=pp.material, copies=tuple(on),
                                 start=pp.start, end=pp.end, free=pp.free, machine_s=float(pp.print_s),
                                 clear_s=prof.time.clear_s, state=pp.state, lost=lost, assumed=pp.assumed,
                                 origin="kept"))
    unplaced, fixed = [], []
    for u in data["unplaced"]:
        k = entry_key(u)
        if k in line_keys:
            fixed.append(UnplacedCopy(*k, u["reason"]))
        else:
            c = ref(u)
            if c is not None:
                unplaced.append((c, u["reason"]))
    if problems:
        raise InputError(f"{folder / 'plan.json'}: copies not in the job any more (was the job file edited?): "
                         f"{', '.join(problems[:8])}")
    have = {copy_key(c) for s in states for c in s.copies} | {copy_key(c) for c, _ in unplaced}
    want = {k for k in refs if k[0] not in cancelled and k[0] not in fresh}
    if want - have:
        raise InputError(f"{folder / 'plan.json'}: copies of the job missing from the plan (was the job file "
                         f"edited?): {', '.join(k.label for k in sorted(want - have)[:8])}")
    numbers = [int(s.id[1:]) for s in states if s.id[1:].isdigit()]
    state = PlanState(start=_moment(data["start"]), plates=tuple(states), unplaced=tuple(unplaced),
                      now=_moment(rp.get("now")), cancelled=cancelled,
                      down=tuple(Down(d["printer"], _moment(d["from"]), _moment(d["until"]), d.get("origin", ""))
                                 for d in rp.get("down", [])),
                      next_number=int(rp.get("next_plate", max(numbers, default=0) + 1)))
    fixed += [u for u in line_unplaced if u.order in fresh]
    return Written(outdir=Path(outdir), folder=folder, version=version, data=data, job=job, parts=parts,
                   kinds=kinds, stats=stats, refs=refs, fixed_unplaced=tuple(fixed), state=state,
                   plates=plates, added=added, new_orders=tuple(new_orders), new_problems=tuple(new_problems))
