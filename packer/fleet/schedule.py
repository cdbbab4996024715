"""CP-SAT sequencing of plates whose contents are fixed.

Each plate has a machine time (warm-up and print, for powder with cool-down)
and an operator clear time. The model picks a printer for each plate and its
start so that

1. the weighted lateness of the orders is least (an order is complete when
   the last of its plates has been cleared; priority is the weight),
2. then the whole day finishes earliest (the last printer free again),

with plates started only inside shifts, cleared only inside shifts (the whole
clearing inside one shift), no two plates on one printer at once and no plate
before its printer is available. The two objectives are solved one after
the other (lexicographically), each from the best answer so far as a hint.

Time is in whole ticks of ``TICK_S`` seconds from an origin; durations are
rounded up and shift windows rounded inward, so an integer answer is
feasible in real time. (Whole minutes were too coarse: rounding added up
along a printer's day and pushed plates that really end just before the
shift ends past it, to be cleared only the next morning.)
"""

from __future__ import annotations

import threading
import time as _time
from collections.abc import Sequence
from dataclasses import dataclass, field

from ortools.sat.python import cp_model

from packer.errors import PackerError

__all__ = ["PlateTask", "ScheduleSettings", "ScheduleAnswer", "solve_schedule",
           "list_schedule_ticks", "first_start", "printer_choice", "domain", "make_solver", "solve_within",
           "WALL_BACKSTOP", "TICK_S"]

TICK_S = 10   # seconds per time unit of the models


@dataclass(frozen=True)
class PlateTask:
    """One plate to schedule, in ticks of ``TICK_S`` seconds.

    Attributes
    ----------
    printers : tuple of int
        Indices of the printers that may run it (same profile, material set up).
    machine_t : int
        Warm-up plus print time in ticks, rounded up.
    clear_t : int
        Operator clear time in ticks, rounded up.
    orders : tuple of int
        Indices of the orders with a copy on the plate.
    machine_by : tuple of int
        Machine time on each printer of ``printers`` (same order), when the plate
        runs a different layout or profile there; empty: ``machine_t`` everywhere.
    """

    printers: tuple[int, ...]
    machine_t: int
    clear_t: int
    orders: tuple[int, ...]
    machine_by: tuple[int, ...] = ()

    def machine_on(self, i: int) -> int:
        """Machine ticks on printer ``i``."""
        return self.machine_by[self.printers.index(i)] if self.machine_by else self.machine_t


#: The wall clock stops a solve only at this multiple of its CPU-time net (:func:`solve_within`).
WALL_BACKSTOP = 10.0
#: Seconds between two looks of the CPU-time net at the process's CPU time.
NET_POLL_S = 0.02


@dataclass(frozen=True)
class ScheduleSettings:
    """Solver settings; both limits are split between the stages.

    The search is deterministic: it runs with interleaved workers and stops on
    the solver's deterministic time (``deterministic_limit`` units, about
    seconds of an idle core). The process's CPU time (``time_limit_s`` per worker,
    :func:`solve_within`) stops it only as a safety net, and the answer then says so (``deterministic=False``).
    Callers derive ``deterministic_limit`` from their fixed budget, never from
    the time already spent, so the same input gives the same plan.
    """

    time_limit_s: float = 10.0
    deterministic_limit: float = 2.0
    workers: int = 2
    seed: int = 0
    log: bool = False


@dataclass(frozen=True)
class ScheduleAnswer:
    """Printer and start (ticks) per task, and how the solve went."""

    printer: tuple[int, ...]
    start: tuple[int, ...]
    lateness: int             # weighted ticks, as the model counts them
    makespan: int             # ticks from the origin
    status: str               # "optimal" or "feasible" (of the last stage)
    deterministic: bool
    wall_s: float
    det_s: float = 0.0        # solver's deterministic time over the stages (about core-seconds)


def first_start(windows: Sequence[tuple[int, int]], t: int, need: int = 0) -> int:
    """First tick ``>= t`` inside a window with ``need`` ticks of it left.

    ``windows`` are sorted half-open ``[start, end)`` tick intervals.
    """
    for s, e in windows:
        c = max(t, s)
        if c + need <= e and c < e:
            return c
    raise PackerError("the schedule ran past the last shift window; the horizon is too short")


