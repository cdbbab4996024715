"""The summary of a plan in plain words, and the planner notes worth acting on.

Reads only the :class:`~packer.output.plan.Plan` (its bounds and statistics are the
planner's JSON-ready dictionaries); every figure is formatted by
:mod:`packer.output.report.fmt`, so no raw structure reaches the page.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from datetime import datetime

from packer.output.plan import Plan
from packer.output.report.fmt import duration, moment, plural, share
from packer.output.report.states import cancelled_note, cancelled_on_plates

__all__ = ["Fact", "summary_facts", "bound_rows", "planner_notes", "NEARLY_EMPTY"]

#: A flat plate under this area share (or a powder build under this volume share) is
#: called nearly empty in the notes (our own threshold).
NEARLY_EMPTY = {"filament": 0.15, "resin": 0.15, "powder": 0.02}


@dataclass(frozen=True)
class Fact:
    """One sentence of the summary; ``tone`` is ``ok``, ``note`` or ``bad`` (highlighted)."""

    text: str
    tone: str = "ok"


def _parse(value) -> datetime | None:
    if isinstance(value, datetime):
        return value
    try:
        return datetime.fromisoformat(str(value))
    except (TypeError, ValueError):
        return None


def summary_facts(plan: Plan) -> list[Fact]:
    """The summary sentences, top to bottom."""
    cancelled = cancelled_on_plates(plan)
    placed = sum(len(p.items) for p in plan.plates) - cancelled
    ordered = placed + len(plan.unplaced) + cancelled
    facts = [Fact(f"{plural(ordered, 'ordered copy')}: {placed} placed on {plural(len(plan.plates), 'plate')}, "
                  f"{cancelled} cancelled, {len(plan.unplaced)} not placed.",
                  "bad" if plan.unplaced else "ok")]
    for order in sorted(plan.cancelled):
        n = sum(1 for p in plan.plates for c in p.items if c.order == order)
        facts.append(Fact(f"Order {order} is cancelled; {plural(n, 'copy')} of it stay on their plates "
                          f"({cancelled_note(plan, order)}).", "note"))
    for reason, n in Counter(u.reason for u in plan.unplaced).most_common():
        facts.append(Fact(f"Not placed, {plural(n, 'copy')}: {reason}.", "bad"))
    facts += _plate_facts(plan)
    facts += _finish_facts(plan)
    late = [o for o in plan.orders if o.late_s > 0]
    if late:
        words = "; ".join(f"{o.order} by {duration(o.late_s)} (due {moment(o.due)})" for o in late)
        facts.append(Fact(f"{plural(len(late), 'order')} late: {words}.", "bad"))
    else:
        facts.append(Fact("No order is late."))
    sure = plan.bounds.get("load", {}).get("surely_late_orders", plan.bounds.get("surely_late_orders"))
    if isinstance(sure, int) and sure > 0:
        facts.append(Fact(f"{plural(sure, 'order')} cannot be on time in any plan (copies that cannot print "
                          "before their due time even on an empty fleet, or more work due by a time than the "
                          "printers' shifts and nights hold).", "bad"))
    if plan.problems:
        facts.append(Fact(f"{plural(len(plan.problems), 'problem')} in the input, listed below; the rest of "
                          "the job was planned.", "bad"))
    return facts


def bound_rows(plan: Plan) -> tuple[list[str], list[tuple]]:
    """Headers and rows of the plates-against-bounds table, one row per technology/material."""
    rows = []
    for group, b in sorted(plan.bounds.get("plates", {}).items()):
        used, bound = int(b["used"]), int(b["bound"])
        over = f"{used - bound} more ({share((used - bound) / bound)})" if bound and used > bound else "none"
        rows.append((group, used, bound, over))
    return ["technology / material", "plates used", "lower bound", "above the bound"], rows


def _plate_facts(plan: Plan) -> list[Fact]:
    _, rows = bound_rows(plan)
    if not rows:
        return []
    used, bound = sum(r[1] for r in rows), sum(r[2] for r in rows)
    text = (f"{plural(used, 'plate')} against a lower bound of {bound} from part areas and volumes "
            "(no plan can use fewer); per material in the table below.")
    return [Fact(text, "ok" if used == bound else "note")]


def _finish_facts(plan: Plan) -> list[Fact]:
    if not plan.plates:
        return []
    finish = max(p.free for p in plan.plates)
    bound = _parse(plan.bounds.get("load", {}).get("finish_bound") or plan.bounds.get("finish_bound"))
    text = f"The day's work is done (last plate cleared) {moment(finish)}"
    if bound is not None:
        gap = (finish - bound).total_seconds()
        text += (f"; no plan can be done before {moment(bound)}, so this is {duration(gap)} after that bound"
                 if gap > 30 else "; that is the earliest any plan can be done")
    return [Fact(text + ".")]


def planner_notes(plan: Plan) -> list[Fact]:
    """Notes the planner should act on: searches cut short, solvers stopped, nearly empty or under-filled plates."""
    notes = plan.stats or {}
    cuts = list(notes.get("budget_cuts") or [])
    out = [Fact(f"The time budget cut {'this step' if len(cuts) == 1 else 'these steps'} short: {'; '.join(cuts)}. "
                "A longer --seconds may find a better plan.", "note")] if cuts else []
    out += [Fact(f"{net} (the plan is then not guaranteed to repeat exactly).", "note")
            for net in notes.get("safety_nets") or []]
    out += [Fact(str(r), "note") for r in notes.get("remarks") or []]
    merged = notes.get("final_merged_plates")
    for p in plan.plates:
        limit = NEARLY_EMPTY.get(p.technology, 0.15)
        if not p.items or (p.utilization >= limit and not p.note):
            continue
        orders = sorted({c.order for c in p.items})
        due = {o.order: o for o in plan.orders}
        whose = ", ".join(f"{o} (due {moment(due[o].due)})" if o in due else o for o in orders)
        why = p.note or ("kept: the planner merges a plate into another only when no order gets later and the "
                         "day does not end later" if merged is not None else "kept: it was not merged with another plate")
        how = "nearly empty" if p.utilization < limit else "under-filled"
        out.append(Fact(f"{p.id} on {p.printer} is {how} ({plural(len(p.items), 'copy')}, "
                        f"{share(p.utilization)} of the plate); {why}. It carries {whose}.", "note"))
    return out
