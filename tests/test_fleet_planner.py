"""The fleet planner on small hand-made days with an area-based stand-in for the nesting engine."""

from dataclasses import replace
from datetime import datetime, time, timedelta

import pytest

from packer.fleet.planner import CopyRef, check_plan, plan_fleet
from packer.fleet.timemodel import PartStats, plate_time
from packer.intake.job import Calendar, Printer
from packer.errors import PackerError
from standin_layouts import FnLayouts
from test_fleet_support import profile

CAL = Calendar(shift_start=time(7), shift_end=time(19), days=(0, 1, 2, 3, 4))
TUE = datetime(2026, 3, 3, 7, 0)     # a Tuesday, shift start

FIL = profile("filament", name="fil-a", volume=(200.0, 200.0, 200.0))
RES = profile("resin", name="res-a", volume=(120.0, 70.0, 150.0))
POW = profile("powder", name="pow-a", volume=(150.0, 150.0, 300.0))

STATS = [
    PartStats(8000.0, 2400.0, 20.0, 400.0),      # 0: 20 mm cube
    PartStats(1000.0, 600.0, 10.0, 100.0),       # 1: 10 mm cube
    PartStats(12000.0, 5000.0, 60.0, 200.0),     # 2: tall pin (resin)
    PartStats(1500.0, 900.0, 8.0, 180.0),        # 3: flat tab (resin)
    PartStats(30000.0, 9000.0, 40.0, 750.0),     # 4: housing (powder)
    PartStats(2.0e6, 2.0e5, 50.0, 195 * 195.0),  # 5: larger than every plate
]


def usable(p) -> float:
    x, y, _ = p.profile.build_volume
    m = p.profile.margin
    return (x - 2 * m) * (y - 2 * m)


def hint(p, copies) -> float:
    """Share of the plate by footprint area (powder: by volume)."""
    if p.profile.technology == "powder":
        x, y, z = p.profile.build_volume
        return sum(STATS[c.kind].volume_mm3 for c in copies) / (x * y * z)
    return sum(STATS[c.kind].footprint_mm2 for c in copies) / usable(p)


class FakeLayout:
    def __init__(self, n, height):
        self.n = n
        self.build_height_mm = height


def fits(p, copies):
    """Stand-in for the nesting engine: accepts up to 60 % of the plate by the hint, so the
    planner's 85 % fill must send overflow back."""
    if hint(p, copies) > 0.6:
        return None
    return FakeLayout(len(copies), max(STATS[c.kind].height_mm for c in copies))


def can_print(p, c):
    s = STATS[c.kind]
    x, y, z = p.profile.build_volume
    if s.footprint_mm2 > usable(p) or s.height_mm > z:
        return f"larger than the {p.profile.name} plate"
    return None


def printer(name, prof, mats=None, at=TUE):
    return Printer(name=name, profile=prof, available_from=at,
                   materials=tuple(mats or [m.name for m in prof.materials]))


def copies_of(order, part, key, n, mat, due, prio=1):
    return [CopyRef(order, part, k + 1, key, mat, due, prio) for k in range(n)]


def mixed_day():
    cs = []
    cs += copies_of("A", "cube", 0, 30, "PLA", TUE.replace(hour=15))
    cs += copies_of("A", "small", 1, 40, "PLA", TUE.replace(hour=15))
    cs += copies_of("B", "cube", 0, 25, "PETG", TUE + timedelta(days=1, hours=5), prio=2)
    cs += copies_of("C", "pin", 2, 12, "resin-grey", TUE.replace(hour=18))
    cs += copies_of("C", "tab", 3, 30, "resin-grey", TUE + timedelta(days=1))
    cs += copies_of("D", "housing", 4, 20, "PA12", TUE + timedelta(days=2))
    cs += copies_of("E", "slab", 5, 2, "PLA", TUE + timedelta(days=1))
    fleet = [printer("f1", FIL), printer("f2", FIL, at=TUE + timedelta(hours=3)),
             printer("r1", RES), printer("p1", POW)]
    return cs, fleet


def run(cs, fleet, **kw):
    layouts = FnLayouts(fits, hint, can_print, fill=kw.pop("fill", None))
    return plan_fleet(cs, fleet, stats=STATS, calendar=CAL, start=TUE, layouts=layouts,
                      seconds=kw.pop("seconds", 4.0), seed=0, **kw)


def is_open(t):
    return t.weekday() in CAL.days and CAL.shift_start <= t.time() < CAL.shift_end


