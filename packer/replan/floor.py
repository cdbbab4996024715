"""The least weighted lateness any replan of a situation can reach (a lower bound).

The replan tries its cheap candidates first (keep the plates, move them to other
printers and profiles) and plans every plate not started again only while an
order is later than it need be. This bound says when no candidate can do
better: every order is complete at the earliest when its frozen plates are
cleared and each of its copies not started, alone on a plate of the best
usable printer for it, started when that printer is ready (left-shifted around
shifts and down windows), is cleared. A plate's time only grows with its
copies, so no plan completes an order earlier.
"""

from __future__ import annotations

from packer.fleet.scoring import copy_weight
from packer.fleet.timemodel import plate_time
from packer.fleet.timing import slot

__all__ = ["lateness_floor"]


def lateness_floor(copies, frame, *, printers, stats, layouts) -> float:
    """Weighted lateness (s, priority x seconds) no plan of ``copies`` can avoid, with the plates
    fixed in ``frame`` (frozen and pinned) as they are.

    ``copies``: the copies the plans place (on plates not started); ``frame`` a
    :class:`~packer.replan.sequence.Frame`.
    """
    usable = [p for p in printers if p.name in frame.ready]
    done, due, weight = {}, {}, {}
    for p in frame.fixed:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.free), p.free)
            due[c.order] = c.due
            weight[c.order] = max(weight.get(c.order, 0.0), copy_weight(c))
    soonest: dict = {}
    for c in copies:
        key = (c.kind, c.material)
        if key not in soonest:
            soonest[key] = _alone(c, usable, frame, stats, layouts)
        t = soonest[key]
        if t is None:
            continue
        done[c.order] = max(done.get(c.order, t), t)
        due[c.order] = c.due
        weight[c.order] = max(weight.get(c.order, 0.0), copy_weight(c))
    return sum(weight[o] * max(0.0, (done[o] - due[o]).total_seconds()) for o in done)


def _alone(c, usable, frame, stats, layouts):
    """When a copy alone on a plate is cleared at the soonest, on any usable printer; None if none takes it."""
    best = None
    for p in usable:
        if c.material not in p.materials or layouts.can_print(p, c) is not None:
            continue
        est = plate_time(p.profile, [stats[c.kind]])
        got = slot(frame.calendar, frame.ready[p.name], est.machine_s, est.clear_s, frame.downs.get(p.name, ()))
        if got is not None and (best is None or got[2] < best):
            best = got[2]
    return best
