"""Replanning puts lateness first: a plate waiting for a down printer moves to an idle one.

The case (our own data): a Monday at 07:00. ``bench-a`` (mid-size filament
plate) prints P01 and has P02 planned after it: four housings of order W-1
(priority 3, due 17:00). ``wide-c`` (large filament plate, same material)
prints P03 until 12:27 and is idle from 12:32. At 10:00, P01 is reported
failed at 09:40 and ``bench-a`` is down from 10:30 to 14:30. Left on its
printer, P02 cannot run before the window (it needs about 3 h) and ends after
14:30 + 3 h, 33 min after its due time. On ``wide-c`` (nested again for the
large plate) it runs from 12:32 and is done by about 14:20.
"""

from datetime import datetime, timedelta

from packer.bench.standin import ShelfLayouts
from packer.bench.daygen import PartBox, bench_profiles, shelf_fits
from packer.fleet.planner import CopyRef
from packer.fleet.timemodel import PartStats, plate_time
from packer.intake.job import Calendar, Printer
from packer.replan.changes import changes_markdown, compare
from packer.replan.planner import ReplanSettings, replan
from packer.replan.events import Added, Down, Failed
from packer.replan.state import PlanState, PlateState, apply_events

MON = datetime(2026, 3, 2, 7, 0)
CAL = Calendar(shift_start=datetime(2026, 1, 1, 7).time(), shift_end=datetime(2026, 1, 1, 19).time(),
               days=(0, 1, 2, 3, 4))
PROF = bench_profiles()
W, D, H, SOLID = 70.0, 50.0, 40.0, 0.35


def _stats(w, d, h, solid):
    return PartStats(w * d * h * solid, 2 * w * d + 2 * (w + d) * h * 1.3, h, w * d)


PARTS = (PartBox("housing", "filament", W, D, H, _stats(W, D, H, SOLID)),
         PartBox("clip", "filament", 20.0, 15.0, 6.0, _stats(20.0, 15.0, 6.0, 0.3)))
STATS = tuple(p.stats for p in PARTS)
PRINTERS = (Printer("bench-a", PROF["fil-m"], MON, ("PLA",)), Printer("wide-c", PROF["fil-l"], MON, ("PLA",)))
FAST = ReplanSettings(seconds=1.0, schedule_s=2.0)


def _copies(order, kind, n, due, priority=1):
    return tuple(CopyRef(order, PARTS[kind].name, k + 1, kind, "PLA", due, priority) for k in range(n))


def _plate(pid, printer, copies, start, machine_s):
    end = start + timedelta(seconds=machine_s)
    return PlateState(id=pid, printer=printer, material="PLA", copies=copies, start=start, end=end,
                      free=end + timedelta(minutes=5), machine_s=machine_s, clear_s=300.0)


def _plan():
    p02 = _copies("W-1", 0, 4, MON.replace(hour=17), priority=3)
    m02 = plate_time(PROF["fil-m"], [STATS[0]] * 4).machine_s
    plates = (_plate("P01", "bench-a", _copies("W-2", 1, 12, MON + timedelta(days=1, hours=5)), MON, 3 * 3600 + 600),
              _plate("P02", "bench-a", p02, MON.replace(hour=10, minute=15), m02),
              _plate("P03", "wide-c", _copies("W-3", 1, 20, MON + timedelta(days=1, hours=5)), MON,
                     5 * 3600 + 27 * 60))
    return PlanState(start=MON, plates=plates, unplaced=(), next_number=4)


def _events():
    return [Failed("P01", MON.replace(hour=9, minute=40), origin="test"),
            Down("bench-a", MON.replace(hour=10, minute=30), MON.replace(hour=14, minute=30), origin="test")]


def _replan(state, events, now, settings=FAST):
    sit = apply_events(state, events, now=now, printers=PRINTERS, calendar=CAL, stats=STATS)
    return replan(sit, printers=PRINTERS, stats=STATS, calendar=CAL, layouts=ShelfLayouts(PARTS), settings=settings)


def _done(state, order):
    return max(p.free for p in state.plates if any(c.order == order for c in p.copies))