def list_schedule_ticks(tasks: Sequence[PlateTask], printer_of: Sequence[int],
                          order: Sequence[int], ready: Sequence[int],
                          windows: Sequence[tuple[int, int]],
                          blocked: Sequence[Sequence[tuple[int, int]]] = ()) -> list[tuple[int, int, int]]:
    """Earliest integer times for tasks run in ``order`` on their given printers.

    ``blocked[i]``: half-open tick intervals in which printer ``i`` takes no plate
    (a plate occupies its printer from start to free).

    Returns
    -------
    list of (start, end, free) per task index.
    """
    free_at = list(ready)
    out: list[tuple[int, int, int]] = [(0, 0, 0)] * len(tasks)
    for j in order:
        t, i = tasks[j], printer_of[j]
        at = free_at[i]
        while True:
            s = first_start(windows, at)
            end = s + t.machine_on(i)
            clr = first_start(windows, end, t.clear_t)
            hit = [b for a, b in (blocked[i] if i < len(blocked) else ()) if a < clr + t.clear_t and b > s]
            if not hit:
                break
            at = max(hit)
        out[j] = (s, end, clr + t.clear_t)
        free_at[i] = clr + t.clear_t
    return out


def domain(windows: Sequence[tuple[int, int]], need: int, lo: int, hi: int) -> cp_model.Domain:
    """Ticks in ``[lo, hi]`` at which something with ``need`` ticks of a shift window left
    may happen (``need`` 0: a start, strictly inside a window)."""
    iv = [[max(s, lo), min(e - need - (1 if need == 0 else 0), hi)] for s, e in windows]
    iv = [x for x in iv if x[0] <= x[1]]
    if not iv:
        raise PackerError("no shift window can hold this task inside the horizon")
    return cp_model.Domain.from_intervals(iv)


def solve_schedule(tasks: Sequence[PlateTask], *, ready: Sequence[int],
                   windows: Sequence[tuple[int, int]], due: Sequence[int],
                   weight: Sequence[int], hint_printer: Sequence[int],
                   hint_order: Sequence[int], settings: ScheduleSettings,
                   blocked: Sequence[Sequence[tuple[int, int]]] = ()) -> ScheduleAnswer | None:
    """Choose printer and start of every task (see the module docstring).

    Parameters
    ----------
    tasks
        The plates.
    ready : (m,) int
        Tick at which each printer becomes available.
    windows : sorted list of (start, end) int
        Shift windows in ticks, covering the horizon of the hint schedule.
    due, weight : (n_orders,) int
        Due tick and lateness weight of each order.
    hint_printer, hint_order
        A feasible plan (printer per task and the order tasks were placed),
        timed with :func:`list_schedule_ticks` and given to the solver as a hint.
    settings
    blocked : per printer, list of (start, end) int
        Ticks in which the printer takes no plate (down windows), optional.

    Returns
    -------
    ScheduleAnswer or None
        None when the solver found nothing within its time (the caller keeps
        the hint plan).

    Raises
    ------
    PackerError
        If the solver calls the model infeasible or invalid: the hint is a
        feasible plan, so that is a bug.
    """
    t0 = _time.monotonic()
    # data: the hint plan's times and the horizon
    hint_times = list_schedule_ticks(tasks, hint_printer, hint_order, ready, windows, blocked)
    horizon = windows[-1][1]
    # variables and the constraints of each task, hinted by the hint plan
    model = cp_model.CpModel()
    v = _ScheduleVars()
    by_printer: dict[int, list] = {}
    for j, t in enumerate(tasks):
        _add_task(model, v, j, t, ready, windows, horizon, by_printer, hint_times[j], hint_printer[j])
    # constraints across tasks: one plate at a time per printer, none in a down window
    _add_no_overlap(model, by_printer, blocked, horizon)
    # objective terms: weighted lateness, then the finish
    lateness = _add_lateness(model, v, tasks, due, weight, horizon, hint_times)
    # solve, stage by stage
    got = _solve_stages(model, v, lateness, settings)
    if got is None:
        return None
    best, status_name, deterministic, det = got
    # read the answer
    printer = tuple(next(i for i, x in v.lits[j].items() if best.value(x)) for j in range(len(tasks)))
    starts = tuple(int(best.value(s)) for s in v.start)
    return ScheduleAnswer(printer=printer, start=starts, lateness=int(best.value(lateness)),
                          makespan=int(best.value(v.makespan)), status=status_name,
                          deterministic=deterministic, wall_s=_time.monotonic() - t0, det_s=det)


