"""The report a planner reads, the operator sheets, and the pick list.

``write_reports`` takes a finished :class:`~packer.output.plan.Plan` and the drawings
of each plate and writes ``report.html`` (one self-contained page),
``report.md`` with the drawings under ``views/``, ``operator-sheets.html`` and
``.csv`` (:mod:`packer.output.report.sheets`) and ``picklist.csv``.
"""

from __future__ import annotations

import csv
from datetime import datetime, timedelta
from pathlib import Path
from typing import Sequence

from packer.intake.identity import copy_key
from packer.output.plan import Plan
from packer.output.report.fmt import duration, moment, plural
from packer.output.report.markdown import write_md
from packer.output.report.page import write_html
from packer.output.report.parts import parts_sections
from packer.output.report.sheets import shifts_of, write_sheets
from packer.output.report.states import cancelled_note, has_states, shown_plates
from packer.output.report.timeline import Bar, timeline_svg

__all__ = ["SAFETY", "write_reports", "write_picklist", "timeline_of"]

SAFETY = (
    "Printing is unattended machine work with real hazards. Follow the printer maker's "
    "instructions, your local codes and licensed practice; this report does not replace them.",
    "Filament printers: hot ends and heated beds can burn and, left unattended, start fires. "
    "Run overnight plates only on machines and in rooms set up for unattended work "
    "(smoke detection, no combustibles nearby) and ventilate for fumes.",
    "Resin printers: uncured resin and washing solvents irritate skin, eyes and lungs. Wear "
    "nitrile gloves and eye protection, ventilate, and dispose of resin and solvent as your "
    "local rules require.",
    "Powder-bed cells: fine powders can be breathed in and can burn or explode as dust. Unpack "
    "and depowder with the extraction, protective equipment and grounding the maker specifies.",
    "Times and masses here are planning estimates from simple models, not slicer output: "
    "check the first plate of each kind before trusting a schedule built on them.",
)


def write_picklist(plan: Plan, path: Path) -> Path:
    """``picklist.csv``: for each plate, which copy belongs to which order."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["plate", "printer", "plate_end", "order", "order_due", "part", "copy", "material", "cancelled"])
        due = {o.order: o.due for o in plan.orders}
        for p in plan.plates:
            for c in sorted(p.items, key=copy_key):
                w.writerow([p.id, p.printer, p.end.isoformat(timespec="minutes"), c.order,
                            due[c.order].isoformat(timespec="minutes") if c.order in due else "",
                            c.part, c.copy, c.material, cancelled_note(plan, c.order)])
    return path


def timeline_of(plan: Plan, printers: Sequence[str], calendar, *, states: dict | None = None,
                now: datetime | None = None) -> tuple[str, list[Bar], list[Bar]]:
    """(svg, bars, bars too short for their label) of the plan's fleet timeline.

    States and "now" come from the plan (a replanned version) unless given.
    """
    plates = shown_plates(plan)
    if states is None:
        states = {p.id: p.state for p in plates} if has_states(plan) else {}
    now = now if now is not None else plan.now
    end = max([p.free for p in plates] + [plan.start + timedelta(hours=12)] + ([now] if now else []))
    start = min([plan.start] + [p.start for p in plates])
    bars = [Bar(p.printer, p.start, p.end, p.free, p.id, p.material,
                f"{p.id}: {p.material}, {plural(len(p.items), 'copy')}, {moment(p.start)} to {moment(p.end)}, "
                f"cleared {moment(p.free)}, print {duration(p.print_s)}" +
                (f", {states[p.id]}" if p.id in states else "") +
                (f", material change {duration(p.change_s)} before" if p.change_s else "") +
                (f", post-processing done {moment(p.done)}" if p.post and p.done else ""), states.get(p.id))
            for p in plates]
    rows = list(printers) + sorted({p.printer for p in plates} - set(printers))
    svg, unlabelled = timeline_svg(rows, bars, shifts_of(calendar, start, end), start=start, end=end, now=now)
    return svg, bars, unlabelled


def write_reports(plan: Plan, outdir: Path, *, views: dict[str, list[tuple[str, str]]], printers: Sequence[str],
                  calendar, extra: Sequence[tuple[str, str, str]] = (), states: dict[str, str] | None = None,
                  now: datetime | None = None) -> dict[str, Path]:
    """Write the report, the operator sheets, the pick list and views/*.svg into ``outdir``.

    Parameters
    ----------
    views
        Plate id -> [(title, svg)] drawings (:func:`packer.output.report.views.plate_views`).
    printers
        Printer names in fleet order (timeline rows).
    calendar
        The job's operator calendar (shifts on the timeline and the sheets).
    extra
        Sections ``(title, html body, markdown body)`` shown after the summary (a replan's changes).
    states
        Plate id -> state (planned, printing, finished, failed); default: the plates' own
        states when the plan is a replanned version or has a plate not merely planned.
    now
        Drawn on the timeline; default: the plan's ``now`` (a replanned version's moment).
    """
    outdir = Path(outdir)
    extra = (*extra, *parts_sections(plan))
    (outdir / "views").mkdir(parents=True, exist_ok=True)
    timeline = timeline_of(plan, printers, calendar, states=states, now=now)
    (outdir / "views" / "timeline.svg").write_text(timeline[0], encoding="utf-8")
    view_files: dict[str, list[tuple[str, str]]] = {}
    for pid, pictures in views.items():
        for k, (title, svg) in enumerate(pictures):
            name = f"{pid}.svg" if len(pictures) == 1 else f"{pid}-{k + 1}.svg"
            (outdir / "views" / name).write_text(svg, encoding="utf-8")
            view_files.setdefault(pid, []).append((title, f"views/{name}"))
    paths = {
        "html": write_html(plan, outdir / "report.html", views=views, timeline=timeline, safety=SAFETY,
                           extra=extra, now=now if now is not None else plan.now),
        "md": write_md(plan, outdir / "report.md", view_files, safety=SAFETY, extra=extra),
        "picklist": write_picklist(plan, outdir / "picklist.csv"),
    }
    paths.update(write_sheets(plan, outdir, calendar))
    return paths
