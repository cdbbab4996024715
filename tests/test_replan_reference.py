"""Property: after any sequence of events, the replan is no later than the best plan that keeps
the finished and printing plates fixed and moves the others.

On small generated days (five printers: two mid-size and one large filament
plate, a resin vat and a powder cell; a few plates) every move of the plates
not started can be enumerated: each plate on any printer that runs its material
and holds its copies (nested again for another profile by the stand-in layout
check), in every order per printer, each plate started as early as the shifts
and the printer's down windows allow (left-shifted timing is optimal for a
fixed order: a later ready time never starts a plate earlier). The least
weighted lateness over all of them (sum over orders of priority x (1 +
failures) x lateness of its last plate, the objective the replan documents) is
the reference; the replan's own plan must reach it, up to the rounding of its
sequencing model (ticks of 10 s per plate).

The reference is written here from the calendar rules alone (next shift
moment to start, clearing inside one shift), not with the replan's sequencing.
Down windows here always end; a printer down for good keeps only the plates it
clears before the window (see packer/replan/README.md), which the
enumeration does not model.
"""

import itertools
from dataclasses import replace
from datetime import timedelta
from functools import lru_cache

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from packer.errors import InputError
from packer.fleet.calendar import next_open, printer_free_after
from packer.bench.standin import ShelfLayouts
from packer.bench.daygen import box_can_print, make_day, shelf_fits
from packer.fleet.planner import plan_fleet
from packer.fleet.timemodel import plate_time
from packer.intake.identity import copy_key
from packer.replan.planner import ReplanSettings, replan
from packer.replan.events import Cancelled, Down, Failed, Printing
from packer.replan.state import apply_events, state_of_fleet

SETTINGS = ReplanSettings(seconds=0.3, schedule_s=2.0)
# the replan's stand-in layouts report no work, so its search of other profiles is bounded by
# ReplanSettings.alt_calls only (the enumeration below tries every profile too)
MAX_PLANS = 40_000          # enumerations larger than this are skipped (counted as an event)
TICK_S = 10                 # the sequencing model's time unit (packer.fleet.schedule.TICK_S)


@lru_cache(maxsize=None)
def _day(seed: int):
    day = make_day(copies=70, printers=5, seed=seed, small=True)
    # tight due times (3 to 10 h after the start), so that some orders are late and moves matter
    tight = {o: day.start + timedelta(hours=3 + (k * 5) % 8) for k, o in enumerate(sorted({c.order for c in day.copies}))}
    day = replace(day, copies=tuple(replace(c, due=tight[c.order]) for c in day.copies))
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar, start=day.start,
                     layouts=ShelfLayouts(day.parts), seconds=0.3, seed=0)
    return day, state_of_fleet(res.plates, res.unplaced, start=day.start)


def _free_after(cal, ready, machine_s, clear_s, downs):
    """When a plate started as early as possible from ``ready`` is cleared (outside down windows)."""
    t = ready
    while True:
        begin = next_open(cal, t)
        free = printer_free_after(cal, begin + timedelta(seconds=machine_s), clear_s)
        clash = [u for a, u in downs if a < free and u > begin]
        if not clash:
            return free
        t = max(clash)


def _ways(p, day, usable):
    """(printer name, machine s, clear s) for every printer that can run plate ``p``."""
    fits, can = shelf_fits(day.parts), box_can_print(day.parts)
    by_name = {q.name: q for q in day.printers}
    own = by_name[p.printer].profile.name
    out = []
    for q in day.printers:
        if q.name not in usable or p.material not in q.materials or any(can(q, c) for c in p.copies):
            continue
        if q.profile.name == own:
            out.append((q.name, p.machine_s, q.profile.time.clear_s))
            continue
        layout = fits(q, list(p.copies))
        if layout is not None:
            est = plate_time(q.profile, [day.stats[c.kind] for c in p.copies],
                             build_height_mm=getattr(layout, "build_height_mm", None))
            out.append((q.name, est.machine_s, est.clear_s))
    return out


def _lateness(done_of, weights, dues):
    return sum(w * max(0.0, (done_of[o] - dues[o]).total_seconds()) for o, w in weights.items())


