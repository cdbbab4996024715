"""``report.html``: one self-contained page (no network), readable on screen and printed on A4."""

from __future__ import annotations

import re
from collections import Counter
from html import escape
from pathlib import Path
from typing import Sequence

from packer.output.plan import Plan, PlatePlan
from packer.output.report.fmt import duration, moment, plural, share
from packer.output.report.materials import totals_by_material, totals_by_printer
from packer.output.report.states import cancelled_note, has_states, lost_rows, shown_plates, state_row
from packer.output.report.states import title as plan_title
from packer.output.report.summary import Fact, bound_rows, planner_notes, summary_facts
from packer.output.report.svg import colour_of
from packer.output.report.tags import tagged
from packer.output.report.timeline import Bar

__all__ = ["write_html", "plate_facts", "parts_rows", "order_rows", "CSS"]

CSS = """
body{font-family:system-ui,'Segoe UI',sans-serif;margin:1.5em auto;max-width:980px;color:#222;padding:0 1em}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:2px solid #3b6e8f;padding-bottom:2px;margin-top:1.6em}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #cfcfcf;padding:3px 8px;text-align:left;
vertical-align:top}th{background:#eef1f4}td.n{text-align:right;font-variant-numeric:tabular-nums}
tr.bad td{background:#f8d7da}.facts li{margin:.2em 0}.facts li.bad{color:#8b1a1a;font-weight:600}
.facts li.note{color:#6b4e00}.safety{background:#fff4d6;padding:.5em 1em;border-left:4px solid #d9a400}
.notes{background:#f2f5fa;padding:.5em 1em;border-left:4px solid #3b6e8f}
.plate{break-inside:avoid;page-break-inside:avoid;border-top:1px solid #9ab;margin-top:1.2em;padding-top:.3em}
.plate-body{display:flex;gap:1.2em;flex-wrap:wrap;align-items:flex-start}.plate-body table{font-size:92%}.views{display:flex;gap:.8em;flex-wrap:wrap}
figure{margin:0}figcaption{font-size:90%;color:#555}svg{max-width:100%;height:auto}
.legend{display:flex;flex-wrap:wrap;gap:.3em 1.2em;font-size:90%;margin:.3em 0;list-style:none;padding:0}
.sw{display:inline-block;width:14px;height:12px;border:1px solid #333;vertical-align:-2px;margin-right:4px}
small{color:#555}
@page{size:A4;margin:12mm}
@media print{body{margin:0;max-width:none;font-size:10pt}h2{break-after:avoid}.plate{break-inside:avoid}}
"""


def _table(headers: Sequence[str] | None, rows: Sequence[Sequence], *, numeric: Sequence[int] = (),
           bad: Sequence[bool] = ()) -> str:
    h = ["<table>" + ("<tr>" + "".join(f"<th>{escape(x)}</th>" for x in headers) + "</tr>" if headers else "")]
    for k, row in enumerate(rows):
        cls = " class='bad'" if k < len(bad) and bad[k] else ""
        cells = "".join(f"<td class='n'>{escape(str(v))}</td>" if i in numeric else f"<td>{escape(str(v))}</td>"
                        for i, v in enumerate(row))
        h.append(f"<tr{cls}>{cells}</tr>")
    return "".join(h) + "</table>"


def _facts(facts: Sequence[Fact]) -> str:
    return "<ul class='facts'>" + "".join(f"<li class='{f.tone}'>{escape(f.text)}</li>" for f in facts) + "</ul>"


def plate_facts(p: PlatePlan, *, states: bool = False) -> list[tuple[str, str]]:
    """(label, value) rows describing one plate; with its state first when ``states``."""
    head = [state_row(p)] if states or p.state != "planned" else []
    if p.state == "failed":
        return head + [("start", moment(p.start)), ("cleared", moment(p.free)),
                       ("copies", f"{len(p.items)} survived, {len(p.lost)} lost"), ("height", f"{p.height_mm:.1f} mm"),
                       ("material", f"{p.mass_g:.0f} g in the survivors, {p.lost_mass_g:.0f} g in the lost copies"),
                       ("plate file", f"{p.file} (the survivors)" if p.items else p.file)]
    use = "volume density" if p.technology == "powder" else "area utilization"
    amount = f"{p.mass_g / 1000:.2f} kg of powder used" if p.technology == "powder" else f"{p.mass_g:.0f} g"
    return head + [("start", moment(p.start)), ("print done", moment(p.end)), ("cleared", moment(p.free)),
                   ("copies", str(len(p.items))), (use, share(p.utilization)), ("height", f"{p.height_mm:.1f} mm"),
                   ("estimated print time", duration(p.print_s)), (f"material ({p.material})", amount),
                   ("plate file", p.file)] + ([("under-filled", p.note)] if p.note else []) + _setup_rows(p)


