"""Writing a replanned version: plan.json with plate states, plate files, report, changes.md.

A plate whose contents did not change keeps its id, its items (layout) and its
plate file, copied byte for byte from the version before; only new plates,
plates that lost cancelled copies and the survivors of a failed plate are
exported. The version is written into a temporary folder beside it and renamed
when complete (:class:`packer.output.write.StagedFolder`), so a cut-off run leaves no
half version behind.
"""

from __future__ import annotations

import os
from dataclasses import replace
from pathlib import Path
from typing import Sequence

from packer.errors import PackerError
from packer.fleet.planner import PlannedPlate
from packer.fleet.timemodel import plate_time
from packer.intake.cache import CACHE_DIR, store_parts
from packer.intake.identity import copy_key
from packer.output.plan import LostCopy, Plan, PlatePlan, UnplacedCopy, write_plan_json
from packer.output.report import write_reports
from packer.output.write import StagedFolder, write_plate_files, write_run_json
from packer.pipeline import order_status
from packer.replan.changes import changes_html, changes_markdown
from packer.replan.events import Cancelled, describe, event_to_dict
from packer.replan.state import PlanState, PlateState
from packer.replan.versions import Written, digest, folder_of, order_to_dict, set_latest

__all__ = ["plate_plans", "next_plan", "write_version", "changes_lines", "cancelled_copies"]


def _subset(old: PlatePlan, keep: Sequence, *, pid: str, file: str, parts: dict) -> PlatePlan:
    """``old`` with only the copies in ``keep`` (positions unchanged: spacing still holds)."""
    keys = {copy_key(c) for c in keep}
    items = tuple(i for i in old.items if copy_key(i) in keys)
    area = lambda it: parts[it.part_id].footprint.area  # noqa: E731
    share = sum(area(i) for i in items) / max(1e-9, sum(area(i) for i in old.items))
    util = old.utilization * (sum(i.volume_mm3 for i in items) / max(1e-9, sum(i.volume_mm3 for i in old.items))
                              if old.technology == "powder" else share)
    return replace(old, id=pid, items=items, file=file, utilization=util,
                   mass_g=old.mass_g * sum(i.mass_g for i in items) / max(1e-9, sum(i.mass_g for i in old.items)))


def plate_plans(prev: Written, new: PlanState, *, maker) -> tuple[list[PlatePlan], dict[str, str]]:
    """PlatePlans of the new version and, per plate id, how its file is made ("copy" or "export").

    Failed plates with no survivor have no PlatePlan (they are recorded in plan.json's
    ``replan.failed_plates``).
    """
    printers = {p.name: p for p in prev.job.fleet}
    by_id = {s.id: s for s in new.plates}
    out, how = [], {}
    for s in new.plates:
        old = prev.plates.get(s.id)
        if s.origin == "kept" and old is not None and \
                {copy_key(i) for i in old.items} == {copy_key(c) for c in s.copies}:
            if not s.copies:
                continue
            out.append(replace(old, printer=s.printer, start=s.start, end=s.end, free=s.free))
            how[s.id] = "copy"
        elif s.state == "failed":
            if not s.copies:
                continue
            plan = _subset(old, s.copies, pid=s.id, file=f"plates/{s.id}-survived.3mf", parts=prev.parts)
            out.append(replace(plan, start=s.start, end=s.end, free=s.free,
                               lost_mass_g=max(0.0, old.mass_g - plan.mass_g) if old.state != "failed"
                               else old.lost_mass_g))
            how[s.id] = "export"
        elif s.origin.startswith("shrunk:"):
            src = prev.plates[s.origin.split(":", 1)[1]]
            plan = _subset(src, s.copies, pid=s.id, file=f"plates/{s.id}.3mf", parts=prev.parts)
            out.append(replace(plan, printer=s.printer, start=s.start, end=s.end, free=s.free, print_s=s.machine_s))
            how[s.id] = "export"
        else:
            prof = printers[s.printer].profile
            est = plate_time(prof, [prev.stats[c.kind] for c in s.copies],
                             build_height_mm=s.layout.build_height_mm)
            pj = PlannedPlate(id=s.id, printer=s.printer, material=s.material, copies=s.copies, layout=s.layout,
                          start=s.start, end=s.end, free=s.free, time=est)
            out.append(replace(maker.plate_plan(pj), file=f"plates/{s.id}.3mf"))
            how[s.id] = "export"
    return [_with_state(p, by_id[p.id], new) for p in out], how


