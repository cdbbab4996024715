"""The report a planner reads: HTML with pictures, Markdown beside it, and the pick list.

``write_reports`` takes a finished :class:`~packer.plan.Plan` and the pictures
of each plate and writes ``report.html``, ``report.md``, ``picklist.csv`` and
the plate pictures under ``views/``.
"""

from __future__ import annotations

import csv
from collections import Counter
from datetime import datetime, timedelta
from html import escape
from pathlib import Path
from typing import Sequence

from packer.plan import Plan, PlatePlan
from packer.report.svg import colour_of, timeline_svg

__all__ = ["SAFETY", "write_reports", "write_picklist", "fmt_duration"]

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


def fmt_duration(seconds: float) -> str:
    minutes = int(round(seconds / 60))
    return f"{minutes // 60} h {minutes % 60:02d} min"


def _when(t: datetime | None) -> str:
    return t.strftime("%a %d %b %H:%M") if t else "not scheduled"


def _contents(plate: PlatePlan) -> list[tuple[str, str, int]]:
    counts = Counter((c.order, c.part) for c in plate.items)
    return [(o, p, n) for (o, p), n in sorted(counts.items())]


def _shifts(plan: Plan, calendar, end: datetime) -> list[tuple[datetime, datetime]]:
    out = []
    day = plan.start.replace(hour=0, minute=0, second=0, microsecond=0)
    while day <= end:
        if day.weekday() in calendar.days:
            out.append((datetime.combine(day.date(), calendar.shift_start),
                        datetime.combine(day.date(), calendar.shift_end)))
        day += timedelta(days=1)
    return out


LEFTOVER = {"stock": "keep as stock", "scrap": "scrap"}
STATE_COLOURS = {"finished": "#9a9a9a", "printing": "#2f8f5b", "failed": "#b8323c"}
"""Timeline fills of plates that are not planned any more (planned plates keep their order's colour)."""


def cancelled_note(plan: Plan, order: str) -> str:
    """``cancelled: keep as stock`` (or ``scrap``) for a copy of a cancelled order, else empty."""
    return f"cancelled: {LEFTOVER.get(plan.cancelled[order], plan.cancelled[order])}" if order in plan.cancelled else ""


def _title(plan: Plan) -> tuple[str, str]:
    """(heading, line under it): a replanned version names itself and its moment."""
    if plan.version > 1 and plan.now is not None:
        return (f"Plan for {plan.job}, version {plan.version}",
                f"Replanned at {_when(plan.now)} (the first plan started {_when(plan.start)})")
    return f"Plan for {plan.job}", f"Planning from {_when(plan.start)}"


