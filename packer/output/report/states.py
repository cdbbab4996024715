"""What a replanned version adds to the report: plate states, lost copies, cancelled orders.

A first plan has every plate ``planned``; a replan (:mod:`packer.replan`) marks
plates printing, finished or failed, keeps failed plates without survivors as
``records`` and lists cancelled orders with what to do with their copies.
"""

from __future__ import annotations

from collections import Counter

from packer.output.plan import Plan, PlatePlan
from packer.output.report.fmt import duration, moment

__all__ = ["LEFTOVER", "cancelled_note", "title", "state_row", "lost_rows", "shown_plates", "has_states",
           "cancelled_on_plates"]

LEFTOVER = {"stock": "keep as stock", "scrap": "scrap"}


def cancelled_note(plan: Plan, order: str) -> str:
    """``cancelled: keep as stock`` (or ``scrap``) for a copy of a cancelled order, else empty."""
    return f"cancelled: {LEFTOVER.get(plan.cancelled[order], plan.cancelled[order])}" if order in plan.cancelled else ""


def title(plan: Plan) -> tuple[str, str]:
    """(heading, line under it): a replanned version names itself and its moment."""
    if plan.version > 1 and plan.now is not None:
        return (f"Plan for {plan.job}, version {plan.version}",
                f"Replanned at {moment(plan.now)} (the first plan started {moment(plan.start)})")
    return f"Plan for {plan.job}", f"Planning from {moment(plan.start)}"


def state_row(p: PlatePlan) -> tuple[str, str]:
    """("state", words) of a plate: planned, printing since, finished at, failed at."""
    if p.state == "failed":
        ran = (p.end - p.start).total_seconds()
        return ("state", f"failed at {moment(p.end)}, after {duration(ran)} of an estimated {duration(p.print_s)}")
    if p.state == "printing":
        return ("state", f"printing since {moment(p.state_at or p.start)}")
    if p.state == "finished":
        return ("state", f"finished at {moment(p.state_at or p.end)}")
    return ("state", "planned" + (f" at {moment(p.state_at)}" if p.state_at else ""))


def lost_rows(p: PlatePlan) -> list[tuple[str, str, int]]:
    """(order, part, copies) lost when a failed plate failed."""
    return [(o, pt, n) for (o, pt), n in sorted(Counter((c.order, c.part) for c in p.lost).items())]


def shown_plates(plan: Plan) -> list[PlatePlan]:
    """Plates of the plan plus failed plates with no survivor, by start."""
    return sorted(tuple(plan.plates) + tuple(plan.records), key=lambda p: (p.start, p.id))


def has_states(plan: Plan) -> bool:
    """True when states are worth showing: a replanned version, or a plate not merely planned."""
    return plan.version > 1 or any(p.state != "planned" for p in shown_plates(plan))


def cancelled_on_plates(plan: Plan) -> int:
    """Copies of cancelled orders that stay on their plates (printed or printing)."""
    return sum(1 for p in plan.plates for c in p.items if c.order in plan.cancelled)
