"""The list-scheduling builder's fill rules: a plate whose first copy is late even alone fills on.

Checks of the planner's own rule (fleet README, "The 5,000-copy regression"), no outside source:
a copy that is late whatever plate it is on gains nothing from a short plate, so the ``strict``
rule, which keeps a plate within its earliest due time, must not leave it alone on one.
"""

from datetime import timedelta

from packer.fleet.builder import build_plates
from packer.fleet.planner import CopyRef
from packer.fleet.scoring import late_orders
from test_fleet_merge import PRN, STATS, TUE, can_print, fits, hint, steps


def _cubes(order: str, n: int, due):
    return [CopyRef(order, "cube", k + 1, 0, "PLA", due, 1) for k in range(n)]


def _plates(copies, mode: str):
    view, _ = steps([PRN], STATS, copies, fits, hint, can_print)
    built = build_plates(view, None, copies, banded=False, mode=mode)
    assert not built.unplaced
    return built.plates


def test_strict_plate_of_copies_late_even_alone_takes_them_all():
    # due at the shift start: every copy is late on any plate; ten 20 mm cubes fit one plate
    plates = _plates(_cubes("X", 10, TUE), "strict")
    assert [len(p.copies) for p in plates] == [10]


def test_strict_still_keeps_an_on_time_copy_within_its_due_time():
    # A fits alone and is due the moment its one-copy plate is cleared: strictly, B's ten
    # copies (due a week later) may not join its plate, since each would make A late
    one = _plates(_cubes("A", 1, TUE + timedelta(days=7)), "strict")
    due_a = one[0].free
    plates = _plates(_cubes("A", 1, due_a) + _cubes("B", 10, TUE + timedelta(days=7)), "strict")
    first = plates[0]
    assert [c.order for c in first.copies] == ["A"]
    assert not late_orders(plates)