def _with_state(p: PlatePlan, s: PlateState, new: PlanState) -> PlatePlan:
    """The plate with its state and moment, whether the state was assumed, the copies it lost
    and each copy's earlier failures, as plan.json carries them."""
    failures = {copy_key(c): int(c.boost) for c in s.copies}
    return replace(p, state=s.state, state_at=_state_at(s, new), assumed=s.assumed,
                   lost=tuple(LostCopy(c.order, c.part, c.copy, int(c.boost)) for c in s.lost),
                   items=tuple(replace(i, failures=failures.get(copy_key(i), 0)) for i in p.items))


def _record(s: PlateState, prev: Written, new: PlanState) -> PlatePlan:
    """A failed plate with no survivor, for the report: every copy lost."""
    old = prev.plates[s.id]
    lost = tuple(LostCopy(c.order, c.part, c.copy, int(c.boost)) for c in s.lost)
    return replace(old, items=(), start=s.start, end=s.end, free=s.free, state="failed", state_at=s.end, lost=lost,
                   lost_mass_g=old.mass_g if old.state != "failed" else old.lost_mass_g, mass_g=0.0,
                   file="none (no copy survived)")


def _state_at(s: PlateState, new: PlanState):
    """The moment of a plate's state: planned at the replan, printing since its start, finished or failed
    at its end."""
    return {"planned": new.now, "printing": s.start}.get(s.state, s.end)


def next_plan(prev: Written, new: PlanState, *, maker, events: Sequence, problems: Sequence[str],
              stats: dict) -> tuple[Plan, dict[str, str]]:
    """The next version as a :class:`Plan`, and per plate id how its file is made (``copy``, ``export``).

    ``stats`` go into plan.json (``notes``); copies of cancelled orders on printed plates
    carry what to do with them (``Plan.cancelled``); failed plates with no survivor are
    the plan's ``records``.
    """
    plans, how = plate_plans(prev, new, maker=maker)
    plans.sort(key=lambda p: (p.start, p.id))
    gone = set(new.cancelled)
    unplaced = tuple(UnplacedCopy(c.order, c.part, c.copy, why, failures=int(c.boost)) for c, why in new.unplaced) + \
        tuple(u for u in prev.fixed_unplaced if u.order not in gone)
    orders = tuple(replace(o, cancelled=o.order in gone) for o in order_status(prev.job, plans))
    plan = Plan(job=prev.job.name, job_file=prev.job.file, start=new.start, plates=tuple(plans), unplaced=unplaced,
                orders=orders, problems=tuple(problems), bounds={}, stats=stats, version=prev.version + 1,
                now=new.now, cancelled=cancelled_copies(prev, events),
                records=tuple(_record(s, prev, new) for s in new.plates if s.state == "failed" and not s.copies))
    return plan, how


def write_version(outcome) -> dict:
    """Write version ``prev.version + 1`` of a :class:`~packer.replan.job.ReplanOutcome` beside
    the version it replans; never touches earlier versions.

    The plan's ``stats`` go into plan.json; ``outcome.run`` (wall-clock figures) into
    ``run.json`` beside it, so plan.json holds nothing that depends on the machine.

    Returns
    -------
    dict
        ``folder``, ``plan``, ``html``, ``changes``, ``latest`` (symlink or text
        file), ``copied`` and ``exported`` plate files, ``rewritten``: plates
        kept unchanged whose file is not byte-identical to the one before (0
        unless something is wrong), and ``fixed``: copies kept out by their order line.
    """
    prev, plan = outcome.previous, outcome.plan
    dest = folder_of(prev.outdir, plan.version)
    if dest.exists():
        raise PackerError(f"{dest} exists already; versions are never overwritten")
    staged = StagedFolder(dest)          # written beside dest, moved into place in one rename
    work = staged.work
    copy_from = {p.id: prev.folder / prev.plates[p.id].file for p in plan.plates if outcome.files[p.id] == "copy"}
    got = write_plate_files(plan, work, parts=prev.parts, printers=prev.job.fleet, copy_from=copy_from)
    copied, rewritten = got.copied, got.rewritten
    changes_md = changes_lines(outcome, rewritten=rewritten)
    sections = [(f"Changes in version {plan.version}", changes_html(changes_md), "\n".join(changes_md))]
    files = write_reports(plan, work, views=got.views, printers=[p.name for p in prev.job.fleet],
                          calendar=prev.job.calendar, extra=sections)
    section = _replan_section(prev, outcome.replanned.state, work, events=outcome.events,
                              notes=outcome.situation.notes, added=prev.new_orders, leftover=plan.cancelled,
                              files={"copied": copied, "exported": len(plan.plates) - copied,
                                     "rewritten_unchanged": rewritten})
    write_plan_json(plan, work, extra={"replan": section})
    write_run_json(outcome.run, work)
    (work / "changes.md").write_text(f"# Changes in version {plan.version}\n\n" + "\n".join(changes_md) + "\n",
                                     encoding="utf-8")
    staged.commit()
    # parts of added orders, or of a plan written before the cache: read back by the next replan
    store_parts(prev.outdir / CACHE_DIR, prev.parts.values())
    latest = set_latest(prev.outdir, plan.version)
    planned = {copy_key(c) for c, _ in outcome.replanned.state.unplaced}
    return {"folder": dest, "plan": dest / "plan.json", "html": dest / Path(files["html"]).name,
            "changes": dest / "changes.md", "latest": latest, "copied": copied,
            "exported": len(plan.plates) - copied, "rewritten": rewritten, "version": plan.version,
            "fixed": [u for u in plan.unplaced if copy_key(u) not in planned]}