def write_picklist(plan: Plan, path: Path) -> Path:
    """``picklist.csv``: for each plate, which copy belongs to which order."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["plate", "printer", "plate_end", "order", "order_due", "part", "copy", "material", "cancelled"])
        due = {o.order: o.due for o in plan.orders}
        for p in plan.plates:
            for c in sorted(p.items, key=lambda c: (c.order, c.part, c.copy)):
                w.writerow([p.id, p.printer, p.end.isoformat(timespec="minutes"), c.order,
                            due[c.order].isoformat(timespec="minutes") if c.order in due else "",
                            c.part, c.copy, c.material, cancelled_note(plan, c.order)])
    return path


def write_reports(plan: Plan, outdir: Path, *, views: dict[str, list[tuple[str, str]]], printers: Sequence[str],
                  calendar, extra: Sequence[tuple[str, str, str]] = ()) -> dict[str, Path]:
    """Write report.html, report.md, picklist.csv and views/*.svg into ``outdir``.

    ``extra``: sections ``(title, html body, markdown body)`` shown after the
    summary (a replan's changes).
    """
    outdir = Path(outdir)
    (outdir / "views").mkdir(parents=True, exist_ok=True)
    orders = [o.order for o in plan.orders]
    end = max([p.free for p in plan.plates] + [plan.start + timedelta(hours=12)])
    shown = sorted(plan.plates + plan.records, key=lambda p: (p.start, p.id))
    bars = [(p.printer, p.start, p.end,
             STATE_COLOURS.get(p.state) or colour_of(p.items[0].order if p.items else "", orders),
             f"{p.id} {p.state} {p.material} {len(p.items)} copies {_when(p.start)} to {_when(p.end)}")
            for p in shown]
    timeline = timeline_svg(list(printers), bars, _shifts(plan, calendar, end), start=plan.start, end=end,
                            now=plan.now, legend=STATE_COLOURS if plan.version > 1 else None)
    (outdir / "views" / "timeline.svg").write_text(timeline, encoding="utf-8")
    view_files: dict[str, list[tuple[str, str]]] = {}
    for pid, pictures in views.items():
        for k, (title, svg) in enumerate(pictures):
            name = f"{pid}.svg" if len(pictures) == 1 else f"{pid}-{k + 1}.svg"
            (outdir / "views" / name).write_text(svg, encoding="utf-8")
            view_files.setdefault(pid, []).append((title, f"views/{name}"))
    paths = {
        "html": _write_html(plan, outdir / "report.html", views, timeline, extra),
        "md": _write_md(plan, outdir / "report.md", view_files, extra),
        "picklist": write_picklist(plan, outdir / "picklist.csv"),
    }
    return paths


def _summary(plan: Plan) -> list[tuple[str, str]]:
    gone = sum(1 for p in plan.plates for c in p.items if c.order in plan.cancelled)
    placed = sum(len(p.items) for p in plan.plates) - gone
    rows = [("copies placed", f"{placed} of {placed + len(plan.unplaced)}")]
    if plan.cancelled:
        rows.append(("cancelled copies on plates", f"{gone} (orders {', '.join(sorted(plan.cancelled))})"))
    rows += [("copies not placed", str(len(plan.unplaced))),
            ("plates", str(len(plan.plates))),
            ("printing time (all plates)", fmt_duration(sum(p.print_s for p in plan.plates))),
            ("material", f"{sum(p.mass_g for p in plan.plates):.0f} g")]
    if plan.plates:
        finish = max(p.end for p in plan.plates)
        rows.append(("last plate done", _when(finish)))
    late = [o for o in plan.orders if o.late_s > 0]
    rows.append(("late orders", ", ".join(o.order for o in late) or "none"))
    for key, value in plan.bounds.items():
        rows.append((key.replace("_", " "), str(value)))
    return rows


_CSS = """body{font-family:system-ui,sans-serif;margin:2em auto;max-width:1000px;color:#222}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #ccc;padding:3px 8px;text-align:left}
th{background:#eef1f4}.late{background:#f8d7da}.cancelled{color:#777;text-decoration:line-through}.warn{background:#fff4d6;padding:.6em 1em;border-left:4px solid #d9a400}
.plate{border-top:2px solid #3b6e8f;margin-top:1.5em}.views{display:flex;gap:1em;flex-wrap:wrap}
figure{margin:0}figcaption{font-size:90%;color:#555}"""


def _write_html(plan: Plan, path: Path, views, timeline: str, extra=()) -> Path:
    h = [f"<!doctype html><html><head><meta charset='utf-8'><title>packer plan: {escape(plan.job)}</title>"
         f"<style>{_CSS}</style></head><body>",
         f"<h1>{escape(_title(plan)[0])}</h1><p>{escape(_title(plan)[1])}; job file "
         f"<code>{escape(Path(plan.job_file).name)}</code>.</p>",
         "<div class='warn'><strong>Safety.</strong><ul>" + "".join(f"<li>{escape(s)}</li>" for s in SAFETY)
         + "</ul></div>", "<h2>Summary</h2><table>"]
    h += [f"<tr><th>{escape(k)}</th><td>{escape(v)}</td></tr>" for k, v in _summary(plan)]
    h.append("</table>")
    h += [f"<h2>{escape(title)}</h2>{body}" for title, body, _ in extra]
    if plan.problems:
        h.append("<h2>Problems in the input</h2><ul>" +
                 "".join(f"<li><code>{escape(p)}</code></li>" for p in plan.problems) + "</ul>")
    h.append("<h2>Timeline</h2><p>One row per printer; shaded: operators present to start and clear plates"
             + ("; plates coloured by state, the red line is the moment of the replan" if plan.now else "") + ".</p>")
    h.append(timeline)
    h.append("<h2>Orders</h2><table><tr><th>order</th><th>priority</th><th>due</th><th>copies placed</th>"
             "<th>expected done</th><th>late by</th></tr>")
    for o in plan.orders:
        h.append(f"<tr class='{'cancelled' if o.cancelled else ('late' if _late_text(o) else '')}'>"
                 f"<td>{escape(o.order)}</td><td>{o.priority}</td>"
                 f"<td>{_when(o.due)}</td><td>{o.placed} of {o.copies}</td><td>{_when(o.done)}</td>"
                 f"<td>{escape(_late_text(o))}</td></tr>")
    h.append("</table><h2>Plates</h2>")
    for p in sorted(plan.plates + plan.records, key=lambda p: (p.start, p.id)):
        h.append(f"<div class='plate'><h3>{escape(p.id)}: {escape(p.printer)} ({escape(p.profile)}, "
                 f"{escape(p.technology)}, {escape(p.material)})</h3>")
        h.append("<table>" + "".join(f"<tr><th>{k}</th><td>{escape(v)}</td></tr>" for k, v in _plate_rows(p))
                 + "</table>")
        h.append("<table><tr><th>order</th><th>part</th><th>copies</th></tr>" +
                 "".join(f"<tr><td>{escape(_order_cell(plan, o))}</td><td>{escape(pt)}</td><td>{n}</td></tr>"
                         for o, pt, n in _contents(p)) + "</table>")
        if p.lost:
            h.append("<p>Lost when it failed (printed again on other plates):</p><table><tr><th>order</th>"
                     "<th>part</th><th>copies</th></tr>" + "".join(
                         f"<tr><td>{escape(o)}</td><td>{escape(pt)}</td><td>{n}</td></tr>"
                         for (o, pt), n in sorted(Counter((o, pt) for o, pt, _ in p.lost).items())) + "</table>")
        h.append("<div class='views'>" + "".join(f"<figure>{svg}<figcaption>{escape(t)}</figcaption></figure>"
                                                 for t, svg in views.get(p.id, [])) + "</div></div>")
    if plan.unplaced:
        h.append("<h2>Not placed</h2><table><tr><th>order</th><th>part</th><th>copy</th><th>reason</th></tr>")
        h += [f"<tr><td>{escape(u.order)}</td><td>{escape(u.part)}</td><td>{u.copy}</td><td>{escape(u.reason)}</td>"
              "</tr>" for u in plan.unplaced]
        h.append("</table>")
    h.append("</body></html>")
    path.write_text("\n".join(h), encoding="utf-8")
    return path


def _late_text(o) -> str:
    if o.cancelled:
        return "cancelled"
    return fmt_duration(o.late_s) if o.late_s > 0 else ("incomplete" if o.placed < o.copies else "")


def _order_cell(plan: Plan, order: str) -> str:
    note = cancelled_note(plan, order)
    return f"{order} ({note})" if note else order


def _state_row(p: PlatePlan) -> tuple[str, str]:
    if p.state == "failed":
        ran = (p.end - p.start).total_seconds()
        return ("state", f"failed at {_when(p.end)}, after {fmt_duration(ran)} of an estimated "
                         f"{fmt_duration(p.print_s)}")
    if p.state == "printing":
        return ("state", f"printing since {_when(p.state_at or p.start)}")
    if p.state == "finished":
        return ("state", f"finished at {_when(p.state_at or p.end)}")
    return ("state", "planned" + (f" at {_when(p.state_at)}" if p.state_at else ""))


def _plate_rows(p: PlatePlan) -> list[tuple[str, str]]:
    use = "volume density" if p.technology == "powder" else "area utilization"
    if p.state == "failed":
        return [_state_row(p), ("start", _when(p.start)), ("printer free", _when(p.free)),
                ("copies", f"{len(p.items)} survived, {len(p.lost)} lost"), ("height", f"{p.height_mm:.1f} mm"),
                ("material", f"{p.mass_g:.0f} g in the survivors, {p.lost_mass_g:.0f} g in the lost copies"),
                ("plate file", f"{p.file} (the survivors)")]
    rows = [_state_row(p), ("start", _when(p.start)), ("print done", _when(p.end)), ("printer free", _when(p.free)),
            ("copies", str(len(p.items))), (use, f"{p.utilization:.1%}"),
            ("height", f"{p.height_mm:.1f} mm"), ("estimated print time", fmt_duration(p.print_s)),
            ("material", f"{p.mass_g:.0f} g"), ("plate file", p.file)]
    if p.note:
        rows.append(("under-filled", p.note))
    return rows


def _write_md(plan: Plan, path: Path, view_files, extra=()) -> Path:
    m = [f"# {_title(plan)[0]}", "", f"{_title(plan)[1]}.", "", "## Safety", ""]
    m += [f"- {s}" for s in SAFETY]
    m += ["", "## Summary", "", "| | |", "|---|---|"] + [f"| {k} | {v} |" for k, v in _summary(plan)]
    for title, _, body in extra:
        m += ["", f"## {title}", "", body]
    if plan.problems:
        m += ["", "## Problems in the input", ""] + [f"- `{p}`" for p in plan.problems]
    m += ["", "## Timeline", "", "![timeline](views/timeline.svg)", "", "## Orders", "",
          "| order | priority | due | placed | expected done | late by |", "|---|---|---|---|---|---|"]
    for o in plan.orders:
        late = _late_text(o)
        m.append(f"| {o.order} | {o.priority} | {_when(o.due)} | {o.placed} of {o.copies} | {_when(o.done)} | "
                 f"{'**' + late + '**' if late else ''} |")
    m += ["", "## Plates"]
    for p in sorted(plan.plates + plan.records, key=lambda p: (p.start, p.id)):
        m += ["", f"### {p.id}: {p.printer} ({p.profile}, {p.technology}, {p.material})", "",
              "| | |", "|---|---|"] + [f"| {k} | {v} |" for k, v in _plate_rows(p)]
        m += ["", "| order | part | copies |", "|---|---|---|"] + [f"| {_order_cell(plan, o)} | {pt} | {n} |"
                                                              for o, pt, n in _contents(p)]
        if p.lost:
            m += ["", "Lost when it failed (printed again on other plates):", "", "| order | part | copies |",
                  "|---|---|---|"] + [f"| {o} | {pt} | {n} |" for (o, pt), n in
                                      sorted(Counter((o, pt) for o, pt, _ in p.lost).items())]
        m += [""] + [f"![{t}]({f})" for t, f in view_files.get(p.id, [])]
    if plan.unplaced:
        m += ["", "## Not placed", "", "| order | part | copy | reason |", "|---|---|---|---|"]
        m += [f"| {u.order} | {u.part} | {u.copy} | {u.reason} |" for u in plan.unplaced]
    path.write_text("\n".join(m) + "\n", encoding="utf-8")
    return path
