"""Operator sheets: per printer and shift, what to start and clear, in time order.

``operator-sheets.html`` has one printable page per printer and shift: each
plate's start (with the material to load and the plate file) and its clearing
(with the pick list that sorts the copies into their orders, by the tags of the
report's drawings). ``operator-sheets.csv`` holds the same rows for a
spreadsheet or a shop-floor screen.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from datetime import datetime, timedelta
from html import escape
from pathlib import Path

from packer.output.plan import Plan, PlatePlan
from packer.output.report.fmt import clock, duration, moment, plural
from packer.output.report.states import cancelled_note
from packer.output.report.tags import tagged

__all__ = ["shifts_of", "Action", "sheet_actions", "write_sheets"]


def shifts_of(calendar, first: datetime, last: datetime) -> list[tuple[datetime, datetime]]:
    """(start, end) of every operator shift from the day of ``first`` to the day of ``last``."""
    out = []
    day = first.replace(hour=0, minute=0, second=0, microsecond=0)
    while day <= last:
        if day.weekday() in calendar.days:
            a = datetime.combine(day.date(), calendar.shift_start)
            b = datetime.combine(day.date(), calendar.shift_end)
            out.append((a, b if b > a else b + timedelta(days=1)))
        day += timedelta(days=1)
    return out


@dataclass(frozen=True)
class Action:
    """One thing an operator does at a printer: start a plate or clear it."""

    printer: str
    at: datetime
    kind: str                       # "start" | "clear"
    plate: PlatePlan
    change_from: str | None = None  # material on the printer before a start, when it changes


def sheet_actions(plan: Plan) -> list[Action]:
    """Every start and clear still to do, by printer and time.

    In a replanned version a plate already printing needs only its clearing,
    and finished or failed plates need nothing.
    """
    out = []
    for printer in sorted({p.printer for p in plan.plates}):
        loaded = None
        for p in sorted((p for p in plan.plates if p.printer == printer), key=lambda p: p.start):
            if p.state == "planned":
                before = p.change_from if p.change_s and p.change_from else loaded
                out.append(Action(printer, p.start, "start", p,
                                  before if before not in (None, "", p.material) else None))
            if p.state in ("planned", "printing"):
                out.append(Action(printer, p.free, "clear", p))
            loaded = p.material
    return sorted(out, key=lambda a: (a.printer, a.at, a.kind != "clear"))


def _shift_of(t: datetime, shifts) -> tuple[datetime, datetime] | None:
    inside = [s for s in shifts if s[0] <= t <= s[1]]
    if inside:
        return inside[0]
    later = [s for s in shifts if s[0] > t]
    return later[0] if later else (shifts[-1] if shifts else None)


def _pages(plan: Plan, calendar) -> list[tuple[str, tuple[datetime, datetime] | None, list[Action]]]:
    actions = sheet_actions(plan)
    if not actions:
        return []
    shifts = shifts_of(calendar, min(a.at for a in actions), max(a.at for a in actions))
    pages: dict = {}
    for a in actions:
        pages.setdefault((a.printer, _shift_of(a.at, shifts)), []).append(a)
    return [(printer, shift, acts) for (printer, shift), acts in
            sorted(pages.items(), key=lambda kv: (kv[0][0], kv[0][1] or (datetime.min, datetime.min)))]


_CSS = """body{font-family:system-ui,sans-serif;color:#222;margin:1em auto;max-width:900px}
.page{page-break-after:always;break-after:page;padding:.5em 0}h1{font-size:1.4em;margin:.2em 0}
table{border-collapse:collapse;margin:.3em 0 .8em}td,th{border:1px solid #bbb;padding:3px 7px;text-align:left}
th{background:#eef1f4}.act{font-weight:700;font-size:1.05em;margin-top:.8em}.change{color:#8b1a1a;font-weight:700}
.tick{display:inline-block;width:11px;height:11px;border:1px solid #222;margin-right:6px}
@page{size:A4;margin:12mm}"""


def _action_html(plan: Plan, a: Action) -> str:
    p = a.plate
    if a.kind == "start":
        took = f" (about {duration(p.change_s)}, before the start)" if p.change_s else ""
        load = (f"<span class='change'>change material: unload {escape(a.change_from)}, load "
                f"{escape(p.material)}{took}</span>" if a.change_from else f"material: {escape(p.material)}")
        return (f"<div class='act'><span class='tick'></span>{clock(a.at)} start {escape(p.id)}</div>"
                f"<div>{load}; plate file <code>{escape(p.file)}</code>; {plural(len(p.items), 'copy')}; "
                f"print done about {moment(p.end)}</div>")
    due = {o.order: o.due for o in plan.orders}
    note = bool(plan.cancelled)
    rows = "".join(f"<tr><td>{escape(t)}</td><td>{escape(c.order)}</td><td>{escape(c.part)}</td>"
                   f"<td>{c.copy}</td><td>{moment(due[c.order]) if c.order in due else ''}</td>"
                   + (f"<td>{escape(cancelled_note(plan, c.order))}</td>" if note else "")
                   + "<td><span class='tick'></span></td></tr>" for t, c in tagged(p))
    return (f"<div class='act'><span class='tick'></span>{clock(p.end)} to {clock(a.at)} clear {escape(p.id)}"
            f"</div><div>take the parts off and sort them into their orders (tags as in the report's drawing):</div>"
            "<table><tr><th>tag</th><th>order</th><th>part</th><th>copy</th><th>order due</th>"
            + ("<th>note</th>" if note else "") + f"<th>sorted</th></tr>{rows}</table>" + _post_html(p))


def _post_text(p: PlatePlan) -> str:
    """The post-processing steps after clearing, in words (empty when the profile has none)."""
    if not p.post:
        return ""
    steps = ", ".join(f"{step} {duration(s)}{' (operator)' if operator else ''}" for step, s, operator in p.post)
    return f"{steps}; parts done about {moment(p.done or p.free)}"


def _post_html(p: PlatePlan) -> str:
    return f"<div>then post-processing: {escape(_post_text(p))}</div>" if p.post else ""


def write_sheets(plan: Plan, outdir: Path, calendar) -> dict[str, Path]:
    """Write ``operator-sheets.html`` and ``operator-sheets.csv`` into ``outdir``."""
    outdir = Path(outdir)
    pages = _pages(plan, calendar)
    h = [f"<!doctype html><html lang='en'><head><meta charset='utf-8'><title>Operator sheets: "
         f"{escape(plan.job)}</title><style>{_CSS}</style></head><body>"]
    if not pages:
        h.append("<p>No plates to start or clear.</p>")
    for printer, shift, acts in pages:
        when = f"shift {moment(shift[0])} to {clock(shift[1])}" if shift else "outside the calendar"
        h.append(f"<section class='page'><h1>{escape(printer)}: {when}</h1><p>Job {escape(plan.job)}; "
                 f"{plural(len(acts), 'task')} in time order.</p>" + "".join(_action_html(plan, a) for a in acts)
                 + "</section>")
    h.append("</body></html>")
    html = outdir / "operator-sheets.html"
    html.write_text("\n".join(h), encoding="utf-8")
    path = outdir / "operator-sheets.csv"
    due = {o.order: o.due for o in plan.orders}
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["printer", "shift_start", "time", "action", "plate", "material", "material_change_from",
                    "plate_file", "tag", "order", "part", "copy", "order_due", "cancelled", "material_change_minutes",
                    "post_processing"])
        for printer, shift, acts in pages:
            s = shift[0].isoformat(timespec="minutes") if shift else ""
            for a in acts:
                p, t = a.plate, a.at.isoformat(timespec="minutes")
                if a.kind == "start":
                    w.writerow([printer, s, t, "start", p.id, p.material, a.change_from or "", p.file,
                                "", "", "", "", "", "", round(p.change_s / 60, 1) if p.change_s else "", ""])
                    continue
                for tag, c in tagged(p):
                    w.writerow([printer, s, t, "clear", p.id, p.material, "", p.file, tag, c.order, c.part,
                                c.copy, due[c.order].isoformat(timespec="minutes") if c.order in due else "",
                                cancelled_note(plan, c.order), "", _post_text(p)])
    return {"sheets_html": html, "sheets_csv": path}
