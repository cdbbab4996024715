"""A layout call that cannot finish in the budget's share is not started (fleet README,
"Layout calls priced before they start").

The planner predicts a call's work as its copies times the work per copy of the last call on
the same profile (a powder packing is charged per body whatever its allowance:
``packer.layouts.powder``, so one call on a whole build can cost many allowances). Checks of
the planner's own rules on a stand-in whose every call costs one second per copy, and the
exact geometry of cubes in a grid (see ``test_fleet_volume_builds``): 20 mm cubes with 5 mm
spacing on a 100 mm square hold 16 to a layer, so a build 20 mm high takes at most 16.
"""

from datetime import timedelta

from packer.fleet.budget import Budget
from packer.fleet.builder import build_plates, plate_on
from packer.fleet.lowfill import empty_low_plates
from packer.fleet.planner import CopyRef, PlannerSettings
from packer.fleet.view import FleetView, screen
from packer.intake.job import Printer
from packer.layouts import PlateLayout
from standin_layouts import FnLayouts
from test_fleet_merge import CAL, STATS, TUE, can_print
from test_fleet_support import profile

CUBE, GAP = 20.0, 5.0             # mm: cube side, spacing


def _cubes(order: str, n: int, due, first: int = 1):
    return [CopyRef(order, "cube", first + k, 0, "PA12", due, 1) for k in range(n)]


def _setup(calls: list, hard_end: float, side: float = 100.0):
    """A powder cell one cube high on a ``side`` mm square (one layer: floor((side + s) / (a + s))
    cubes a side); every layout call charged one second per copy, sizes in ``calls``."""
    per_layer = int((side + GAP) // (CUBE + GAP)) ** 2
    prof = profile("powder", name="cell", volume=(side, side, CUBE), spacing=GAP, margin=0.0)
    prn = Printer(name="cell-1", profile=prof, available_from=TUE, materials=("PA12",))

    def fits(p, copies):
        calls.append(len(copies))
        return PlateLayout((), CUBE, 0.0) if len(copies) <= per_layer else None

    layouts = FnLayouts(fits, lambda p, cs: len(cs) / 64.0, can_print, work=lambda cs, s: float(len(cs)))
    return prn, layouts, hard_end


def _view(prn, layouts, copies, hard_end):
    settings = PlannerSettings()
    eligible, _ = screen(copies, [prn], layouts)
    view = FleetView([prn], STATS, CAL, TUE, settings, layouts, eligible)
    return view, Budget(settings, layouts, fit_allowance=1.0, hard_end=hard_end)


def test_predicted_cost_from_the_last_call_of_the_profile():
    calls: list = []
    prn, layouts, end = _setup(calls, 30.0)
    copies = _cubes("A", 20, TUE + timedelta(days=7))
    view, budget = _view(prn, layouts, copies, end)
    assert budget.predict(prn, 10) == 0.0              # nothing learned before a call
    budget.timed_fits(prn, copies[:10])
    assert budget.clock.now() == 10.0 and budget.predict(prn, 20) == 20.0
    assert budget.affords(prn, 20, 30.0, "x")
    assert not budget.affords(prn, 21, 30.0, "cut for cost") and "cut for cost" in budget.cuts


def test_bisection_does_not_start_a_probe_past_the_budget():
    # 24 cubes do not fit one layer: the first probe fails at 24 s of a 30 s budget. The next
    # probe (21 cubes, predicted 21 s) cannot end in the budget, so it is not started; the
    # last resort (a quarter of the failed set, 6 cubes, 6 s) ends exactly at it. Before, the
    # tries were counted when the plate began: 21 and then 10 cubes were asked (55 s of work).
    calls: list = []
    prn, layouts, end = _setup(calls, 30.0)
    copies = _cubes("A", 24, TUE + timedelta(days=7))
    view, budget = _view(prn, layouts, copies, end)
    built = build_plates(view, budget, copies, banded=False, mode="full")
    assert calls[:2] == [24, 6]
    assert len(built.plates[0].copies) == 6
    assert sum(len(p.copies) for p in built.plates) == 24 and not built.unplaced
    assert "one fits call per plate after the budget" in budget.cuts


def test_low_fill_move_priced_past_the_budget_is_not_started():
    # on a 200 mm square (64 a layer) a build of 12 cubes and one of a single cube (8,000 mm3
    # in 200 x 200 x 20 mm: 1 %, under the 3 % density threshold): moving
    # the single cube onto the other asks a packing of 13 (13 s at the rate the last call
    # taught), but only 5 s are left: the move is not started and the build says why
    calls: list = []
    prn, layouts, end = _setup(calls, 15.0, side=200.0)
    far = TUE + timedelta(days=7)
    big, one = _cubes("A", 12, far), _cubes("B", 1, far, first=1)
    view, budget = _view(prn, layouts, big + one, end)
    lay = PlateLayout((), CUBE, 0.0)
    a = plate_on(view, 0, big, lay, view.ready[0], 0)
    b = plate_on(view, 0, one, lay, a.free, 1)
    budget.timed_fits(prn, big[:10])                   # 10 s of work: 1 s per copy learned
    calls.clear()
    plates, notes, removed = empty_low_plates(view, budget, [a, b], deadline=end)
    assert removed == 0 and calls == []
    assert notes[b.id] == "kept: the planning budget ran out before it could be merged"
    # with the budget to pay for it, the same move is made
    budget.hard_end = 40.0
    plates, notes, removed = empty_low_plates(view, budget, [a, b], deadline=40.0)
    assert removed == 1 and calls == [13]