def _setup_rows(p: PlatePlan) -> list[tuple[str, str]]:
    """The material change before the plate and the post-processing after it, when there are."""
    rows = []
    if p.change_s:
        rows.append(("material change before", f"{p.change_from or 'other material'} to {p.material}, "
                                               f"{duration(p.change_s)}"))
    if p.post:
        steps = ", ".join(f"{a} {duration(b)}{' (operator)' if c else ''}" for a, b, c in p.post)
        rows.append(("post-processing", f"{steps}; done {moment(p.done)}"))
    return rows


def parts_rows(plan: Plan) -> list[tuple]:
    """(part, mesh file, material, copies, volume cm3, mass g per copy, plates) per part and material."""
    rows: dict = {}
    for p in plan.plates:
        for c in p.items:
            key = (c.part, Path(c.mesh).name, c.material)
            r = rows.setdefault(key, [0, c.volume_mm3, c.mass_g, set()])
            r[0] += 1
            r[3].add(p.id)
    return [(part, mesh, mat, n, f"{vol / 1000:.1f}", f"{g:.1f}", ", ".join(sorted(ids)))
            for (part, mesh, mat), (n, vol, g, ids) in sorted(rows.items())]


def order_rows(plan: Plan) -> tuple[list[tuple], list[bool]]:
    """Rows of the order table and which of them are late or incomplete (cancelled orders are not)."""
    plates_of: dict = {}
    for p in plan.plates:
        for c in p.items:
            plates_of.setdefault(c.order, set()).add(p.id)
    rows, bad = [], []
    for o in plan.orders:
        late = o.late_s > 0
        if o.cancelled:
            status = cancelled_note(plan, o.order) or "cancelled"
        else:
            status = f"late by {duration(o.late_s)}" if late else (
                "incomplete" if o.placed < o.copies else "on time")
        rows.append((o.order, o.priority, moment(o.due), f"{o.placed} of {o.copies}",
                     ", ".join(sorted(plates_of.get(o.order, ()))) or "none", moment(o.done), status))
        bad.append(not o.cancelled and (late or o.placed < o.copies))
    return rows, bad


def _width(svg: str) -> int:
    """The on-screen width of a drawing (its ``width`` attribute), so its caption wraps under it."""
    found = re.search(r'<svg[^>]*\swidth="(\d+)', svg)
    return int(found.group(1)) if found else 400


def _plate_section(plan: Plan, p: PlatePlan, pictures, orders: Sequence[str], states: bool) -> str:
    tags = tagged(p)
    on_plate = sorted({c.order for c in p.items})
    legend = "<ul class='legend'>" + "".join(
        f"<li><span class='sw' style='background:{colour_of(o, orders)}'></span>order {escape(o)}</li>"
        for o in on_plate) + "<li><span class='sw' style='background:#ecd9b8'></span>margin</li>" + \
        ("<li><span class='sw' style='background:#f6e3da;border-color:#a24a2a'></span>keep-out zone</li>"
         if any("keep-out zone" in svg for _, svg in pictures) else "") + "</ul>"
    copies = _table(["tag", "order", "part", "copy"],
                    [(t, c.order + (f" ({cancelled_note(plan, c.order)})" if c.order in plan.cancelled else ""),
                      c.part, c.copy) for t, c in tags])
    lost = ("<div><p>Lost when it failed (printed again on other plates):</p>" +
            _table(["order", "part", "copies"], lost_rows(p), numeric=(2,)) + "</div>") if p.lost else ""
    copies += lost
    figs = "".join(f"<figure style='max-width:{_width(svg)}px'>{svg}<figcaption>{escape(title)}</figcaption></figure>"
                   for title, svg in pictures)
    head = f"{p.id}: {p.printer} ({p.profile}, {p.technology}, {p.material})" + (f", {p.state}" if states else "")
    facts = "<table>" + "".join(f"<tr><th>{escape(k)}</th><td>{escape(v)}</td></tr>"
                                for k, v in plate_facts(p, states=states)) \
        + "</table>"
    if not p.items:                 # a failed plate with no survivor: what it was and what was lost
        return (f"<section class='plate' id='plate-{escape(p.id)}'><h3>{escape(head)}</h3><div class='plate-body'>"
                f"{facts}{lost}</div></section>")
    if p.technology == "powder":   # three views side by side, tables under them
        return (f"<section class='plate' id='plate-{escape(p.id)}'><h3>{escape(head)}</h3>"
                f"<div class='views'>{figs}</div>{legend}<div class='plate-body'>{facts}{copies}</div></section>")
    return (f"<section class='plate' id='plate-{escape(p.id)}'><h3>{escape(head)}</h3><div class='plate-body'>"
            f"<div style='max-width:{max([_width(svg) for _, svg in pictures] + [360])}px'>{figs}{legend}{facts}</div>"
            f"{copies}</div></section>")