def test_the_waiting_plate_moves_to_the_idle_printer_and_the_order_is_on_time():
    now = MON.replace(hour=10)
    # the case as stated: kept on bench-a the plate waits for the window's end and W-1 is 33 min late
    m02 = plate_time(PROF["fil-m"], [STATS[0]] * 4).machine_s
    stuck = MON.replace(hour=14, minute=30) + timedelta(seconds=m02 + 300)
    assert 30 * 60 < (stuck - MON.replace(hour=17)).total_seconds() < 36 * 60
    done = _replan(_plan(), _events(), now)
    assert _done(done.state, "W-1") <= MON.replace(hour=17)
    moved = [p for p in done.state.plates if any(c.order == "W-1" for c in p.copies)]
    assert len(moved) == 1 and moved[0].printer == "wide-c" and moved[0].start >= MON.replace(hour=12, minute=32)
    why = done.stats["reasons"][moved[0].id]
    assert "another profile" in why and "lateness" in why
    ch = compare(_plan(), done.state)
    text = "\n".join(changes_markdown(ch, old_version=1, new_version=2, now=now, events=[], notes=[],
                                      state=done.state, reasons=done.stats["reasons"]))
    assert f"{moved[0].id}: moved to wide-c (another profile) and nested again, for lateness" in text
    assert "W-1" not in ch.late_now


def test_without_moves_to_another_profile_the_order_is_late():
    # the same replan with the plate held to its own profile: the lateness the move removes is real
    done = _replan(_plan(), _events(), MON.replace(hour=10), settings=ReplanSettings(seconds=1.0, schedule_s=2.0,
                                                                                     alt_calls=0,
                                                                                     dissolve_share=0.0))
    assert _done(done.state, "W-1") > MON.replace(hour=17, minute=30)


def test_a_later_added_order_does_not_push_the_first_one_late_again():
    first = _replan(_plan(), _events(), MON.replace(hour=10))
    rush = _copies("W-9", 1, 8, MON.replace(hour=18), priority=1)
    done = _replan(first.state, [Added(None, origin="test", copies=rush)], MON.replace(hour=10, minute=20))
    assert _done(done.state, "W-1") <= MON.replace(hour=17)
    assert _done(done.state, "W-9") <= MON.replace(hour=18)


def test_a_down_printer_is_used_before_its_window():
    # P01 fails at 09:20; bench-a is down from 12:00 to 14:00; wide-c is busy all day. The lost
    # copies (about an hour of printing) go on bench-a before the window, not after it
    plates = (_plate("P01", "bench-a", _copies("W-2", 1, 12, MON.replace(hour=13)), MON, 3 * 3600),
              _plate("P03", "wide-c", _copies("W-3", 1, 20, MON + timedelta(days=1)), MON, 11 * 3600))
    state = PlanState(start=MON, plates=plates, unplaced=(), next_number=4)
    events = [Failed("P01", MON.replace(hour=9, minute=20), origin="test"),
              Down("bench-a", MON.replace(hour=12), MON.replace(hour=14), origin="test")]
    done = _replan(state, events, MON.replace(hour=9, minute=30))
    again = [p for p in done.state.plates if p.state == "planned"]
    assert again and all(p.printer == "bench-a" for p in again)
    assert all(p.free <= MON.replace(hour=12) for p in again), [(p.start, p.free) for p in again]
    assert _done(done.state, "W-2") <= MON.replace(hour=13)


def test_a_plate_that_lost_cancelled_copies_takes_waiting_copies_or_stays_as_it_was():
    from packer.replan.events import Cancelled
    keep, gone = _copies("W-7", 0, 2, MON.replace(hour=18)), _copies("W-8", 0, 2, MON.replace(hour=18))
    m = plate_time(PROF["fil-m"], [STATS[0]] * 4).machine_s
    plates = (_plate("P01", "bench-a", _copies("W-2", 1, 6, MON.replace(hour=18)), MON, 2 * 3600),
              _plate("P02", "bench-a", keep + gone, MON.replace(hour=9, minute=10), m),
              _plate("P03", "wide-c", _copies("W-3", 1, 20, MON + timedelta(days=1)), MON, 11 * 3600))
    state = PlanState(start=MON, plates=plates, unplaced=(), next_number=4)
    # cancelled and a failure: the six lost clips wait for a plate and join P02's two housings
    done = _replan(state, [Cancelled("W-8", origin="test"), Failed("P01", MON.replace(hour=8), origin="test")],
                   MON.replace(hour=8, minute=30))
    new = [p for p in done.state.plates if p.state == "planned"]
    assert len(new) == 1 and new[0].origin == "renested:P02"
    assert {c.order for c in new[0].copies} == {"W-7", "W-2"} and len(new[0].copies) == 8
    assert shelf_fits(PARTS)(PRINTERS[0], list(new[0].copies)) is not None    # the stand-in check, exact for boxes
    assert "nested again" in done.stats["reasons"][new[0].id]
    # cancelled only: nothing waits, the plate keeps its two housings where they were
    done = _replan(state, [Cancelled("W-8", origin="test")], MON.replace(hour=8, minute=30))
    kept = [p for p in done.state.plates if p.state == "planned"]
    assert len(kept) == 1 and kept[0].origin == "shrunk:P02" and kept[0].layout is None
    assert {c.order for c in kept[0].copies} == {"W-7"}