@dataclass
class _ScheduleVars:
    """The model's variables: start and free tick, printer literals per task; lateness per
    order; the finish."""

    start: list = field(default_factory=list)
    free: list = field(default_factory=list)
    lits: list = field(default_factory=list)
    late: list = field(default_factory=list)
    makespan: object = None


def _add_task(model: cp_model.CpModel, v: _ScheduleVars, j: int, t: PlateTask, ready, windows, horizon: int,
              by_printer: dict, hint: tuple[int, int, int], hint_printer: int) -> None:
    """Variables of task ``j`` (start, clearing, free, occupied size, printer literals), its
    constraints, and its hint from the hint plan's ``(start, end, free)``."""
    lo = min(ready[i] for i in t.printers)
    s = model.new_int_var_from_domain(domain(windows, 0, lo, horizon), f"s{j}")
    c = model.new_int_var_from_domain(domain(windows, t.clear_t, lo, horizon), f"c{j}")
    f = model.new_int_var(lo, horizon, f"f{j}")
    fastest = min(t.machine_on(i) for i in t.printers)
    size = model.new_int_var(fastest + t.clear_t, horizon, f"z{j}")
    model.add(c >= s + fastest)
    model.add(f == c + t.clear_t)
    row = printer_choice(model, j, s, size, f, t.printers, ready, by_printer)
    model.add_exactly_one(row.values())
    for i, x in row.items():
        if t.machine_on(i) > fastest:
            model.add(c >= s + t.machine_on(i)).only_enforce_if(x)
    v.start.append(s)
    v.free.append(f)
    v.lits.append(row)
    hs, he, hf = hint
    model.add_hint(s, hs)
    model.add_hint(c, hf - t.clear_t)
    model.add_hint(f, hf)
    model.add_hint(size, hf - hs)
    for i, x in row.items():
        model.add_hint(x, i == hint_printer)


def _add_no_overlap(model: cp_model.CpModel, by_printer: dict, blocked, horizon: int) -> None:
    """The down windows as fixed intervals, and no two intervals at once on a printer."""
    for i, spans in enumerate(blocked):
        for k, (a, b) in enumerate(spans):
            a, b = max(0, a), min(b, horizon + 1)
            if b > a and i in by_printer:
                by_printer[i].append(model.new_fixed_size_interval_var(a, b - a, f"down{i}_{k}"))
    for ivs in by_printer.values():
        model.add_no_overlap(ivs)


def _add_lateness(model: cp_model.CpModel, v: _ScheduleVars, tasks, due, weight, horizon: int, hint_times):
    """Lateness per order and the finish (``v.late``, ``v.makespan``), hinted; returns the
    weighted lateness expression."""
    for o in range(len(due)):
        v.late.append(model.new_int_var(0, max(0, horizon - due[o]), f"late{o}"))
    for j, t in enumerate(tasks):
        for o in set(t.orders):
            model.add(v.late[o] >= v.free[j] - due[o])
    hint_late = [0] * len(due)
    for j, t in enumerate(tasks):
        for o in t.orders:
            hint_late[o] = max(hint_late[o], hint_times[j][2] - due[o])
    for o, x in enumerate(v.late):
        model.add_hint(x, hint_late[o])
    v.makespan = model.new_int_var(0, horizon, "makespan")
    for f in v.free:
        model.add(v.makespan >= f)
    model.add_hint(v.makespan, max((h[2] for h in hint_times), default=0))
    return sum(w * x for w, x in zip(weight, v.late))


