"""The plan: plates with their timeline, plus the copies that could not be placed.

Plain data and its ``plan.json`` form. The JSON follows the plan contract: every
ordered copy appears once, on a plate or in ``unplaced`` with a reason;
``transform`` maps the source mesh (mm) to plate coordinates; ``mesh`` and
``file`` are relative to the folder of plan.json.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field, replace
from datetime import datetime
from pathlib import Path
from typing import Sequence

import numpy as np

from packer.intake.identity import CopyKey, PartId

__all__ = ["PlacedCopy", "LostCopy", "PlatePlan", "UnplacedCopy", "OrderStatus", "Plan", "plan_to_dict",
           "write_plan_json", "read_plan_json", "plate_from_dict", "entry_key", "plate_id", "name_plates"]


@dataclass(frozen=True)
class PlacedCopy:
    order: str
    part: str
    copy: int
    mesh: Path                 # source mesh file; relative: a mesh packer writes into the plan's folder (repaired)
    transform: np.ndarray      # (4, 4) source mesh -> plate coordinates
    material: str
    volume_mm3: float
    mass_g: float
    locked: bool = False       # printed as modelled (orientation locked by the order)
    failures: int = 0          # plates this copy was on that failed before (a replan plans it first)

    @property
    def part_id(self) -> PartId:
        """Which loaded part this is (the key of a plan's parts)."""
        return PartId(self.mesh, self.locked)


@dataclass(frozen=True)
class LostCopy:
    """A copy lost when its plate failed (printed again on another plate)."""

    order: str
    part: str
    copy: int
    failures: int = 0          # plates it was on that failed before this one


@dataclass(frozen=True)
class PlatePlan:
    id: str
    printer: str
    profile: str
    technology: str
    material: str
    volume: tuple[float, float, float]
    spacing: float
    margin: float
    items: tuple[PlacedCopy, ...]
    start: datetime
    end: datetime                  # print done
    free: datetime                 # printer free again (parts cleared)
    height_mm: float               # tallest part (filament, resin) or build height (powder)
    utilization: float             # area share of the plate (2D) or volume share of the used build (powder)
    print_s: float
    mass_g: float
    time_terms: dict[str, float] = field(default_factory=dict)
    file: str = ""                 # plate file, relative to plan.json's folder
    state: str = "planned"         # planned | printing | finished | failed
    state_at: datetime | None = None   # planned: when it was planned; printing: since; finished, failed: at
    lost: tuple[LostCopy, ...] = ()   # failed plate: the copies lost
    lost_mass_g: float = 0.0       # failed plate: material of the lost copies
    note: str = ""                 # why an under-filled plate stays ("kept: the planning budget ran out ...")
    change_s: float = 0.0          # material change on the printer just before the plate (s)
    change_from: str = ""          # the material the printer ran before that change
    post: tuple[tuple[str, float, bool], ...] = ()   # post-processing steps: (step, s, needs an operator)
    done: datetime | None = None   # parts through post-processing (None: same as free)
    assumed: bool = False          # the state was taken, not reported (the plate ran as planned)


@dataclass(frozen=True)
class UnplacedCopy:
    order: str
    part: str
    copy: int
    reason: str
    failures: int = 0              # plates it was on that failed


@dataclass(frozen=True)
class OrderStatus:
    order: str
    due: datetime
    priority: int
    copies: int
    placed: int
    done: datetime | None          # when its last placed copy is through post-processing
    cancelled: bool = False        # the order was cancelled (its printed copies stay on their plates)

    @property
    def late_s(self) -> float:
        if self.done is None or self.cancelled:
            return 0.0
        return max(0.0, (self.done - self.due).total_seconds())


@dataclass(frozen=True)
class Plan:
    job: str
    job_file: str
    start: datetime
    plates: tuple[PlatePlan, ...]
    unplaced: tuple[UnplacedCopy, ...]
    orders: tuple[OrderStatus, ...]
    problems: tuple[str, ...] = ()
    bounds: dict = field(default_factory=dict)
    stats: dict = field(default_factory=dict)     # the planner's figures (plan.json ``notes``)
    version: int = 1               # 1: the first plan; 2, 3...: replans
    now: datetime | None = None    # the moment of the replan that made this version
    cancelled: dict = field(default_factory=dict)   # cancelled order -> what to do with its copies (stock, scrap)
    records: tuple[PlatePlan, ...] = ()   # failed plates with no survivor: in the report, not in ``plates``
    parts: tuple[dict, ...] = ()   # the parts table, one row per mesh (packer/output/partstable.py)


def plate_id(number: int, width: int = 2) -> str:
    """The id users see of plate ``number`` (from 1): ``P01``, ``P02``... (at least ``width`` digits)."""
    return f"P{number:0{width}d}"


def name_plates(plates: Sequence[PlatePlan]) -> list[PlatePlan]:
    """The plates of a first plan named ``P01``... in start order (then printer), with their files."""
    ordered = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(ordered))))
    return [replace(p, id=plate_id(k + 1, width), file=f"plates/{plate_id(k + 1, width)}.3mf")
            for k, p in enumerate(ordered)]