def changes_lines(outcome, *, rewritten: int) -> list[str]:
    """changes.md of a replan (Markdown lines), once the number of unchanged plates whose file
    was rewritten is known."""
    rp, sit = outcome.replanned, outcome.situation
    return list(changes_markdown(outcome.changes, old_version=outcome.previous.version,
                                 new_version=outcome.plan.version, now=outcome.now,
                                 events=[describe(e) for e in outcome.events],
                                 notes=tuple(sit.notes) + tuple(rp.stats["renested"]), rewritten=rewritten,
                                 state=rp.state, reasons=rp.stats["reasons"]))


def _replan_section(prev: Written, new: PlanState, work: Path, *, events, notes, added, leftover: dict,
                    files: dict) -> dict:
    """plan.json's ``replan`` section: what the next replan needs to read this version back."""
    prev_rp = prev.data.get("replan", {})
    version = prev.version + 1
    return {
        "version": version, "parent": "../plan.json" if prev.version == 1 else f"../v{prev.version}/plan.json",
        "root_sha256": digest(prev.outdir / "plan.json"),
        "now": new.now.isoformat(timespec="seconds") if new.now else None,
        "events": [event_to_dict(e) for e in events], "notes": list(notes),
        "history": prev_rp.get("history", []) + [{"version": version, "events": [event_to_dict(e) for e in events]}],
        "added_orders": [_rebase(d, prev.folder, work) for d in prev.added] + [order_to_dict(o, work) for o in added],
        "cancelled": list(new.cancelled),
        "cancelled_copies": leftover,
        "down": [{"printer": d.printer, "from": d.start.isoformat(timespec="seconds"),
                  "until": d.until.isoformat(timespec="seconds") if d.until else None, "origin": d.origin}
                 for d in new.down],
        "failed_plates": [_failed_dict(s, prev, work) for s in new.plates if s.state == "failed" and not s.copies],
        "next_plate": new.next_number,
        "plate_files": files,
    }


def cancelled_copies(prev: Written, events: Sequence) -> dict:
    """Cancelled order -> what to do with its printed copies (``stock`` or ``scrap``): the
    event's choice, else the job's ``rules.cancelled_copies``; earlier versions' choices kept."""
    out = dict(prev.data.get("replan", {}).get("cancelled_copies", {}))
    for o in prev.state.cancelled:
        out.setdefault(o, prev.job.rules.cancelled_copies)
    for e in events:
        if isinstance(e, Cancelled):
            out[e.order] = e.leftover or prev.job.rules.cancelled_copies
    return out


def _key_dict(c) -> dict:
    return {"order": c.order, "part": c.part, "copy": c.copy, "failures": int(c.boost)}


def _rebase(d: dict, old: Path, new: Path) -> dict:
    """An added order's mesh paths, relative to the new version's folder."""
    lines = [dict(ln, mesh=Path(os.path.relpath((old / ln["mesh"]).resolve(), new.resolve())).as_posix())
             for ln in d["lines"]]
    return dict(d, lines=lines)


def _failed_dict(s: PlateState, prev: Written, root: Path) -> dict:
    """A failed plate with no survivor: kept as a record (it holds no copy)."""
    old = prev.plates[s.id]
    moment = lambda t: t.isoformat(timespec="seconds")  # noqa: E731
    return {"id": s.id, "printer": s.printer, "profile": old.profile, "technology": old.technology,
            "material": old.material, "volume": list(old.volume), "spacing": old.spacing, "margin": old.margin,
            "file": None, "start": moment(s.start), "end": moment(s.end), "free": moment(s.free),
            "height": old.height_mm, "utilization": old.utilization, "print_seconds": old.print_s,
            "mass_g": old.mass_g, "time_terms": old.time_terms, "items": [], "state": "failed",
            "state_at": moment(s.end), "lost_mass_g": round(old.mass_g, 2),
            "assumed": s.assumed, "lost": [_key_dict(c) for c in s.lost]}
