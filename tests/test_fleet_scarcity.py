"""Material choice by scarcity (fleet README, "Material choice by scarcity").

A constructed fleet: printer p1 runs PLA and PETG, p2 only PLA, both free at the shift start.
Four PLA cubes of order A are due at 08:00, four PETG cubes of order B at 08:10. By the
filament time model (:mod:`packer.fleet.timemodel`) a plate of four 20 mm cubes prints
34.5 min and is cleared 5 min later, so either order is done in time on a printer of its own,
and no printer does both in time (2 x 39.5 min > 70 min). The old choice lets p1 (free
soonest, first by name) take the most urgent copies, A's, so only p1 can take B after it and
B is late; by scarcity p1 leaves A to p2, whose capacity by 08:00 (60 min) holds A's work
(26.5 min) within the margin (half), and takes B. Checks of the planner's own rule.
"""

from datetime import timedelta

from packer.fleet.builder import build_plates
from packer.fleet.hinttrials import spare_trial
from packer.fleet.planner import CopyRef, PlannerSettings, plan_fleet
from packer.fleet.scoring import late_orders
from packer.intake.job import Printer
from standin_layouts import FnLayouts
from test_fleet_merge import CAL, FIL, STATS, TUE, can_print, fits, hint, steps

P1 = Printer(name="p1", profile=FIL, available_from=TUE, materials=("PLA", "PETG"))
P2 = Printer(name="p2", profile=FIL, available_from=TUE, materials=("PLA",))


def _copies():
    a = [CopyRef("A", "cube", k + 1, 0, "PLA", TUE + timedelta(minutes=60), 1) for k in range(4)]
    b = [CopyRef("B", "cube", k + 1, 0, "PETG", TUE + timedelta(minutes=70), 1) for k in range(4)]
    return a + b


def test_the_old_choice_makes_the_scarce_material_late():
    cs = _copies()
    view, _ = steps([P1, P2], STATS, cs, fits, hint, can_print)
    plates = build_plates(view, None, cs, banded=False, mode="due").plates
    assert (plates[0].printer, plates[0].material) == ("p1", "PLA")
    assert {p.printer for p in plates if p.material == "PETG"} == {"p1"}
    assert late_orders(plates) == {"B"}


def test_scarcity_leaves_the_common_material_to_the_printer_that_runs_only_it():
    cs = _copies()
    view, _ = steps([P1, P2], STATS, cs, fits, hint, can_print)
    built = build_plates(view, None, cs, banded=False, mode="due", spare=True)
    assert sorted((p.printer, p.material) for p in built.plates) == [("p1", "PETG"), ("p2", "PLA")]
    assert late_orders(built.plates) == set()
    old = build_plates(view, None, cs, banded=False, mode="due")
    assert not spare_trial(view, cs, old, "due", False)[0]     # off by default
    view.settings = PlannerSettings(scarcity=True)
    assert spare_trial(view, cs, old, "due", False)[0]     # the hint trial picks the rule where it is better


def test_scarcity_keeps_the_copy_when_the_helper_cannot_do_it_in_time():
    # A due at 07:45: p2's capacity by then (45 min) at the margin (22.5 min) is less than
    # A's work (26.5 min), so p1 keeps the most urgent copies
    cs = [CopyRef(c.order, c.part, c.copy, c.kind, c.material,
                  TUE + timedelta(minutes=45) if c.order == "A" else c.due, 1) for c in _copies()]
    view, _ = steps([P1, P2], STATS, cs, fits, hint, can_print)
    plates = build_plates(view, None, cs, banded=False, mode="due", spare=True).plates
    assert plates[0].printer == "p1" and plates[0].material == "PLA"


def test_plan_fleet_builds_by_scarcity_where_the_trial_is_better():
    cs = _copies()
    res = plan_fleet(cs, [P1, P2], stats=STATS, calendar=CAL, start=TUE,
                     layouts=FnLayouts(fits, hint, can_print), seconds=5.0, seed=0,
                     settings=PlannerSettings(scarcity=True))
    assert res.stats["late_orders"] == 0
    assert res.stats["fill"]["filament"].endswith("/by scarcity")
