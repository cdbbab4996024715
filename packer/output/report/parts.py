"""The parts table section of the report: one row per mesh, then each file in words."""

from __future__ import annotations

import os
from html import escape
from pathlib import Path

from packer.output.plan import Plan

__all__ = ["parts_sections", "repair_note"]

_HEAD = ("file", "status", "size laid flat (mm)", "volume (mm^3), method", "defects")


def _cells(row: dict) -> list[str]:
    name = Path(row["file"]).name
    defects = ", ".join(f"{d['kind']} ({d['count']})" for d in row["defects"]) or "none"
    if row["status"] == "refused":
        return [name, "refused", "", "", defects]
    size = " x ".join(f"{v:g}" for v in row["size_laid_flat_mm"])
    return [name, row["status"], size, f"{row['volume_mm3']:.1f}, {row['volume_method']}", defects]


def _shown(row: dict, job_file: str) -> str:
    """The mesh path relative to the job file's folder: a report must not name folders of the
    machine it was made on (reruns elsewhere give the same bytes)."""
    return Path(os.path.relpath(Path(row["file"]), Path(job_file).resolve().parent)).as_posix()


def _notes(row: dict, job_file: str) -> list[str]:
    row = {**row, "file": _shown(row, job_file)}
    out = []
    if row["status"] != "refused":
        out.append(f"{row['file']}: {row['format']}, {row['unit']} ({row['unit_source']}), "
                   f"{row['triangles']} triangles, {row['shells']} shells, footprint "
                   f"{row['footprint_mm2']:.1f} mm^2, {row['orientation']}; fits {', '.join(row['fits']) or 'none'}")
    out += [f"{row['file']}: {d['severity']}: {d['kind']}: {d['detail']} ({d['action']})"
            for d in row["defects"]]
    if row.get("repair"):
        out.append(f"{row['file']}: {repair_note(row['repair'])}")
    return out


def repair_note(fix: dict) -> str:
    """What repair changed, in words: counts before -> after, what it did and could not do."""
    b, a = fix["before"], fix["after"]
    counts = ", ".join(f"{label} {b[k]} -> {a[k]}" for k, label in (
        ("open_edges", "open edges"), ("crowded_edges", "edges of more than two triangles"), ("shells", "shells"),
        ("degenerate", "degenerate triangles"), ("flipped", "triangles wound against their neighbours")))
    state = "closed and consistently wound" if a["closed"] else "not closed"
    text = (f"repaired ({fix['file']}, {state}): {counts}; volume {b['volume_mm3']:.1f} mm^3 ({b['volume_method']}) "
            f"-> {a['volume_mm3']:.1f} mm^3 ({a['volume_method']}); did: {'; '.join(fix['changed'])}")
    return text + (f"; could not: {'; '.join(fix['left'])}" if fix["left"] else "")


def parts_sections(plan: Plan) -> list[tuple[str, str, str]]:
    """``(title, html, markdown)`` of the parts table, or nothing when the plan has no parts rows."""
    rows = plan.parts
    if not rows:
        return []
    html = ["<table><tr>" + "".join(f"<th>{escape(h)}</th>" for h in _HEAD) + "</tr>"]
    md = ["| " + " | ".join(_HEAD) + " |", "|" + "---|" * len(_HEAD)]
    for row in rows:
        cells = _cells(row)
        html.append("<tr>" + "".join(f"<td>{escape(c)}</td>" for c in cells) + "</tr>")
        md.append("| " + " | ".join(c.replace("|", "/") for c in cells) + " |")
    html.append("</table>")
    notes = [n for row in rows for n in _notes(row, plan.job_file)]
    style = ' style="overflow-wrap: anywhere"'
    html.append(f"<ul{style}>" + "".join(f"<li>{escape(n)}</li>" for n in notes) + "</ul>")
    md += [""] + [f"- {n}" for n in notes]
    return [("Parts", "\n".join(html), "\n".join(md))]
