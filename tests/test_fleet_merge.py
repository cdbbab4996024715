"""Merging under-filled plates never makes an order late; fits is told its time allowance."""

import math
from dataclasses import replace
from datetime import datetime, time, timedelta

import pytest

from packer.errors import PackerError
from packer.fleet.budget import Budget
from packer.fleet.builder import plate_on
from packer.fleet.merge import merge_plates
from packer.fleet.planner import CopyRef, PlannerSettings, plan_fleet
from packer.fleet.view import FleetView, screen
from packer.fleet.scoring import late_orders, score_plan
from packer.fleet.timemodel import PartStats
from packer.intake.job import Calendar, Printer
from standin_layouts import LAYOUT, FnLayouts
from test_fleet_support import profile

CAL = Calendar(shift_start=time(7), shift_end=time(19), days=(0, 1, 2, 3, 4))
TUE = datetime(2026, 3, 3, 7, 0)     # a Tuesday, shift start
FIL = profile("filament", name="fil-a", volume=(200.0, 200.0, 200.0))
STATS = [PartStats(8000.0, 2400.0, 20.0, 400.0)]     # a 20 mm cube
PRN = Printer(name="p1", profile=FIL, available_from=TUE, materials=("PLA",))


def hint(p, copies) -> float:
    return sum(STATS[c.kind].footprint_mm2 for c in copies) / (192.0 * 192.0)


def fits(p, copies):
    return object() if hint(p, copies) <= 1.0 else None


def can_print(p, c):
    return None


def steps(printers, stats, copies, fits, hint, can_print):
    """The planner's view of the fleet (after screening ``copies``) and a budget, to call its
    steps directly."""
    settings = PlannerSettings()
    layouts = FnLayouts(fits, hint, can_print)
    eligible, _ = screen(copies, printers, layouts)
    return FleetView(printers, stats, CAL, TUE, settings, layouts, eligible), Budget(settings, layouts)


def _two_plates(due_first: datetime, due_second: datetime):
    """Two plates on one printer: 2 cubes of order X, then 2 cubes of order Y."""
    xs = [CopyRef("X", "cube", k + 1, 0, "PLA", due_first, 3) for k in range(2)]
    ys = [CopyRef("Y", "cube", k + 1, 0, "PLA", due_second, 1) for k in range(2)]
    view, budget = steps([PRN], STATS, xs + ys, fits, hint, can_print)
    a = plate_on(view, 0, xs, LAYOUT, view.ready[0], 0)
    b = plate_on(view, 0, ys, LAYOUT, a.free, 1)
    return (view, budget), [a, b]


def test_merge_refused_when_it_makes_an_order_late():
    # X is due exactly when its own plate is cleared: adding Y's copies to that plate (or
    # printing X after Y) makes X late, so the two plates must stay apart
    ctx, plates = _two_plates(TUE, TUE + timedelta(days=7))
    due_x = plates[0].free
    ctx, plates = _two_plates(due_x, TUE + timedelta(days=7))
    assert not late_orders(plates)
    merged, n = merge_plates(*ctx, plates, math.inf)
    assert n == 0 and len(merged) == 2
    assert not late_orders(merged)


def test_merge_taken_when_no_order_gets_later():
    far = TUE + timedelta(days=7)
    ctx, plates = _two_plates(far, far)
    before = score_plan(plates, TUE)
    merged, n = merge_plates(*ctx, plates, math.inf)
    after = score_plan(merged, TUE)
    assert n == 1 and len(merged) == 1
    assert sorted((c.order, c.copy) for c in merged[0].copies) == [("X", 1), ("X", 2), ("Y", 1), ("Y", 2)]
    # lexicographic: no more lateness, no later finish, one plate fewer
    assert after[0] <= before[0] and after[1] <= before[1] and after[2] == before[2] - 1


def test_fits_is_told_a_fixed_allowance():
    seen = []

    def fits_timed(p, copies, *, seconds):
        seen.append(seconds)
        return fits(p, copies)

    cs = [CopyRef(f"O{k}", "cube", 1, 0, "PLA", TUE + timedelta(days=2), 1) for k in range(40)]
    # each call charged its allowance, as an engine that uses all the time it is given
    layouts = FnLayouts(fits_timed, hint, can_print, work=lambda copies, seconds: seconds, timed=True)
    res = plan_fleet(cs, [PRN], stats=STATS, calendar=CAL, start=TUE, layouts=layouts, seconds=30.0)
    assert seen and res.stats["deterministic"]
    # one allowance for every call, a share of the budget over the calls expected
    assert len(set(seen)) == 1 and seen[0] == res.stats["fit_allowance_s"]
    s = PlannerSettings()
    assert s.min_fit_s <= seen[0] <= s.fits_share * 30.0


def test_merge_refuses_repeated_plate_ids():
    # plates are identified by id while merging: a repeated id would drop copies
    far = TUE + timedelta(days=7)
    ctx, plates = _two_plates(far, far)
    plates[1] = replace(plates[1], id=plates[0].id)
    with pytest.raises(PackerError, match="unique plate ids"):
        merge_plates(*ctx, plates, math.inf)


def test_plates_of_two_profiles_of_one_technology_merge_where_every_copy_fits():
    # a wide and a narrow filament profile; the wide-only copy can go on the wide printer only,
    # so the merged plate must run there (whichever plate came first)
    wide = profile("filament", name="fil-wide", volume=(244.0, 198.0, 200.0))
    narrow = profile("filament", name="fil-narrow", volume=(150.0, 150.0, 200.0))
    stats = [PartStats(8000.0, 2400.0, 20.0, 400.0), PartStats(90000.0, 30000.0, 20.0, 180.0 * 40.0)]
    pw = Printer(name="w1", profile=wide, available_from=TUE, materials=("PLA",))
    # the narrow printer is free only two days later: its plate ends the day
    pn = Printer(name="n1", profile=narrow, available_from=TUE + timedelta(days=2), materials=("PLA",))

    def area_hint(p, copies):
        x, y, _ = p.profile.build_volume
        return sum(stats[c.kind].footprint_mm2 for c in copies) / ((x - 8) * (y - 8))

    asked = []

    def fits2(p, copies):
        asked.append(p.name)
        return object() if area_hint(p, copies) <= 1.0 else None

    def can2(p, c):
        return "too long" if c.kind == 1 and p.profile.name == "fil-narrow" else None

    far = TUE + timedelta(days=7)
    cubes = [CopyRef("X", "cube", k + 1, 0, "PLA", far, 1) for k in range(2)]
    bar = [CopyRef("Y", "bar", 1, 1, "PLA", far, 1)]
    view, budget = steps([pn, pw], stats, cubes + bar, fits2, area_hint, can2)
    a = plate_on(view, 0, cubes, LAYOUT, view.ready[0], 0)      # cubes on the narrow printer
    b = plate_on(view, 1, bar, LAYOUT, view.ready[1], 1)        # the bar on the wide one
    merged, n = merge_plates(view, budget, [a, b], math.inf)
    assert n == 1 and len(merged) == 1
    assert merged[0].printer == "w1" and "n1" not in asked
    assert sorted(c.part for c in merged[0].copies) == ["bar", "cube", "cube"]
    assert score_plan(merged, TUE)[1] < score_plan([a, b], TUE)[1]
