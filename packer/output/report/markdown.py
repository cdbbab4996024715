"""``report.md``: the same report as plain Markdown, pictures in ``views/``."""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from packer.output.plan import Plan
from packer.output.report.materials import totals_by_material, totals_by_printer
from packer.output.report.page import order_rows, parts_rows, plate_facts
from packer.output.report.states import cancelled_note, has_states, lost_rows, shown_plates, title as plan_title
from packer.output.report.summary import bound_rows, planner_notes, summary_facts
from packer.output.report.tags import tagged

__all__ = ["write_md"]


def _cell(v) -> str:
    return str(v).replace("|", "\\|")


def _table(headers: Sequence[str], rows: Sequence[Sequence], bad: Sequence[bool] = ()) -> list[str]:
    out = ["| " + " | ".join(headers) + " |", "|" + "---|" * len(headers)]  # Markdown tables need a head row
    for k, row in enumerate(rows):
        cells = [_cell(v) for v in row]
        if k < len(bad) and bad[k]:
            cells = [f"**{c}**" for c in cells]
        out.append("| " + " | ".join(cells) + " |")
    return out


def write_md(plan: Plan, path: Path, view_files, *, safety: Sequence[str], extra=()) -> Path:
    """Write report.md (``view_files``: plate id -> [(title, relative svg path)])."""
    heading, under = plan_title(plan)
    m = [f"# {heading}", "", f"{under}.", "", "## Safety", ""]
    m += [f"- {s}" for s in safety]
    m += ["", "## Summary", ""]
    m += [f"- {'**' + f.text + '**' if f.tone == 'bad' else f.text}" for f in summary_facts(plan)]
    headers, rows = bound_rows(plan)
    if rows:
        m += [""] + _table(headers, rows)
    notes = planner_notes(plan)
    if notes:
        m += ["", "### Notes for the planner", ""] + [f"- {f.text}" for f in notes]
    for title, _, body in extra:
        m += ["", f"## {title}", "", body]
    if plan.problems:
        m += ["", "## Problems in the input", ""] + [f"- `{p}`" for p in plan.problems]
    m += ["", "## Timeline", "", "![timeline](views/timeline.svg)", "", "## Plates"]
    states = has_states(plan)
    for p in shown_plates(plan):
        m += ["", f"### {p.id}: {p.printer} ({p.profile}, {p.technology}, {p.material})", ""]
        m += _table(["plate", p.id], plate_facts(p, states=states))
        m += [""] + [f"![{t}]({f})" for t, f in view_files.get(p.id, [])]
        m += [""] + _table(["tag", "order", "part", "copy"],
                           [(t, c.order + (f" ({cancelled_note(plan, c.order)})" if c.order in plan.cancelled else ""),
                             c.part, c.copy) for t, c in tagged(p)])
        if p.lost:
            m += ["", "Lost when it failed (printed again on other plates):", ""]
            m += _table(["order", "part", "copies"], lost_rows(p))
    m += ["", "## Parts on the plates", ""] + _table(["part", "mesh file", "material", "copies", "volume per copy (cm3)",
                                        "mass per copy (g)", "plates"], parts_rows(plan))
    m += ["", "## Material totals", ""] + _table(
        ["technology", "material", "plates", "copies", "amount"],
        [(t.technology, t.material, t.plates, t.copies, t.amount) for t in totals_by_material(plan)])
    m += [""] + _table(["printer", "material", "plates", "copies", "amount"],
                       [(t.printer, t.material, t.plates, t.copies, t.amount) for t in totals_by_printer(plan)])
    order_table, bad = order_rows(plan)
    m += ["", "## Orders", ""] + _table(["order", "priority", "due", "copies placed", "plates", "expected done",
                                         "status"], order_table, bad)
    if plan.unplaced:
        m += ["", "## Not placed", ""] + _table(["order", "part", "copy", "reason"],
                                                [(u.order, u.part, u.copy, u.reason) for u in plan.unplaced])
    path.write_text("\n".join(m) + "\n", encoding="utf-8")
    return path