def _timeline(svg: str, bars: Sequence[Bar], unlabelled: Sequence[Bar], now) -> str:
    out = [svg]
    if unlabelled:
        out.append("<p><small>Too short to carry their name: " + "; ".join(
            escape(f"{b.label} on {b.row}, {moment(b.start)} to {moment(b.free)}") for b in unlabelled)
            + ".</small></p>")
    return "".join(out)


def write_html(plan: Plan, path: Path, *, views, timeline: tuple[str, Sequence[Bar], Sequence[Bar]],
               safety: Sequence[str], extra=(), now=None) -> Path:
    """Write the report page; see :func:`packer.output.report.write_reports` for the arguments."""
    orders = [o.order for o in plan.orders]
    states = has_states(plan)
    heading, under = plan_title(plan)
    h = [f"<!doctype html><html lang='en'><head><meta charset='utf-8'><title>{escape(heading)}</title>"
         f"<style>{CSS}</style></head><body>",
         f"<h1>{escape(heading)}</h1><p>{escape(under)}; job file "
         f"<code>{escape(Path(plan.job_file).name)}</code>; {plural(len(plan.plates), 'plate')} on "
         f"{plural(len({p.printer for p in plan.plates}), 'printer')}.</p>",
         "<div class='safety'><strong>Safety.</strong><ul>" + "".join(f"<li>{escape(s)}</li>" for s in safety)
         + "</ul></div>", "<h2>Summary</h2>", _facts(summary_facts(plan))]
    headers, rows = bound_rows(plan)
    if rows:
        h.append(_table(headers, rows, numeric=(1, 2)))
    notes = planner_notes(plan)
    if notes:
        h.append("<div class='notes'><strong>Notes for the planner.</strong>" + _facts(notes) + "</div>")
    h += [f"<h2>{escape(title)}</h2>{body}" for title, body, _ in extra]
    if plan.problems:
        h.append("<h2>Problems in the input</h2><ul>" +
                 "".join(f"<li><code>{escape(p)}</code></li>" for p in plan.problems) + "</ul>")
    h.append("<h2>Timeline</h2><p>One row per printer; bars are plates, coloured by the material loaded.</p>")
    h.append(_timeline(*timeline, now))
    h.append("<h2>Plates</h2><p>Each drawing is to scale (grid 10 mm, scale bar below); the numbers on the "
             "copies are the tags of the copy table beside it.</p>")
    h += [_plate_section(plan, p, views.get(p.id, []), orders, states) for p in shown_plates(plan)]
    h.append("<h2>Parts on the plates</h2>" + _table(["part", "mesh file", "material", "copies", "volume per copy (cm³)",
                                         "mass per copy (g)", "plates"], parts_rows(plan), numeric=(3, 4, 5)))
    h.append("<h2>Material totals</h2><h3>Per material</h3>" + _table(
        ["technology", "material", "plates", "copies", "amount"],
        [(t.technology, t.material, t.plates, t.copies, t.amount) for t in totals_by_material(plan)],
        numeric=(2, 3)))
    h.append("<h3>Per printer</h3>" + _table(
        ["printer", "material", "plates", "copies", "amount"],
        [(t.printer, t.material, t.plates, t.copies, t.amount) for t in totals_by_printer(plan)], numeric=(2, 3)))
    order_table, bad = order_rows(plan)
    h.append("<h2>Orders</h2>" + _table(["order", "priority", "due", "copies placed", "plates", "expected done",
                                          "status"], order_table, bad=bad, numeric=(1,)))
    if plan.unplaced:
        reasons = Counter(u.reason for u in plan.unplaced)
        h.append("<h2>Not placed</h2>" + _table(["order", "part", "copy", "reason"],
                                                [(u.order, u.part, u.copy, u.reason) for u in plan.unplaced]))
        h.append("<p>" + "; ".join(escape(f"{plural(n, 'copy')}: {r}") for r, n in reasons.items()) + "</p>")
    h.append("</body></html>")
    path.write_text("\n".join(h), encoding="utf-8")
    return path
