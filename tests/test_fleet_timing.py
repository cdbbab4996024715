"""Real seconds and ticks, re-timing around down windows, and sequencing from real times.

Every expected value is worked out by hand here from the calendar (shifts 07:00-19:00,
Monday to Friday) and the 10-second tick of the models.
"""

from dataclasses import dataclass
from datetime import datetime, timedelta

from packer.fleet.schedule import TICK_S, ScheduleSettings
from packer.fleet.timing import (down_ticks, order_ticks, sequence_plates, slot, tick_time, tick_windows, ticks,
                                 ticks_up)
from packer.intake.job import Calendar

CAL = Calendar()                                 # 07:00-19:00, Monday to Friday
MON = datetime(2026, 12, 7, 7, 0)                # a Monday, start of the shift


@dataclass(frozen=True)
class _Copy:
    order: str
    due: datetime
    priority: int = 1
    boost: float = 0.0


@dataclass(frozen=True)
class _Plate:
    copies: tuple


def test_ticks_round_outward():
    assert TICK_S == 10
    t = MON + timedelta(seconds=15)
    assert (ticks(t, MON, up=True), ticks(t, MON, up=False)) == (2, 1)
    assert ticks(MON + timedelta(seconds=20), MON, up=True) == 2     # exact ticks stay
    assert (ticks_up(10.0), ticks_up(10.5), ticks_up(0.0)) == (1, 2, 0)
    assert tick_time(360, MON) == MON + timedelta(hours=1)


def test_tick_windows_are_the_shifts():
    # from Monday 07:00 over Monday only and three more days: Monday to Thursday, 12 h = 4320 ticks each
    got = tick_windows(CAL, MON, MON, 0.0)
    assert got[0] == (0, 4320)
    assert got[1] == (8640, 8640 + 4320)             # Tuesday 07:00 is 24 h = 8640 ticks later
    assert all(b - a == 4320 for a, b in got)


def test_order_ticks_take_the_largest_weight_rounded_up():
    a = _Copy("A", MON + timedelta(minutes=5, seconds=5), priority=1, boost=0.5)    # weight 1.5 -> 2
    b = _Copy("B", MON + timedelta(hours=1), priority=3)
    oidx, due, weight = order_ticks([_Plate((b, a)), _Plate((_Copy("A", a.due),))], MON)
    assert oidx == {"A": 0, "B": 1}
    assert due == [30, 360]                          # 305 s rounds down to 30 ticks
    assert weight == [2, 3]


def test_down_ticks_round_outward_and_for_good_passes_the_horizon():
    spans = [(MON + timedelta(seconds=15), MON + timedelta(seconds=25)), (MON + timedelta(hours=1), None)]
    assert down_ticks(spans, MON, 1000) == [(1, 3), (360, 1001)]


def test_slot_waits_out_a_down_window_and_stops_at_one_for_good():
    down = [(MON + timedelta(hours=1), MON + timedelta(hours=2))]
    # 2 h print and 10 min clearing from 07:00 would run into the window: it starts at 09:00
    assert slot(CAL, MON, 7200, 600, down) == (MON + timedelta(hours=2), MON + timedelta(hours=4),
                                              MON + timedelta(hours=4, minutes=10))
    # a plate ending at 18:00 with 2 h of clearing is cleared the next morning (07:00-09:00)
    late = MON + timedelta(hours=9)
    s, e, f = slot(CAL, late, 7200, 7200)
    assert (s, e, f) == (late, late + timedelta(hours=2), MON + timedelta(days=1, hours=2))
    assert slot(CAL, MON, 7200, 600, [(MON + timedelta(hours=1), None)]) is None


def test_sequence_plates_puts_the_urgent_plate_first():
    # one printer, two plates of 1 h each with 10 min clearing: B is due at 08:10, A at noon.
    # B first: B free at 08:10 (on time), A free at 09:20 (on time); A first would make B 70 min late.
    a = _Plate((_Copy("A", MON + timedelta(hours=5)),))
    b = _Plate((_Copy("B", MON + timedelta(hours=1, minutes=10)),))
    ans = sequence_plates([a, b], [[(0, 3600.0)], [(0, 3600.0)]], [600.0, 600.0], ready=[MON], calendar=CAL,
                          origin=MON, last=MON, extra_s=0.0, hint_printer=[0, 0], hint_order=[0, 1],
                          settings=ScheduleSettings(time_limit_s=5.0, deterministic_limit=1.0, workers=1))
    assert ans.lateness == 0
    assert ans.start[1] == 0 and ans.start[0] >= 420          # B at 07:00, A after B is cleared (70 min)
