"""Due-aware load bounds: the single-machine results against hand-worked and textbook
cases, the capacity curve worked by hand, and the bounds against plans (never above)."""

import itertools
import math
from datetime import timedelta

import pytest

from packer.errors import SizeError
from packer.fleet.loadbounds import (capacity_curve, fractional_knapsack, moore_late_jobs,
                                     transport_tardiness_bound)
from test_fleet_planner import FIL, RES, TUE, copies_of, mixed_day, printer, run

H = 3600.0


def test_fractional_knapsack():
    # Cormen, Leiserson, Rivest, Stein, Introduction to Algorithms (3rd ed.), fig. 16.2, recalled
    # from memory; worked by hand: items 10/20/30 worth 60/100/120, room 50: take 10 and 20 whole
    # (160) and 20/30 of the third (80) = 240; the 0/1 optimum is 220 <= 240.
    assert fractional_knapsack([60, 100, 120], [10, 20, 30], [1, 1, 1], 50) == pytest.approx(240)
    # counts: three items of size 4 worth 5 in room 10 -> 2.5 items -> 12.5 (worked by hand)
    assert fractional_knapsack([5], [4], [3], 10) == pytest.approx(12.5)
    # items of no size always fit; no room leaves only them
    assert fractional_knapsack([7, 5], [0, 1], [2, 1], 0) == pytest.approx(14)


def test_moore_textbook_case():
    # Pinedo, Scheduling: Theory, Algorithms, and Systems, example 3.3.3 (instance recalled from
    # memory). Worked by hand: EDD 1 (C=7 <= 9), 2 (15 <= 17), 3 (19 > 18: drop the longest, job 2,
    # C=11), 4 (17 <= 19), 5 (23 > 21: drop job 1, C=16). Jobs 1 and 2 late; 3, 4, 5 end 4, 10, 16.
    assert sorted(moore_late_jobs([7, 8, 4, 6, 6], [9, 17, 18, 19, 21])) == [0, 1]
    assert moore_late_jobs([], []) == []
    assert moore_late_jobs([5, 0], [4, 0]) == [0]


def _fewest_late(work, due):
    """Least number of late jobs by enumeration: a set is on time when EDD meets every due."""
    n = len(work)
    for k in range(n + 1):
        for late in itertools.combinations(range(n), k):
            t, ok = 0.0, True
            for j in sorted(set(range(n)) - set(late), key=lambda j: due[j]):
                t += work[j]
                ok &= t <= due[j]
            if ok:
                return k
    return n


@pytest.mark.parametrize("work, due", [((3, 5, 2, 4, 1), (4, 6, 6, 9, 9)), ((6, 2, 2, 2), (6, 4, 5, 6)),
                                       ((1, 1, 1, 5, 5), (1, 2, 2, 7, 8)), ((4, 4, 4), (3, 8, 12))])
def test_moore_matches_enumeration(work, due):
    # Moore's algorithm is exact for 1 || sum U_j (Moore 1968): checked by enumeration
    assert len(moore_late_jobs(work, due)) == _fewest_late(work, due)


def test_capacity_curve_worked_by_hand():
    # Shifts [0, 12 h) and [24 h, 36 h). Printer A ready at 2 h, one plate at most 5 h of machine
    # time; printer B ready at 0, no cap on a plate (worked by hand):
    #   at 10 h: A 8 h + B 10 h = 18 h; at 12 h (and all night): 10 + 12 = 22 h;
    #   at 24 h: the night is over: A + min(12, 5), B + 12 -> 15 + 24 = 39 h; left limit: 22 h;
    #   at 30 h: 39 + 2 x 6 = 51 h; after 36 h: 63 h.
    cap = capacity_curve([(24 * H, 36 * H), (0.0, 12 * H)], [2 * H, 0.0], [5 * H, math.inf])
    assert cap.at(-1.0) == 0.0 and cap.at(10 * H) == pytest.approx(18 * H)
    assert cap.at(12 * H) == cap.at(20 * H) == pytest.approx(22 * H)
    assert cap.at(24 * H) == pytest.approx(39 * H) and cap.before(24 * H) == pytest.approx(22 * H)
    assert cap.at(30 * H) == pytest.approx(51 * H) and cap.total == pytest.approx(63 * H)
    # earliest moment for 30 h of work: 30 <= 39 at 24 h (the morning credit), 22 < 30 before it
    assert cap.earliest(30 * H) == pytest.approx(24 * H)
    # 45 h: 39 + 2 t = 45 -> t = 3 h into the second shift (to within the 0.5 s bisection, from below)
    assert 27 * H - 0.5 <= cap.earliest(45 * H) <= 27 * H
    assert cap.earliest(64 * H) is None
    with pytest.raises(SizeError, match="at least one shift window"):
        capacity_curve([], [0.0], [1.0])
    with pytest.raises(SizeError, match="one ready time and one night cap"):
        capacity_curve([(0.0, 1.0)], [0.0], [])


