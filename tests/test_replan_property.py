"""Property: after any sequence of events, every copy that is not cancelled is in exactly one place.

A place is a finished, printing, failed (survivor) or planned plate, or the
unplaced list with a reason. No copy is duplicated or lost, and no plate that
was finished, failed or printing changes its contents or printer.

The fleet is a generated day (packer.bench.daygen) with the stand-in layout
check (skyline packing of rectangles, exact for them), so each replan takes
milliseconds; the replanning itself is the real one (fleet planner, CP-SAT
sequencing, calendar).
"""

from datetime import timedelta
from functools import lru_cache

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from packer.errors import InputError
from packer.bench.standin import ShelfLayouts
from packer.bench.daygen import make_day
from packer.fleet.planner import CopyRef, plan_fleet
from packer.intake.identity import copy_key
from packer.replan.planner import ReplanSettings, replan
from packer.replan.events import Added, Cancelled, Down, Failed, Finished, Printing
from packer.replan.state import FROZEN, apply_events, state_of_fleet

FAST = ReplanSettings(seconds=0.3, schedule_s=0.5)


@lru_cache(maxsize=None)
def _day(seed: int):
    day = make_day(copies=30, printers=4, seed=seed, small=True)
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar, start=day.start,
                     layouts=ShelfLayouts(day.parts), seconds=0.3, seed=0)
    return day, state_of_fleet(res.plates, res.unplaced, start=day.start)


def _event(data, state, day, step, used):
    kind = data.draw(st.sampled_from(["failed", "finished", "printing", "down", "cancelled", "added", "failed"]))
    plates = sorted(state.plates, key=lambda p: p.id)
    if data.draw(st.integers(0, 9)) > 0:   # mostly events that fit the plan; now and then one that does not
        plates = [p for p in plates if p.state in ("planned", "printing") and p.id not in used] or plates
    if kind in ("failed", "finished", "printing") and plates:
        p = data.draw(st.sampled_from(plates))
        used.add(p.id)
        if kind == "failed":
            survived = tuple(copy_key(c) for c in p.copies if data.draw(st.booleans()))
            return Failed(p.id, survived=survived if data.draw(st.booleans()) else (), origin="test")
        return (Finished if kind == "finished" else Printing)(p.id, origin="test")
    if kind == "down":
        pr = data.draw(st.sampled_from([p.name for p in day.printers]))
        lead = timedelta(minutes=data.draw(st.integers(-120, 600)))
        span = data.draw(st.one_of(st.none(), st.integers(30, 900)))
        return ("down", pr, lead, span)
    if kind == "cancelled":
        orders = sorted({c.order for c in state.copies()} - set(state.cancelled) - used) or sorted(state.cancelled)
        order = data.draw(st.sampled_from(orders))
        used.add(order)
        return Cancelled(order, origin="test")
    template = data.draw(st.sampled_from(list(day.copies)))
    n = data.draw(st.integers(1, 4))
    used.add(f"N{step}-{len(used)}")
    copies = tuple(CopyRef(f"N{step}-{len(used)}", template.part, k + 1, template.kind, template.material,
                           template.due + timedelta(hours=data.draw(st.integers(-3, 20))), 2) for k in range(n))
    return Added(None, origin="test", copies=copies)


def _check(before, after, ordered: set):
    gone = set(after.cancelled)
    seen = {}
    for p in after.plates:
        for c in p.copies:
            seen.setdefault(copy_key(c), []).append(p.id)
    for c, why in after.unplaced:
        assert why, f"unplaced {copy_key(c)} without a reason"
        seen.setdefault(copy_key(c), []).append("unplaced")
    dup = {k: v for k, v in seen.items() if len(v) > 1}
    assert not dup, f"copies in two places: {dup}"
    live = {k for k in ordered if k[0] not in gone}
    assert live <= set(seen), f"copies lost: {sorted(live - set(seen))[:5]}"
    assert set(seen) <= ordered, f"copies from nowhere: {sorted(set(seen) - ordered)[:5]}"
    for k, where in seen.items():          # a cancelled copy may stay only where it was printed
        if k[0] in gone:
            assert where[0] != "unplaced" and \
                next(p for p in after.plates if p.id == where[0]).state in FROZEN, k
    new = {p.id: p for p in after.plates}
    for p in before.plates:
        if p.state in ("finished", "failed"):
            assert new.get(p.id) == p, f"frozen plate {p.id} changed"
        elif p.state == "printing":
            q = new[p.id]
            assert q.state in FROZEN and q.printer == p.printer
            assert {copy_key(c) for c in q.copies} | {copy_key(c) for c in q.lost} == {copy_key(c) for c in p.copies}
    for p in after.plates:
        if p.state == "planned":
            assert p.start >= after.now and p.copies


@settings(max_examples=300, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.data())
def test_every_copy_in_exactly_one_place(data):
    day, state = _day(data.draw(st.integers(0, 3), label="seed"))
    ordered = {copy_key(c) for c in day.copies}
    now = day.start
    for step in range(data.draw(st.integers(1, 4), label="steps")):
        now = now + timedelta(minutes=data.draw(st.integers(0, 480)))
        events, used = [], set()
        for _ in range(data.draw(st.integers(0, 4))):
            ev = _event(data, state, day, step, used)
            if isinstance(ev, tuple):
                _, pr, lead, span = ev
                start = max(day.start, now + lead)
                ev = Down(pr, start, start + timedelta(minutes=span) if span else None, origin="test")
            events.append(ev)
        try:
            sit = apply_events(state, events, now=now, printers=day.printers, calendar=day.calendar,
                               stats=day.stats)
        except InputError:
            event("events rejected (they do not fit the plan)")
            continue                       # an event that does not fit the plan: nothing changes
        done = replan(sit, printers=day.printers, stats=day.stats, calendar=day.calendar,
                      layouts=ShelfLayouts(day.parts), settings=FAST)
        ordered |= {copy_key(c) for e in events if isinstance(e, Added) for c in e.copies}
        _check(state, done.state, ordered)
        event(f"replanned {sum(1 for e in events if not isinstance(e, Down))} plate/order events, "
              f"{sum(1 for e in events if isinstance(e, Down))} down")
        state = done.state
