"""A late build that runs into the next day is split over two printers of its profile (fleet
README, "Layout calls priced before they start", split of late builds).

Checks of the planner's own rule on a stand-in powder cell one cube high (20 mm cubes with
5 mm spacing on a 300 mm square: floor(305 / 25) = 12 a side, 144 a layer, exact grid
geometry as in ``test_fleet_volume_builds``), whose time model is the test profile's.
"""

from datetime import timedelta

from packer.fleet.budget import Budget
from packer.fleet.builder import plate_on
from packer.fleet.lowfill import order_done
from packer.fleet.planbounds import plan_bounds
from packer.fleet.planner import PlannerSettings
from packer.fleet.scoring import late_orders, score_plan
from packer.fleet.split import split_late_builds
from packer.fleet.timemodel import copy_work_bounds
from packer.fleet.view import FleetView, screen
from packer.intake.job import Printer
from packer.layouts import PlateLayout
from test_fleet_call_cost import CUBE, _cubes, _setup
from test_fleet_merge import CAL, STATS, TUE


def _two_cells(copies, calls):
    one, layouts, _ = _setup(calls, 100.0, side=300.0)
    prns = [Printer(name=f"cell-{k}", profile=one.profile, available_from=TUE, materials=("PA12",)) for k in (1, 2)]
    settings = PlannerSettings()
    eligible, _ = screen(copies, prns, layouts)
    view = FleetView(prns, STATS, CAL, TUE, settings, layouts, eligible)
    return view, Budget(settings, layouts, fit_allowance=1.0, hard_end=100.0)


def test_late_build_into_the_night_is_split_over_two_printers():
    # 80 cubes due at the shift start, all on cell-1: the build runs into Wednesday while
    # cell-2 stands idle; split, both halves are cleared on Tuesday
    calls: list = []
    copies = _cubes("A", 40, TUE) + _cubes("B", 40, TUE)
    view, budget = _two_cells(copies, calls)
    b = plate_on(view, 0, copies, PlateLayout((), CUBE, 0.0), view.ready[0], 0)
    assert b.free.date() > b.start.date()
    plates, splits = split_late_builds(view, budget, [b], deadline=100.0)
    assert splits == 1 and len(plates) == 2
    assert {p.printer for p in plates} == {"cell-1", "cell-2"}
    assert sorted(c.copy for p in plates for c in p.copies if c.order == "A") == list(range(1, 41))
    assert all(p.free.date() == TUE.date() for p in plates)
    assert score_plan(plates, TUE) < score_plan([b], TUE)
    after, before = order_done(plates), order_done([b])
    assert all(after[o][0] <= before[o][0] for o in before)     # no order done later
    assert sorted(calls) == sorted(len(p.copies) for p in plates)   # both halves packed


def test_on_time_build_is_not_split():
    calls: list = []
    copies = _cubes("A", 80, TUE + timedelta(days=3))
    view, budget = _two_cells(copies, calls)
    b = plate_on(view, 0, copies, PlateLayout((), CUBE, 0.0), view.ready[0], 0)
    assert b.free.date() > b.start.date()
    plates, splits = split_late_builds(view, budget, [b], deadline=100.0)
    assert splits == 0 and plates == [b] and calls == []


def test_split_by_whole_orders_leaves_fewer_orders_late():
    # A constructed case (no external source): 110 cubes of four orders due Tue 17:35, all on
    # cell-1 from 07:00 (free Wednesday). On the test profile's time model (5,400 s warm-up,
    # scan and recoat doubled by the cool-down, 30 min clear) a build from 07:00 of at most 50
    # cubes is cleared by 17:31, of 51 at 17:40, 55 at 18:15, 60 at 19:00. In the usual order
    # (A 20, B 60, C 20, D 10) a split keeps a prefix on cell-1: the best, 55 + 55, leaves all
    # four orders 40 min late (2.7 h weighted); at most 50 on cell-1 leaves B, C and D late, 60
    # or more A and B, each by 1.4 h or more. By whole orders, D, A and C (50 copies) go on one
    # build, on time, and B alone on the other (cleared 19:00): one order late, 1.4 h weighted.
    calls: list = []
    due = TUE.replace(hour=17, minute=35)
    copies = _cubes("A", 20, due) + _cubes("B", 60, due) + _cubes("C", 20, due) + _cubes("D", 10, due)
    view, budget = _two_cells(copies, calls)
    b = plate_on(view, 0, copies, PlateLayout((), CUBE, 0.0), view.ready[0], 0)
    assert b.free.date() > b.start.date()
    plates, splits = split_late_builds(view, budget, [b], deadline=100.0)
    assert splits == 1 and len(plates) == 2
    assert late_orders(plates) == {"B"}
    assert sorted((c.order, c.copy) for p in plates for c in p.copies) == sorted((c.order, c.copy) for c in copies)
    assert sorted(len(p.copies) for p in plates) == [50, 60]
    after, before = order_done(plates), order_done([b])
    assert all(after[o][0] <= before[o][0] for o in before)     # no order done later
    assert sorted(calls) == [50, 60]        # both builds packed once


def test_finish_bound_counts_a_build_per_printer_that_takes_part():
    # constructed, hand-computed from the time model's shares: 60 cubes (one build by the
    # volume bound) on two cells ready at 07:00. Each cell that takes part runs a build at
    # least, each build costs its per-build share (warm-up, clear, the layers of a 20 mm build)
    # besides the cubes' scan, so two cells finish no sooner than (60 scan + 2 builds) / 2 and
    # one cell alone no sooner than 60 scan + 1 build, later still (the bound before counted one
    # build for both cells). A plan on one cell, and the same copies split over both, end no
    # sooner than the bound.
    copies = _cubes("A", 30, TUE) + _cubes("B", 30, TUE)
    view, _ = _two_cells(copies, [])
    add, _, per = copy_work_bounds(view.printers[0].profile, STATS[0])
    one = [plate_on(view, 0, copies, PlateLayout((), CUBE, 0.0), view.ready[0], 0)]
    two = [plate_on(view, 0, copies[:30], PlateLayout((), CUBE, 0.0), view.ready[0], 0),
           plate_on(view, 1, copies[30:], PlateLayout((), CUBE, 0.0), view.ready[1], 1)]
    bound = plan_bounds(view, copies, one)["finish_bound"]
    assert bound >= TUE + timedelta(seconds=min(60 * add + per, (60 * add + 2 * per) / 2) - 1e-3)
    assert bound > TUE + timedelta(seconds=(60 * add + per) / 2 + 60)
    assert all(bound <= max(p.free for p in plan) for plan in (one, two))