def test_transport_bound_worked_by_hand():
    cap = capacity_curve([(0.0, 100 * H)], [0.0], [math.inf])
    # two jobs of 2 h due at 2 h, weight 1; the best plan makes one 2 h late (sum wT = 2 h).
    # Worked by hand with 30 min slots: 120 minutes go before 2 h at no cost, 4 x 30 minutes in the
    # slots starting 2, 2.5, 3, 3.5 h at 1/120 per minute of lateness: (0 + .5 + 1 + 1.5) / 4 = 0.75 h.
    got = transport_tardiness_bound([2 * H, 2 * H], [2 * H, 2 * H], [1.0, 1.0], cap, slot_s=1800)
    assert got == pytest.approx(0.75 * H, rel=1e-3) and got <= 2 * H
    # a job due later than the machine can finish it costs nothing
    assert transport_tardiness_bound([2 * H], [5 * H], [3.0], cap) == 0.0
    # weight 2, 3 h of work due at 1 h (best: 2 x 2 h = 4 h). By hand: slots from 1 h at 1/180 per
    # minute x 2: 30 x 2 / 180 x (0 + .5 + 1 + 1.5) = 1.0 h (x weight-hours)
    assert transport_tardiness_bound([3 * H], [1 * H], [2.0], cap) == pytest.approx(1.0 * H, rel=1e-3)


def test_load_bounds_never_above_the_plan():
    # the bounds are certificates: every plan is at least as late and ends no earlier
    cs, fleet = mixed_day()
    res = run(cs, fleet)
    load = res.bounds["load"]
    assert res.stats["late_orders"] >= load["surely_late_orders"]
    assert res.stats["weighted_lateness_h"] >= load["lateness_bound_h"] - 1e-6
    assert res.stats["finish"] >= load["finish_bound"] >= res.bounds["finish_bound"]
    assert set(load["groups"]) == {"filament", "filament/PETG", "filament/PLA", "powder", "resin"}


def test_load_bound_sees_a_full_shift():
    # Twelve orders of 20 mm cubes due Tuesday 19:00 on one filament printer: every copy alone is
    # done by 19:00, so the per-copy bound sees no late order; their work (about 1.5 machine hours
    # an order) is more than one 12 h shift holds, so the load bound says some must be late.
    cs = []
    for k in range(12):
        cs += copies_of(f"O{k}", "cube", 0, 12, "PLA", TUE.replace(hour=19))
    res = run(cs, [printer("f1", FIL)], seconds=3.0)
    load = res.bounds["load"]
    assert res.bounds["surely_late_orders"] == 0
    assert load["groups"]["filament"]["due_work_h"] > 12.0
    assert 1 <= load["surely_late_orders"] <= res.stats["late_orders"]
    assert 0 < load["lateness_bound_h"] <= res.stats["weighted_lateness_h"]


def test_night_cap_and_post_processing():
    # A resin plate's time follows its tallest copy, so the night cap is one plate of the
    # tallest pin; the resin profile's steps (if any) move the clear-by time earlier.
    cs = copies_of("P", "pin", 2, 4, "resin-grey", TUE + timedelta(days=1))
    res = run(cs, [printer("r1", RES)])
    g = res.bounds["load"]["groups"]["resin"]
    one = max(p.end - p.start for p in res.plates).total_seconds() / H
    assert g["night_cap_h"][0] == pytest.approx(g["night_cap_h"][1])
    assert g["night_cap_h"][0] >= one - 1e-6