def test_mixed_day_is_a_valid_plan():
    cs, fleet = mixed_day()
    res = run(cs, fleet)
    # every copy exactly once
    keys = [(c.order, c.part, c.copy) for p in res.plates for c in p.copies]
    keys += [(c.order, c.part, c.copy) for c, _ in res.unplaced]
    assert sorted(keys) == sorted((c.order, c.part, c.copy) for c in cs)
    # the two slabs are larger than every plate, with the reason
    assert {(c.part, "larger than" in r) for c, r in res.unplaced} == {("slab", True)}
    by_name = {p.name: p for p in fleet}
    for p in res.plates:
        pr = by_name[p.printer]
        assert {c.material for c in p.copies} == {p.material} and p.material in pr.materials
        assert is_open(p.start) and p.start >= pr.available_from
        clear_at = p.free - timedelta(seconds=p.time.clear_s)
        assert clear_at >= p.end and is_open(clear_at)
        assert fits(pr, p.copies) is not None                 # each plate confirmed by the engine
        assert p.layout.detail.n == len(p.copies)
        # the plate's time is the model's time for its contents
        parts = [STATS[c.kind] for c in p.copies]
        est = plate_time(pr.profile, parts, build_height_mm=p.layout.build_height_mm)
        assert (p.end - p.start).total_seconds() == pytest.approx(est.setup_s + est.print_s, abs=1e-3)
    for name in by_name:
        mine = sorted((p for p in res.plates if p.printer == name), key=lambda p: p.start)
        for a, b in zip(mine, mine[1:]):
            assert b.start >= a.free
    # plates against the bound: never below it
    for key, v in res.bounds["plates"].items():
        assert v["used"] >= v["bound"] >= 1, key
    assert res.stats["finish"] >= res.bounds["finish_bound"]


def test_deterministic_per_seed():
    cs, fleet = mixed_day()
    a, b = run(cs, fleet), run(cs, fleet)
    sig = lambda r: [(p.id, p.printer, p.start, tuple((c.order, c.part, c.copy) for c in p.copies))
                     for p in r.plates]
    assert sig(a) == sig(b)


def test_urgent_copy_is_not_buried_in_a_long_plate():
    # Hand check: one filament printer. Order U (1 cube) is due 07:30. Alone, its plate takes
    # warm-up 300 s + print 592.8 s (timemodel test) = 892.8 s -> ends 07:14:53, cleared 07:19:53:
    # on time. With the 40 cubes of order L on the same plate it would print for over an hour
    # and be late. So an on-time plan exists; the planner must find it.
    u = copies_of("U", "cube", 0, 1, "PLA", TUE.replace(hour=7, minute=30), prio=3)
    l = copies_of("L", "cube", 0, 40, "PLA", TUE.replace(hour=18))
    res = run(u + l, [printer("f1", FIL)])
    assert res.stats["late_orders"] == 0 and res.stats["weighted_lateness_h"] == 0
    first = min(res.plates, key=lambda p: p.start)
    assert "U" in {c.order for c in first.copies} and first.free <= u[0].due
    assert len(res.plates) >= 2            # L's cubes could not all share U's plate


def test_solver_moves_plates_to_the_free_printer():
    # Two identical printers, f2 available only from 09:00. Orders X and Y each fill a plate
    # (hint 0.6 by fits). Hand check: both plates can start at 07:00 and 09:00 and be done by
    # their due times; every plate start lies in the shift.
    x = copies_of("X", "cube", 0, 40, "PLA", TUE.replace(hour=13))
    y = copies_of("Y", "cube", 0, 40, "PLA", TUE.replace(hour=16))
    fleet = [printer("f1", FIL), printer("f2", FIL, at=TUE.replace(hour=9))]
    res = run(x + y, fleet)
    assert res.stats["late_orders"] == 0
    assert {p.printer for p in res.plates} == {"f1", "f2"}


def test_overnight_plate_waits_for_the_shift():
    # A resin plate of tall pins started late in the day ends at night and is cleared at 07:00.
    cs = copies_of("N", "pin", 2, 4, "resin-grey", TUE + timedelta(days=1, hours=3))
    res = run(cs, [printer("r1", RES, at=TUE.replace(hour=17))])
    (p,) = res.plates
    assert p.start == TUE.replace(hour=17)
    assert p.end.date() == p.start.date() + timedelta(days=1) or p.end.hour >= 19
    assert p.free == (TUE + timedelta(days=1)).replace(hour=7) + timedelta(seconds=p.time.clear_s)


def test_height_bands_save_resin_time():
    # Tall pins (60 mm) and flat tabs (8 mm), all due the same day: banded plates put the tabs
    # together, so the short plates print fast; mixed plates pay the tall time more often.
    cs = []
    for k in range(8):
        cs += copies_of(f"O{k}", "pin", 2, 3, "resin-grey", TUE + timedelta(days=2))
        cs += copies_of(f"O{k}", "tab", 3, 6, "resin-grey", TUE + timedelta(days=2))
    res = run(cs, [printer("r1", RES), printer("r2", RES)])
    hb = res.stats["height_bands"]
    assert hb["resin_saved_machine_h"] > 0


def test_checker_catches_broken_plans():
    cs, fleet = mixed_day()
    res = run(cs, fleet, seconds=2.0)
    plates = list(res.plates)
    with pytest.raises(PackerError, match="exactly once"):
        check_plan(plates[1:], res.unplaced, cs, fleet, calendar=CAL, start=TUE)
    bad = replace(plates[0], start=plates[0].start.replace(hour=5))
    with pytest.raises(PackerError, match="outside the shifts"):
        check_plan([bad] + plates[1:], res.unplaced, cs, fleet, calendar=CAL, start=TUE)


