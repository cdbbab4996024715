"""The CP-SAT contents model on cases small enough to check by hand."""

from packer.fleet.contents import LotPair, Slot, solve_contents
from packer.fleet.schedule import TICK_S, ScheduleSettings

# 07:00-19:00 on three days, in ticks of TICK_S seconds from 07:00 on the first day
T = 60 // TICK_S                                         # ticks per minute
WINDOWS = [(0, 720 * T), (1440 * T, 2160 * T), (2880 * T, 3600 * T)]
SET = ScheduleSettings(time_limit_s=5.0, deterministic_limit=5.0, seed=0)


def test_two_half_plates_become_one():
    # One printer, one lot of 10 copies split 5 + 5 over two plates. Each copy needs 0.1 of a
    # plate, adds 60 s; a plate costs 600 s (warm-up and layers) and 5 min clearing. Hand check:
    # one plate of 10 takes 600 + 600 s = 20 min + 5 min clearing = 25 min; two plates take
    # 2 * (15 + 5) = 40 min. Nothing is late either way, so the finish (25 < 40) and the plate
    # count both prefer one plate holding all ten copies.
    slots = [Slot(printers=(0,), clear_t=5 * T, cap=1.0), Slot(printers=(0,), clear_t=5 * T, cap=1.0)]
    pairs = [LotPair(lot=0, slot=k, hint=0.1, add_s=60, per_s=600) for k in (0, 1)]
    ans = solve_contents(slots, pairs, qty=[10], lot_order=[0], hint_counts={(0, 0): 5, (0, 1): 5},
                         hint_printer=[0, 0], hint_order=[0, 1], ready=[0], windows=WINDOWS,
                         due=[600 * T], weight=[1], settings=SET)
    assert ans is not None and ans.plates == 1
    assert sorted(ans.counts.values()) == [10]
    assert ans.makespan == 25 * T and ans.lateness == 0


def test_capacity_keeps_plates_apart():
    # Same, but each copy needs 0.15 of a plate: 10 copies (1.5 plates) cannot share one plate.
    slots = [Slot(printers=(0,), clear_t=5 * T, cap=1.0), Slot(printers=(0,), clear_t=5 * T, cap=1.0)]
    pairs = [LotPair(lot=0, slot=k, hint=0.15, add_s=60, per_s=600) for k in (0, 1)]
    ans = solve_contents(slots, pairs, qty=[10], lot_order=[0], hint_counts={(0, 0): 5, (0, 1): 5},
                         hint_printer=[0, 0], hint_order=[0, 1], ready=[0], windows=WINDOWS,
                         due=[600 * T], weight=[1], settings=SET)
    assert ans.plates == 2
    assert all(v * 0.15 <= 1.0 for v in ans.counts.values())
    assert sum(ans.counts.values()) == 10


def test_urgent_lot_gets_its_own_early_plate():
    # Lot 0 (order 0, due at minute 20) and lot 1 (order 1, due next day). Sharing one plate
    # takes 600 + 2*60 + 20*60 s = 32 min + 5 clearing: order 0 would be 17 min late. Hand check:
    # lot 0's plate is on time while it holds at most 5 copies (600 + 5*60 s = 15 min + 5 = 20).
    # So an on-time plan exists and the model must split the lots that way.
    slots = [Slot(printers=(0,), clear_t=5 * T, cap=1.0), Slot(printers=(0,), clear_t=5 * T, cap=1.0)]
    pairs = [LotPair(lot=l, slot=k, hint=0.02, add_s=60, per_s=600) for l in (0, 1) for k in (0, 1)]
    ans = solve_contents(slots, pairs, qty=[2, 20], lot_order=[0, 1],
                         hint_counts={(0, 0): 2, (1, 0): 20}, hint_printer=[0, 0], hint_order=[0, 1],
                         ready=[0], windows=WINDOWS, due=[20 * T, (1440 + 600) * T], weight=[3, 1], settings=SET)
    assert ans.lateness == 0 and ans.plates == 2
    k0 = next(k for (l, k) in ans.counts if l == 0)
    assert ans.counts[(0, k0)] == 2
    assert sum(v for (l, k), v in ans.counts.items() if k == k0) <= 5
    assert ans.start[k0] == 0