def _reference(after, day, down):
    """Least weighted lateness over every move of the plates not started, or None if too many."""
    fixed = [p for p in after.plates if p.state != "planned"]
    moving = [p for p in after.plates if p.state == "planned"]
    ready = {q.name: max(after.now, q.available_from) for q in day.printers}
    for f in fixed:
        ready[f.printer] = max(ready[f.printer], f.free)
    weights, dues, floor = {}, {}, {}
    for p in after.plates:
        for c in p.copies:
            weights[c.order] = max(weights.get(c.order, 0.0), c.priority * (1.0 + c.boost))
            dues[c.order] = c.due
            if p.state != "planned":
                floor[c.order] = max(floor.get(c.order, p.free), p.free)
    ways = [_ways(p, day, set(ready)) for p in moving]
    count = 1
    for w in ways:
        count *= len(w)
    if count * max(1, len(moving)) ** 2 > MAX_PLANS:
        return None
    best = float("inf")
    for choice in itertools.product(*[range(len(w)) for w in ways]):
        per = {}
        for j, k in enumerate(choice):
            per.setdefault(ways[j][k][0], []).append(j)
        for orders in itertools.product(*[itertools.permutations(js) for js in per.values()]):
            done = dict(floor)
            for js in orders:
                name = ways[js[0]][choice[js[0]]][0]
                t = ready[name]
                for j in js:
                    _, m, c = ways[j][choice[j]]
                    t = _free_after(day.calendar, t, m, c, down.get(name, ()))
                    for cp in moving[j].copies:
                        done[cp.order] = max(done.get(cp.order, t), t)
            best = min(best, _lateness(done, weights, dues))
    return best


def _actual(after):
    weights, dues, done = {}, {}, {}
    for p in after.plates:
        for c in p.copies:
            weights[c.order] = max(weights.get(c.order, 0.0), c.priority * (1.0 + c.boost))
            dues[c.order] = c.due
            done[c.order] = max(done.get(c.order, p.free), p.free)
    return _lateness(done, weights, dues), weights


@settings(max_examples=100, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.data())
def test_no_later_than_the_best_move_of_the_plates_not_started(data):
    day, state = _day(data.draw(st.integers(0, 5), label="seed"))
    names = [q.name for q in day.printers]
    now = day.start
    for _ in range(data.draw(st.integers(1, 3), label="steps")):
        now = now + timedelta(minutes=data.draw(st.integers(0, 180)))
        live = sorted((p for p in state.plates if p.state in ("planned", "printing")), key=lambda p: p.id)
        events = []
        if live and data.draw(st.booleans()):
            p = data.draw(st.sampled_from(live))
            events.append(Failed(p.id, origin="test") if data.draw(st.booleans()) else Printing(p.id, origin="test"))
        if data.draw(st.booleans()):
            a = now + timedelta(minutes=data.draw(st.integers(-60, 300)))
            a = max(a, day.start)
            events.append(Down(data.draw(st.sampled_from(names)), a,
                               a + timedelta(minutes=data.draw(st.integers(30, 480))), origin="test"))
        orders = sorted({c.order for c in state.copies()} - set(state.cancelled))
        if orders and data.draw(st.integers(0, 4)) == 0:
            events.append(Cancelled(data.draw(st.sampled_from(orders)), origin="test"))
        try:
            sit = apply_events(state, events, now=now, printers=day.printers, calendar=day.calendar,
                               stats=day.stats)
        except InputError:
            event("events rejected")
            continue
        done = replan(sit, printers=day.printers, stats=day.stats, calendar=day.calendar,
                      layouts=ShelfLayouts(day.parts, call_s=0.0), settings=SETTINGS)
        state = done.state
        down = {}
        for d in sit.down:
            if d.until is not None:
                down.setdefault(d.printer, []).append((d.start, d.until))
        if any(d.until is None for d in sit.down):
            event("a printer down for good: not enumerated")
            continue
        ref = _reference(state, day, down)
        if ref is None:
            event("too many plans to enumerate")
            continue
        got, weights = _actual(state)
        planned = sum(1 for p in state.plates if p.state == "planned")
        tol = sum(weights.values()) * TICK_S * (planned + 1)
        event(f"enumerated: {planned} plates not started, reference {'late' if ref > 0 else 'on time'}")
        assert got <= ref + tol, (f"replan weighted lateness {got / 3600:.2f} h, best move of the plates not "
                                  f"started {ref / 3600:.2f} h; kept {done.stats['schedule']}")
        # the lateness floor (packer/replan/floor.py) bounds every plan from below: the
        # enumerated best move and the replan's own plan (both rounded to the second)
        floor = done.stats["schedule"]["floor_h"] * 3600
        assert floor <= ref + 1 and floor <= got + 1, (f"floor {floor / 3600:.3f} h above the best move "
                                                       f"{ref / 3600:.3f} h or the replan {got / 3600:.3f} h")
        for p in state.plates:
            if p.state == "planned":
                assert all(copy_key(c)[0] not in state.cancelled for c in p.copies)