def test_boosted_copy_goes_first():
    # two copies with the same due time that cannot share a plate (each takes 0.55 of it by the
    # hint, fits accepts 0.6): the boosted one (replanned after a failure) gets the first plate
    big = PartStats(20000.0, 6000.0, 20.0, 0.55 * 192 * 192)
    stats = STATS + [big]
    k = len(STATS)
    a = CopyRef("A", "lid", 1, k, "PLA", TUE.replace(hour=18), 1)
    b = CopyRef("B", "lid", 1, k, "PLA", TUE.replace(hour=18), 1, boost=1.0)

    def hint2(p, cs):
        return sum(stats[c.kind].footprint_mm2 for c in cs) / usable(p)

    def fits2(p, cs):
        return FakeLayout(len(cs), 20.0) if hint2(p, cs) <= 0.6 else None

    res = plan_fleet([a, b], [printer("f1", FIL)], stats=stats, calendar=CAL, start=TUE,
                     layouts=FnLayouts(fits2, hint2), seconds=2.0)
    first = min(res.plates, key=lambda p: p.start)
    assert [c.order for c in first.copies] == ["B"]


def test_lateness_bound_names_surely_late_orders():
    # Due 07:10 but a resin plate of 60 mm pins takes more than an hour (1200 layers): late in
    # every plan, so the bound counts it and the plan's lateness is at least the bound.
    cs = copies_of("Z", "pin", 2, 2, "resin-grey", TUE.replace(minute=10))
    res = run(cs, [printer("r1", RES)])
    assert res.bounds["surely_late_orders"] == 1
    assert res.stats["weighted_lateness_h"] >= res.bounds["lateness_bound_h"] > 0


def test_empty_day():
    res = run([], [printer("f1", FIL)])
    assert res.plates == () and res.unplaced == ()


def test_plan_does_not_depend_on_how_fast_fits_runs():
    """Budget decisions read the work clock, so a slow or jittery layout engine gives the same plan.

    The budget is tight enough that the work clock cuts steps short (recorded in
    ``budget_cuts``); a wall-clock budget would cut them at other places in the slow run.
    """
    import random
    import time as _t
    cs, fleet = mixed_day()

    def make(delay):
        rng = random.Random(delay)

        def slow_fits(p, copies):
            _t.sleep(delay * rng.random())
            return fits(p, copies)
        # the work the engine reports, same in both runs
        return FnLayouts(slow_fits, hint, can_print, work=lambda copies, seconds: 0.02 + 0.001 * len(copies))

    sig = lambda r: [(p.id, p.printer, p.start, tuple((c.order, c.part, c.copy) for c in p.copies))
                     for p in r.plates]
    runs = []
    for delay in (0.0, 0.03):
        runs.append(plan_fleet(cs, fleet, stats=STATS, calendar=CAL, start=TUE, layouts=make(delay),
                               seconds=0.6, seed=0))
    assert runs[0].stats["budget_cuts"], "the budget should cut some step short in this test"
    assert runs[0].stats["budget_cuts"] == runs[1].stats["budget_cuts"]
    assert sig(runs[0]) == sig(runs[1])
    assert runs[1].stats["planning_s"] > runs[0].stats["planning_s"]


def test_pool_fill_takes_what_fits_from_more_candidates():
    """With a pool fill, each plate is one layout call over more candidates than fit.

    The stand-in fill keeps the required copies and then adds the others, largest first,
    while the plate stays within the same 60 % the stand-in ``fits`` accepts (small copies
    fill what large ones leave). The plan must stay valid (``check_plan`` runs inside),
    every kept plate within that capacity, and need no more plates than bisection.
    """
    cs, fleet = mixed_day()
    calls = []

    def fill(p, copies, *, must, seconds):
        calls.append((p.name, len(copies), must))
        if hint(p, copies[:must]) > 0.6:
            return None
        keep = list(range(must))
        for k in sorted(range(must, len(copies)), key=lambda k: (-STATS[copies[k].kind].footprint_mm2, k)):
            if hint(p, [copies[j] for j in keep + [k]]) <= 0.6:
                keep.append(k)
        keep.sort()
        return FakeLayout(len(keep), max(STATS[copies[k].kind].height_mm for k in keep)), keep

    pooled = run(cs, fleet, fill=fill)
    plain = run(cs, fleet)
    assert calls, "the planner should ask the pool fill for filament and resin plates"
    assert all(p.profile.technology != "powder" for p in fleet if p.name in {c[0] for c in calls})
    assert any(n > m for _, n, m in calls)      # more candidates than required
    for plate in pooled.plates:
        p = next(f for f in fleet if f.name == plate.printer)
        if p.profile.technology != "powder":
            assert hint(p, plate.copies) <= 0.6 + 1e-9
    assert len(pooled.plates) <= len(plain.plates)
    assert pooled.stats["fits_calls"] < plain.stats["fits_calls"]
