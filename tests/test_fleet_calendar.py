"""Operator shifts with hand-made calendars."""

from datetime import datetime, time

import pytest

from packer.errors import InputError
from packer.fleet.calendar import (from_minutes, is_open, next_open, printer_free_after, shift_windows, to_minutes)
from packer.intake.job import Calendar

CAL = Calendar(shift_start=time(7, 0), shift_end=time(19, 0), days=(0, 1, 2, 3, 4))
TUE = datetime(2026, 3, 3)    # 2026-03-03 is a Tuesday
FRI = datetime(2026, 3, 6)


def test_plate_ending_at_two_waits_until_seven():
    end = TUE.replace(hour=2)
    assert next_open(CAL, end) == TUE.replace(hour=7)
    # 15 min of clearing from 07:00
    assert printer_free_after(CAL, end, 900) == TUE.replace(hour=7, minute=15)


def test_plate_ending_inside_shift_is_cleared_at_once():
    end = TUE.replace(hour=10, minute=20)
    assert printer_free_after(CAL, end, 600) == TUE.replace(hour=10, minute=30)


def test_clearing_must_fit_in_the_shift():
    # ends 18:55 and clearing takes 30 min: it cannot finish by 19:00, so next morning
    end = TUE.replace(hour=18, minute=55)
    assert printer_free_after(CAL, end, 1800) == TUE.replace(day=4, hour=7, minute=30)


def test_weekend_is_skipped():
    assert next_open(CAL, FRI.replace(hour=20)) == datetime(2026, 3, 9, 7, 0)   # Monday
    assert not is_open(CAL, datetime(2026, 3, 7, 10, 0))                         # Saturday
    assert is_open(CAL, FRI.replace(hour=7)) and not is_open(CAL, FRI.replace(hour=19))


def test_shift_windows_cut_at_origin():
    w = shift_windows(CAL, TUE.replace(hour=9), 3)
    assert w == [(TUE.replace(hour=9), TUE.replace(hour=19)),
                 (TUE.replace(day=4, hour=7), TUE.replace(day=4, hour=19)),
                 (TUE.replace(day=5, hour=7), TUE.replace(day=5, hour=19))]
    assert shift_windows(CAL, FRI.replace(hour=20), 3) == []   # Friday night, weekend


def test_minutes_round_outward():
    o = TUE
    assert to_minutes(TUE.replace(second=1), o, up=True) == 1
    assert to_minutes(TUE.replace(second=59), o, up=False) == 0
    assert from_minutes(90, o) == TUE.replace(hour=1, minute=30)


def test_bad_calendars():
    with pytest.raises(InputError, match="at least one working day"):
        next_open(Calendar(days=()), TUE)
    with pytest.raises(InputError, match="later than shift_start"):
        next_open(Calendar(shift_start=time(19), shift_end=time(7)), TUE)
    with pytest.raises(InputError, match="does not fit in one shift"):
        printer_free_after(CAL, TUE, 13 * 3600)
