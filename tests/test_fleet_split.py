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
from packer.fleet.planner import PlannerSettings
from packer.fleet.scoring import score_plan
from packer.fleet.split import split_late_builds
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