def _rel(path: Path | str, root: Path) -> str:
    """``path`` relative to ``root``; a relative path already is (a file packer writes into the plan's folder)."""
    if not Path(path).is_absolute():
        return Path(path).as_posix()
    return Path(os.path.relpath(Path(path).resolve(), root.resolve())).as_posix()


def _moment(t: datetime | None) -> str | None:
    return t.isoformat(timespec="seconds") if t else None


def plan_to_dict(plan: Plan, root: Path) -> dict:
    """The plan as the JSON contract wants it, paths relative to ``root``."""
    plates = []
    for p in plan.plates:
        plates.append({
            "id": p.id, "printer": p.printer, "profile": p.profile, "technology": p.technology,
            "material": p.material, "volume": list(p.volume), "spacing": p.spacing, "margin": p.margin,
            "file": p.file, "start": _moment(p.start), "end": _moment(p.end), "free": _moment(p.free),
            "height": round(p.height_mm, 3), "utilization": round(p.utilization, 5),
            "print_seconds": round(p.print_s, 1), "mass_g": round(p.mass_g, 2),
            "time_terms": {k: round(v, 1) for k, v in p.time_terms.items()},
            **({"note": p.note} if p.note else {}),
            **({"material_change": {"seconds": round(p.change_s, 1), "from": p.change_from}} if p.change_s else {}),
            **({"post_processing": [{"step": a, "seconds": round(b, 1), "operator": c} for a, b, c in p.post],
                "post_done": _moment(p.done)} if p.post else {}),
            "state": p.state, "state_at": _moment(p.state_at or plan.now or plan.start),
            "items": [_item(c, root, plan.cancelled) for c in p.items],
            **({"assumed": True} if p.assumed else {}),
            **({"lost": [_lost(c) for c in p.lost], "lost_mass_g": round(p.lost_mass_g, 2)} if p.lost else {}),
        })
    return {
        "job": plan.job, "job_file": _rel(Path(plan.job_file).resolve(), root), "start": _moment(plan.start),
        "plates": plates,
        "unplaced": [{"order": u.order, "part": u.part, "copy": u.copy, "reason": u.reason,
                      **({"failures": u.failures} if u.failures else {})} for u in plan.unplaced],
        "orders": [dict({"order": o.order, "due": _moment(o.due), "priority": o.priority, "copies": o.copies,
                         "placed": o.placed, "done": _moment(o.done), "late_minutes": round(o.late_s / 60, 1)},
                        **({"cancelled": True} if o.cancelled else {}))
                   for o in plan.orders],
        "problems": list(plan.problems),
        "bounds": plan.bounds,
        "notes": plan.stats,
        "parts": [{**row, "file": _rel(row["file"], root)} for row in plan.parts],
    }


def _item(c: PlacedCopy, root: Path, cancelled: dict) -> dict:
    d = {"order": c.order, "part": c.part, "copy": c.copy, "mesh": _rel(c.mesh, root), "material": c.material,
         "transform": [[round(float(v), 6) for v in row] for row in c.transform]}
    if c.order in cancelled:
        d["cancelled"] = cancelled[c.order]        # what to do with the copy: stock or scrap
    if c.failures:
        d["failures"] = c.failures
    return d


def _lost(c: LostCopy) -> dict:
    return {"order": c.order, "part": c.part, "copy": c.copy, "failures": c.failures}


def entry_key(d: dict) -> CopyKey:
    """The copy a plan.json entry names (an item, an unplaced or a lost copy)."""
    return CopyKey(str(d["order"]), str(d["part"]), int(d["copy"]))


def _when(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None


def plate_from_dict(d: dict, items: Sequence[PlacedCopy]) -> PlatePlan:
    """A plate of plan.json read back, with its ``items`` (the caller makes them from the
    entries and the parts: mesh, volume and mass are not in plan.json)."""
    return PlatePlan(id=d["id"], printer=d["printer"], profile=d["profile"], technology=d["technology"],
                     material=d["material"], volume=tuple(d["volume"]), spacing=d["spacing"], margin=d["margin"],
                     items=tuple(items), start=_when(d["start"]), end=_when(d["end"]), free=_when(d["free"]),
                     height_mm=d["height"], utilization=d["utilization"], print_s=d["print_seconds"],
                     mass_g=d["mass_g"], time_terms=d["time_terms"], file=d.get("file") or "",
                     state=d.get("state", "planned"), state_at=_when(d.get("state_at")),
                     lost=tuple(LostCopy(*entry_key(x), failures=int(x.get("failures", 0))) for x in d.get("lost", [])),
                     lost_mass_g=float(d.get("lost_mass_g", 0.0)), assumed=bool(d.get("assumed", False)))


def read_plan_json(folder: Path) -> dict:
    """plan.json of ``folder`` as written."""
    return json.loads((Path(folder) / "plan.json").read_text(encoding="utf-8"))


def write_plan_json(plan: Plan, outdir: Path, *, extra: dict | None = None) -> Path:
    """plan.json into ``outdir``; ``extra`` sections (a replan's ``replan``) follow the plan's own."""
    path = Path(outdir) / "plan.json"
    path.write_text(json.dumps({**plan_to_dict(plan, Path(outdir)), **(extra or {})}, indent=1) + "\n",
                    encoding="utf-8")
    return path
