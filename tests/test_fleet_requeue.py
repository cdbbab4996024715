"""Whole plates move to earlier places in the printers' queues only when no order gets later."""

import math
from datetime import timedelta

from packer.fleet.builder import plate_on
from packer.fleet.requeue import order_lateness, requeue_plates
from packer.fleet.scoring import late_orders, score_plan
from packer.intake.job import Printer
from test_fleet_merge import FIL, PRN, STATS, TUE, can_print, fits, hint, steps
from standin_layouts import LAYOUT
from packer.fleet.planner import CopyRef

PRN2 = Printer(name="p2", profile=FIL, available_from=TUE, materials=("PLA",))


def _cubes(order: str, n: int, due, priority: int = 1):
    return [CopyRef(order, "cube", k + 1, 0, "PLA", due, priority) for k in range(n)]


def _queue(view, groups, i: int = 0):
    """Plates of ``groups`` one after another on printer ``i``."""
    out, free = [], view.ready[i]
    for k, cs in enumerate(groups):
        p = plate_on(view, i, cs, LAYOUT, free, k)
        out.append(p)
        free = p.free
    return out


def test_a_late_plate_moves_to_the_printer_standing_free():
    far = TUE + timedelta(days=7)
    a, b = _cubes("A", 3, far), _cubes("B", 3, far)
    c = _cubes("C", 3, TUE + timedelta(hours=1))           # due before anything can be done
    view, budget = steps([PRN, PRN2], STATS, a + b + c, fits, hint, can_print)
    plates = _queue(view, [a, b, c])                         # all three on p1, p2 idle
    assert late_orders(plates) == {"C"}
    out, moves = requeue_plates(view, budget, plates, work_s=math.inf)
    assert moves >= 1
    moved = next(p for p in out if p.copies[0].order == "C")
    assert moved.printer == "p2" and moved.start == view.ready[1]
    # contents and layouts unchanged, every copy once, no order later, the plan scores better
    assert sorted((p.id, p.copies, id(p.layout)) for p in out) == sorted((p.id, p.copies, id(p.layout))
                                                                         for p in plates)
    before, after = order_lateness(plates), order_lateness(out)
    assert all(after[o] <= before[o] for o in before) and after["C"] < before["C"]
    assert score_plan(out, TUE) < score_plan(plates, TUE)


def test_a_move_that_makes_an_order_on_time_late_is_refused():
    # one printer: X is due the moment its plate is cleared, Y (weighted 3) is late behind it;
    # putting Y first would cut the weighted lateness but make X late, so nothing moves
    far = TUE + timedelta(days=7)
    view, budget = steps([PRN], STATS, _cubes("X", 3, far) + _cubes("Y", 3, far), fits, hint, can_print)
    first = _queue(view, [_cubes("X", 3, far)])[0]
    xs, ys = _cubes("X", 3, first.free), _cubes("Y", 3, TUE + timedelta(hours=1), priority=3)
    plates = _queue(view, [xs, ys])
    assert late_orders(plates) == {"Y"}
    out, moves = requeue_plates(view, budget, plates, work_s=math.inf)
    assert moves == 0 and [p.id for p in out] == [p.id for p in plates]
    assert [(p.printer, p.start) for p in out] == [(p.printer, p.start) for p in plates]


def test_no_work_left_means_no_move_and_the_cut_is_recorded():
    far = TUE + timedelta(days=7)
    a, c = _cubes("A", 3, far), _cubes("C", 3, TUE + timedelta(hours=1))
    view, budget = steps([PRN, PRN2], STATS, a + c, fits, hint, can_print)
    plates = _queue(view, [a, c])
    out, moves = requeue_plates(view, budget, plates, work_s=0.0)
    assert moves == 0 and "moving plates cut short" in budget.cuts
    assert {(p.id, p.printer) for p in out} == {(p.id, p.printer) for p in plates}
