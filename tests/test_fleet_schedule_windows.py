"""The sequencing model with printer down windows and per-printer machine times.

Checks are certificates computed by hand here: no plate occupies a printer
(start to clearing) inside a blocked interval, each plate runs its printer's
own machine time, and the optimum of a two-plate case worked out on paper.
"""

from packer.fleet.schedule import PlateTask, ScheduleSettings, list_schedule_ticks, solve_schedule

WINDOWS = [(0, 1000)]          # one long shift, ticks


def test_list_schedule_jumps_a_blocked_interval():
    t = PlateTask(printers=(0,), machine_t=50, clear_t=5, orders=(0,))
    # printer 0 blocked 30-200: the plate (55 ticks with clearing) does not fit before 30, so it starts at 200
    (s, e, f), = list_schedule_ticks([t], [0], [0], [0], WINDOWS, [[(30, 200)]])
    assert (s, e, f) == (200, 250, 255)
    (s, e, f), = list_schedule_ticks([t], [0], [0], [0], WINDOWS, [[(60, 200)]])
    assert (s, e, f) == (0, 50, 55)                     # fits before the window


def test_solver_uses_the_other_printer_with_its_own_machine_time():
    # plate 0 may run on printer 0 (60 ticks) or printer 1 (40 ticks); printer 0 is blocked 10-500.
    # Due at 100: on printer 0 it would end at 500 + 60 + 5; on printer 1 at 45 (hand-computed optimum).
    t = PlateTask(printers=(0, 1), machine_t=40, clear_t=5, orders=(0,), machine_by=(60, 40))
    ans = solve_schedule([t], ready=[0, 0], windows=WINDOWS, due=[100], weight=[1], hint_printer=[0],
                         hint_order=[0], blocked=[[(10, 500)], []],
                         settings=ScheduleSettings(time_limit_s=5.0, deterministic_limit=1.0, workers=1))
    assert ans.printer == (1,) and ans.lateness == 0 and ans.start[0] + 40 + 5 <= 100
    # with printer 1 gone, the plate runs after the window on printer 0, for its 60 ticks
    t0 = PlateTask(printers=(0,), machine_t=60, clear_t=5, orders=(0,))
    ans = solve_schedule([t0], ready=[0], windows=WINDOWS, due=[100], weight=[1], hint_printer=[0],
                         hint_order=[0], blocked=[[(10, 500)]],
                         settings=ScheduleSettings(time_limit_s=5.0, deterministic_limit=1.0, workers=1))
    assert ans.start[0] >= 500 and ans.lateness == ans.start[0] + 65 - 100 == 465
