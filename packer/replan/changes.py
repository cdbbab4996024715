"""What a replan changed, in numbers and in words (``changes.md``).

Compares two :class:`~packer.replan.state.PlanState` versions: copies that
moved to another plate, plates new, removed or moved (printer or start),
orders whose completion moved and by how much, and orders now late.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from datetime import datetime
from typing import Sequence

from packer.intake.identity import copy_key
from packer.replan.state import PlanState, fmt_time

__all__ = ["Changes", "compare", "changes_markdown", "changes_html", "fmt_shift"]


@dataclass(frozen=True)
class Changes:
    moved_copies: tuple[tuple[str, str, int, str, str], ...]   # (order, part, copy, from, to): plate id or "unplaced"
    new_plates: tuple[str, ...]
    removed_plates: tuple[str, ...]
    moved_plates: tuple[tuple[str, str, datetime, str, datetime], ...]   # (id, old printer, old start, printer, start)
    orders: tuple[tuple[str, datetime, datetime | None, datetime | None], ...]   # (order, due, done before, done now)
    late_now: tuple[str, ...]
    newly_late: tuple[str, ...]
    changed_plates: tuple[tuple[str, str], ...] = ()   # (old id, new id): same layout less cancelled copies
    new_orders: tuple[str, ...] = ()

    @property
    def plates_changed(self) -> int:
        """Plates new, removed or moved: what the operators must look at again."""
        return len(self.new_plates) + len(self.removed_plates) + len(self.moved_plates) + len(self.changed_plates)


def _where(state: PlanState) -> dict:
    out = {}
    for p in state.plates:
        for c in p.copies:
            out[copy_key(c)] = p.id
    for c, _ in state.unplaced:
        out[copy_key(c)] = "unplaced"
    return out


def _done(state: PlanState) -> tuple[dict, dict]:
    done, due = {}, {}
    for p in state.plates:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.end), p.end)
            due[c.order] = c.due
    for c, _ in state.unplaced:
        due[c.order] = c.due
    incomplete = {c.order for c, _ in state.unplaced}
    return {o: (None if o in incomplete else done.get(o)) for o in due}, due


_CHANGED = ("shrunk:", "renested:", "moved:")
"""Origins of plates made from a plate of the old plan (new id): cancelled copies taken off,
nested again with waiting copies, moved to another profile."""


def compare(old: PlanState, new: PlanState) -> Changes:
    """The changes from ``old`` to ``new`` (copies of cancelled orders are left out)."""
    gone = set(new.cancelled)
    a, b = _where(old), _where(new)
    lost = {copy_key(c): p.id for p in new.plates for c in p.lost}
    moved = []
    for k in sorted(set(a) | set(b)):
        if k[0] in gone:
            continue
        src, dst = a.get(k, "new order"), b.get(k)
        if dst is not None and src != dst:
            moved.append((*k, src if k not in lost or src != lost[k] else f"{src} (failed)", dst))
    old_ids = {p.id: p for p in old.plates}
    new_ids = {p.id: p for p in new.plates}
    changed = tuple((p.origin.split(":", 1)[1], p.id) for p in new.plates if p.origin.startswith(_CHANGED))
    new_plates = tuple(p.id for p in new.plates if p.id not in old_ids and not p.origin.startswith(_CHANGED))
    removed = tuple(p.id for p in old.plates if p.id not in new_ids and p.id not in {a for a, _ in changed})
    shifted = tuple((p.id, old_ids[p.id].printer, old_ids[p.id].start, p.printer, p.start) for p in new.plates
                    if p.id in old_ids and p.state == "planned"
                    and (p.printer != old_ids[p.id].printer
                         or abs((p.start - old_ids[p.id].start).total_seconds()) >= 60))
    d0, due0 = _done(old)
    d1, due1 = _done(new)
    orders = tuple((o, due1.get(o, due0.get(o)), d0.get(o), d1.get(o)) for o in sorted(set(due0) | set(due1))
                   if o not in gone)
    late = tuple(o for o, due, _, t in orders if t is None or t > due)
    was_late = {o for o, due, t, _ in orders if o in due0 and (t is None or t > due)}
    return Changes(tuple(moved), new_plates, removed, shifted, orders, late,
                   tuple(o for o in late if o not in was_late), changed, tuple(o for o in due1 if o not in due0))


def fmt_shift(seconds: float) -> str:
    sign = "+" if seconds >= 0 else "-"
    m = int(round(abs(seconds) / 60))
    return f"{sign}{m // 60} h {m % 60:02d} min" if m >= 60 else f"{sign}{m} min"


def _runs(numbers: Sequence[int]) -> str:
    out, start, prev = [], None, None
    for n in sorted(numbers):
        if start is None:
            start = prev = n
        elif n == prev + 1:
            prev = n
        else:
            out.append(f"{start}" if start == prev else f"{start}-{prev}")
            start = prev = n
    if start is not None:
        out.append(f"{start}" if start == prev else f"{start}-{prev}")
    return ", ".join(out)


def changes_markdown(ch: Changes, *, old_version: int, new_version: int, now: datetime,
                     events: Sequence[str], notes: Sequence[str], rewritten: int | None = None,
                     state: PlanState | None = None, reasons: dict | None = None) -> list[str]:
    """The change report as Markdown lines (also shown as a section of the report).

    With ``state`` (the new plan), the plates are listed by state; ``reasons`` (plate id
    -> why it changed) gives a line per new or changed plate.
    """
    m = [f"Version {new_version}, replanned from version {old_version} at {fmt_time(now)}.", "", "### Events", ""]
    m += [f"- {e}" for e in events] or ["- none (time moved on)"]
    if notes:
        m += ["", "### Applied and assumed", ""] + [f"- {n}" for n in notes]
    if state is not None:
        m += ["", "### Plate states", ""]
        for st in ("finished", "printing", "failed", "planned"):
            ids = [p.id for p in sorted(state.plates, key=lambda p: p.id) if p.state == st]
            m.append(f"- {st}: {', '.join(ids) or 'none'}")
    m += ["", "### Plates", "", f"- new: {', '.join(ch.new_plates) or 'none'}",
          f"- removed: {', '.join(ch.removed_plates) or 'none'}",
          f"- changed (cancelled copies taken off, nested again, or moved to another profile): "
          f"{', '.join(f'{a} -> {b}' for a, b in ch.changed_plates) or 'none'}"]
    if ch.moved_plates:
        m.append("- moved:")
        m += [f"  - {pid}: {a} {fmt_time(s0)} -> {b} {fmt_time(s1)} ({fmt_shift((s1 - s0).total_seconds())})"
              for pid, a, s0, b, s1 in ch.moved_plates]
    else:
        m.append("- moved: none")
    if rewritten is not None:
        m.append(f"- plate files rewritten although their contents did not change: {rewritten}")
    if reasons:
        m += ["", "### Why each plate changed", "",
              "Lateness first; among plans of equal lateness the one that keeps most plates untouched, "
              "then the earliest finish, then the fewest plates.", ""]
        m += [f"- {pid}: {why}" for pid, why in sorted(reasons.items())]
    m += ["", "### Copies moved", ""]
    groups = defaultdict(list)
    for order, part, n, src, dst in ch.moved_copies:
        groups[(order, part, src, dst)].append(n)
    if groups:
        m += ["| order | part | copies | from | to |", "|---|---|---|---|---|"]
        m += [f"| {o} | {p} | {_runs(ns)} | {s} | {d} |" for (o, p, s, d), ns in sorted(groups.items())]
    else:
        m.append("none")
    m += ["", "### Orders", "", "| order | due | done before | done now | moved by | late |", "|---|---|---|---|---|---|"]
    for o, due, t0, t1 in ch.orders:
        if t0 and t1:
            delta = (t1 - t0).total_seconds()
            shift = fmt_shift(delta) if abs(delta) >= 60 else ""
        else:
            shift = "" if t0 == t1 else "-"
        late = "incomplete" if t1 is None else (fmt_shift((t1 - due).total_seconds()) if t1 > due else "")
        before = "new order" if o in ch.new_orders else (fmt_time(t0) if t0 else "incomplete")
        m.append(f"| {o} | {fmt_time(due)} | {before} | "
                 f"{fmt_time(t1) if t1 else 'incomplete'} | {shift} | {late} |")
    m += ["", "### Orders now late", ""]
    m += [f"- {o}" + (" (newly late)" if o in ch.newly_late else "") for o in ch.late_now] or ["none"]
    return m


def changes_html(lines: Sequence[str]) -> str:
    """The change report's Markdown lines (headings, lists, tables, text) as HTML."""
    from html import escape
    out, table, items = [], [], []

    def flush():
        if items:
            out.append("<ul>" + "".join(f"<li>{escape(i)}</li>" for i in items) + "</ul>")
            items.clear()
        if table:
            rows = [r for r in table if not set(r.replace("|", "").strip()) <= {"-"}]
            cells = [[c.strip() for c in r.strip().strip("|").split("|")] for r in rows]
            out.append("<table>" + "".join(
                "<tr>" + "".join(f"<{'th' if k == 0 else 'td'}>{escape(c)}</{'th' if k == 0 else 'td'}>" for c in row)
                + "</tr>" for k, row in enumerate(cells)) + "</table>")
            table.clear()

    for line in lines:
        if line.startswith("|"):
            table.append(line)
            continue
        if line.lstrip().startswith("- "):
            items.append(line.lstrip()[2:])
            continue
        flush()
        if line.startswith("### "):
            out.append(f"<h3>{escape(line[4:])}</h3>")
        elif line.strip():
            out.append(f"<p>{escape(line)}</p>")
    flush()
    return "\n".join(out)