def _solve_stages(model: cp_model.CpModel, v: _ScheduleVars, lateness, settings: ScheduleSettings):
    """Least weighted lateness, then (keeping it) the earliest finish; (best solver, status,
    deterministic, deterministic time) or None when the first stage found nothing."""
    deterministic = True
    status_name = "feasible"
    best = None
    det = 0.0
    for stage in (1, 2):
        if stage == 1:
            model.minimize(lateness)
        else:
            model.add(lateness <= int(round(best.objective_value)))
            model.minimize(v.makespan)
            _rehint(model, best, v.start, v.free, v.lits, v.late, v.makespan)
        share = 0.6 if stage == 1 else 0.4
        limit = settings.time_limit_s * share
        solver = make_solver(limit, settings.deterministic_limit * share, settings)
        code, netted = solve_within(solver, model, limit)
        det += solver.deterministic_time
        if code in (cp_model.INFEASIBLE, cp_model.MODEL_INVALID):
            raise PackerError(f"plate schedule model reported {solver.status_name(code)} "
                              "although the hint plan is feasible")
        deterministic &= not netted
        if code == cp_model.UNKNOWN:
            if best is None:
                return None
            break
        best = solver
        status_name = "optimal" if code == cp_model.OPTIMAL else "feasible"
    return best, status_name, deterministic, det


def printer_choice(model: cp_model.CpModel, k: int, s, size, f, printers: Sequence[int],
                   ready: Sequence[int], by_printer: dict) -> dict:
    """A literal per printer that may run plate ``k``: chosen, the plate occupies that printer
    from ``s`` to ``f`` (an optional interval, added to ``by_printer[i]``) and starts no earlier
    than the printer is ready. Returns {printer index: literal}."""
    row = {}
    for i in printers:
        x = model.new_bool_var(f"x{k}_{i}")
        iv = model.new_optional_interval_var(s, size, f, x, f"i{k}_{i}")
        model.add(s >= ready[i]).only_enforce_if(x)
        by_printer.setdefault(i, []).append(iv)
        row[i] = x
    return row


def make_solver(limit: float, det_limit: float, settings: ScheduleSettings) -> cp_model.CpSolver:
    """A CP-SAT solver stopped at ``det_limit`` deterministic units (at least 0.05), on
    ``settings``' workers and seed. ``limit`` (s, at least 0.2) is the safety net that
    :func:`solve_within` keeps on the process's CPU time; the wall clock stops the solve
    only at :data:`WALL_BACKSTOP` times it (a machine that stalls)."""
    solver = cp_model.CpSolver()
    p = solver.parameters
    p.num_workers = max(1, settings.workers)
    p.interleave_search = True
    p.random_seed = settings.seed
    p.max_deterministic_time = max(0.05, det_limit)
    p.max_time_in_seconds = WALL_BACKSTOP * max(0.2, limit)
    p.log_search_progress = settings.log
    return solver


def solve_within(solver: cp_model.CpSolver, model: cp_model.CpModel, limit: float) -> tuple[int, bool]:
    """Solve ``model``; (status, stopped by a safety net).

    The net is CPU time, not wall time: the solve is stopped once this process has used
    ``limit`` CPU seconds per solver worker since it began (at least 0.2 s), so other
    processes on a loaded machine, or parallel planning workers, do not trip it; only a
    solve that does far more work than its deterministic time says does. The wall-clock
    backstop of :func:`make_solver` counts as a net too.
    """
    cpu_limit = max(0.2, limit) * max(1, solver.parameters.num_workers)
    cpu0 = _time.process_time()
    done = threading.Event()
    fired = []

    def watch() -> None:
        while not done.wait(NET_POLL_S):
            if _time.process_time() - cpu0 > cpu_limit:
                fired.append(True)
                solver.stop_search()
                return

    guard = threading.Thread(target=watch, daemon=True)
    guard.start()
    try:
        code = solver.solve(model)
    finally:
        done.set()
        guard.join()
    return code, bool(fired) or solver.wall_time >= 0.98 * solver.parameters.max_time_in_seconds


def _rehint(model, solver, start, free, lits, late, makespan) -> None:
    """Replace the hint by the stage-1 answer."""
    model.clear_hints()
    for v in start + free + late + [makespan]:
        model.add_hint(v, solver.value(v))
    for row in lits:
        for x in row.values():
            model.add_hint(x, solver.value(x))
