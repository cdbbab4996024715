"""How fleet plans are scored: weighted lateness, finish, plates.

Used by every step of the planner that compares plans, and by replanning.
A plate counts as done when its parts are through post-processing
(:attr:`~packer.fleet.records.PlannedPlate.done`); plates without that attribute
(replan states) are done when they are cleared (``free``).
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime

__all__ = ["copy_weight", "score_plan", "late_orders"]


def copy_weight(c) -> float:
    """Lateness weight of a copy: ``priority * (1 + boost)``."""
    return c.priority * (1.0 + c.boost)


def _done_at(p) -> datetime:
    return getattr(p, "done", p.free)


def score_plan(plates: Sequence, origin: datetime) -> tuple[float, float, int]:
    """(weighted lateness s, finish s from ``origin``, plates): smaller is better, in this order.

    An order is done when its last plate is done; its weight is the largest
    :func:`copy_weight` of its copies; the finish is when the last printer is free.
    """
    done: dict[str, datetime] = {}
    due: dict[str, tuple[datetime, float]] = {}
    for p in plates:
        t = _done_at(p)
        for c in p.copies:
            done[c.order] = max(done.get(c.order, t), t)
            w = due.get(c.order, (c.due, 0.0))[1]
            due[c.order] = (c.due, max(w, copy_weight(c)))
    lat = sum(w * max(0.0, (done[o] - d).total_seconds()) for o, (d, w) in due.items())
    finish = max(((p.free - origin).total_seconds() for p in plates), default=0.0)
    return (round(lat, 3), round(finish, 3), len(plates))


def late_orders(plates: Sequence) -> set[str]:
    """The orders whose last plate is done after their due time."""
    done: dict[str, tuple[datetime, datetime]] = {}
    for p in plates:
        t = _done_at(p)
        for c in p.copies:
            prev = done.get(c.order, (t, c.due))[0]
            done[c.order] = (max(prev, t), c.due)
    return {o for o, (d, due) in done.items() if d > due}
