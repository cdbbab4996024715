"""The least weighted lateness any replan of a situation can reach (a lower bound).

The replan tries its cheap candidates first (keep the plates, move them to other
printers and profiles) and plans every plate not started again only while an
order is later than it need be. This bound says when no candidate can do
better. It is the larger of two lower bounds, each valid on its own:

- **per copy**: every order is complete at the earliest when its frozen plates
  are cleared and each of its copies not started, alone on a plate of the best
  usable printer for it, started when that printer is ready (left-shifted around
  shifts and down windows), is cleared. A plate's time only grows with its
  copies, so no plan completes an order earlier.
- **capacity**: the fleet's due-aware load bound
  (:func:`packer.fleet.duebounds.load_bounds`: per printer group, the work the
  orders bring against the work the printers can have cleared by each moment,
  and the transportation bound on weighted lateness) on the printers usable now,
  each from the moment it is ready. The replan measures lateness when a plate
  is cleared, so the profiles' post-processing is left out of it; down windows
  still to come are left out too (more capacity than there is: the bound stays
  a lower bound).

Both take every usable printer that runs a copy's material as able to print it
(whether the part fits that plate is not asked, which would cost a layout call
per printer and kind: 1.6 s on the 2,000-copy bench day); more printers only
make the bounds lower, so they stay valid.

Orders whose copies are all on frozen plates add their lateness to both.
"""

from __future__ import annotations

from dataclasses import replace

from packer.fleet.duebounds import load_bounds
from packer.fleet.records import PlannerSettings, copy_key
from packer.fleet.scoring import copy_weight
from packer.fleet.timemodel import plate_time
from packer.fleet.timing import slot
from packer.fleet.view import FleetView

__all__ = ["lateness_floor"]


def lateness_floor(copies, frame, *, printers, stats, layouts, reached: float | None = None) -> float:
    """Weighted lateness (s, priority x seconds) no plan of ``copies`` can avoid, with the plates
    fixed in ``frame`` (frozen and pinned) as they are: the larger of the per-copy and the
    capacity bound (see the module docstring).

    ``copies``: the copies the plans place (on plates not started); ``frame`` a
    :class:`~packer.replan.sequence.Frame`. ``reached``: the lateness of a plan already
    found; when the per-copy bound reaches it, the capacity bound is not computed (the
    plan is as good as any).
    """
    fixed_only, per_copy, capacity = _parts(copies, frame, printers=printers, stats=stats, layouts=layouts,
                                                 reached=reached)
    return fixed_only + max(per_copy, capacity)


def _parts(copies, frame, *, printers, stats, layouts, reached: float | None = None) -> tuple[float, float, float]:
    """(lateness of the orders with no copy in ``copies``, per-copy bound and capacity bound of
    the others), weighted seconds each; the capacity bound is 0 when ``fixed + per copy``
    reaches ``reached``."""
    usable = [p for p in printers if p.name in frame.ready]
    done, due, weight = {}, {}, {}
    for p in frame.fixed:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.free), p.free)
            due[c.order] = c.due
            weight[c.order] = max(weight.get(c.order, 0.0), copy_weight(c))
    placed = {c.order for c in copies}
    soonest: dict = {}
    for c in copies:
        key = (c.kind, c.material)
        if key not in soonest:
            soonest[key] = _alone(c, usable, frame, stats)
        t = soonest[key]
        if t is None:
            continue
        done[c.order] = max(done.get(c.order, t), t)
        due[c.order] = c.due
        weight[c.order] = max(weight.get(c.order, 0.0), copy_weight(c))
    late = {o: weight[o] * max(0.0, (done[o] - due[o]).total_seconds()) for o in done}
    fixed_only = sum(v for o, v in late.items() if o not in placed)
    per_copy = sum(v for o, v in late.items() if o in placed)
    if reached is not None and round(fixed_only + per_copy) >= round(reached):
        return fixed_only, per_copy, 0.0
    forced = {o: (done[o], due[o], weight[o]) for o in sorted(placed) if o in done and done[o] > due[o]}
    return fixed_only, per_copy, _capacity(copies, usable, frame, stats, layouts, forced)


def _capacity(copies, usable, frame, stats, layouts, forced) -> float:
    """The fleet's load bound on weighted lateness (s) of ``copies`` on the usable printers."""
    if not copies or not usable:
        return 0.0
    fleet = []
    for p in sorted(usable, key=lambda p: p.name):
        fleet.append(replace(p, available_from=frame.free_from(p.name),
                             profile=replace(p.profile, post_processing=())))
    eligible = {copy_key(c): [i for i, p in enumerate(fleet) if c.material in p.materials] for c in copies}
    pool = [c for c in copies if eligible[copy_key(c)]]
    if not pool:
        return 0.0
    view = FleetView(fleet, tuple(stats), frame.calendar, frame.now, PlannerSettings(), layouts, eligible)
    return 3600.0 * load_bounds(view, pool, forced)["lateness_bound_h"]


def _alone(c, usable, frame, stats):
    """When a copy alone on a plate is cleared at the soonest, on any usable printer that runs its
    material (whether the part fits that plate is not asked: a layout call per printer and kind,
    and more printers only make the bound earlier); None if none runs it."""
    best = None
    for p in usable:
        if c.material not in p.materials:
            continue
        est = plate_time(p.profile, [stats[c.kind]])
        got = slot(frame.calendar, frame.ready[p.name], est.machine_s, est.clear_s, frame.downs.get(p.name, ()))
        if got is not None and (best is None or got[2] < best):
            best = got[2]
    return best
