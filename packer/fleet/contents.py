"""CP-SAT model that moves copies between plates and sequences the plates.

Copies of one order line are interchangeable, so they are grouped into lots;
the model decides how many copies of each lot go on each plate slot, which
printer runs each slot and when, with the constraints and objectives of
:mod:`packer.fleet.schedule` (shifts for start and clearing, no overlap,
availability; weighted lateness, then finish) and a third objective: the
number of plates used. A slot's capacity is a share of the plate by the
capacity hint (a bound, not a layout), so every proposed plate must still be
confirmed by the layout engine; the caller does that.

A slot's machine time is ``sum(add_l * n_l) + max over its lots of per_l``
(see :func:`packer.fleet.timemodel.copy_work_bounds`), exact for filament and resin.
Slots marked fixed (powder builds, whose time depends on the packed height)
keep their contents.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Sequence
from dataclasses import dataclass, field

from ortools.sat.python import cp_model

from packer.errors import PackerError
from packer.fleet.schedule import (TICK_S, PlateTask, ScheduleSettings, domain, list_schedule_ticks, make_solver,
                                   printer_choice, solve_within)

__all__ = ["Slot", "LotPair", "ContentsAnswer", "solve_contents"]

_UNIT = 10000   # capacity hints in 1/10000 of a plate


@dataclass(frozen=True)
class Slot:
    """A plate slot: who may run it, its operator time, its capacity (hint share)."""

    printers: tuple[int, ...]
    clear_t: int
    cap: float
    fixed_machine_t: int | None = None   # set for slots whose contents may not change


@dataclass(frozen=True)
class LotPair:
    """What a copy of lot ``lot`` costs on slot ``slot``."""

    lot: int
    slot: int
    hint: float       # share of the plate per copy
    add_s: int        # additive machine seconds per copy (rounded up)
    per_s: int        # per-plate machine seconds if it is the tallest (rounded up)


@dataclass(frozen=True)
class ContentsAnswer:
    counts: dict          # (lot, slot) -> copies
    printer: tuple[int, ...]
    start: tuple[int, ...]
    used: tuple[bool, ...]
    lateness: int
    makespan: int
    plates: int
    status: str
    deterministic: bool
    wall_s: float
    det_s: float = 0.0    # solver's deterministic time over the stages (about core-seconds)


def solve_contents(slots: Sequence[Slot], pairs: Sequence[LotPair], *, qty: Sequence[int],
                   lot_order: Sequence[int], hint_counts: dict, hint_printer: Sequence[int],
                   hint_order: Sequence[int], ready: Sequence[int],
                   windows: Sequence[tuple[int, int]], due: Sequence[int], weight: Sequence[int],
                   settings: ScheduleSettings) -> ContentsAnswer | None:
    """Solve the contents and sequencing model (see the module docstring).

    Parameters
    ----------
    slots, pairs
        The slots and the allowed (lot, slot) pairs with their costs.
    qty, lot_order : (n_lots,) int
        Copies per lot and the order index of each lot.
    hint_counts
        ``(lot, slot) -> copies`` of the current plan (a feasible answer).
    hint_printer, hint_order
        Printer per slot and the order slots were placed in, for the hint times.
    ready, windows, due, weight, settings
        As in :func:`packer.fleet.schedule.solve_schedule`.

    Returns
    -------
    ContentsAnswer or None
        None when no answer was found in time.
    """
    t0 = _time.monotonic()
    horizon = windows[-1][1]
    m = cp_model.CpModel()
    # variables of the copies: how many of each lot go on each slot
    v = _ContentsVars()
    by_slot, by_lot = _add_lots(m, v, slots, pairs, qty, hint_counts)
    # data: the hint plan's machine ticks and times
    hint_machine = _hint_machine(slots, by_slot, hint_counts)
    tasks = [PlateTask(printers=sl.printers, machine_t=hint_machine[k], clear_t=sl.clear_t, orders=())
             for k, sl in enumerate(slots)]
    hint_times = list_schedule_ticks(tasks, hint_printer, hint_order, ready, windows)
    # variables and constraints of each slot: capacity, machine time, printer and times
    by_printer: dict[int, list] = {}
    for k, sl in enumerate(slots):
        _add_slot(m, v, k, sl, by_slot.get(k, []), hint_counts, ready, windows, horizon, by_printer,
                  hint_times[k], hint_printer[k], hint_machine[k])
    for (lot, k), x in v.n.items():
        if slots[k].fixed_machine_t is None:
            m.add_hint(x, hint_counts.get((lot, k), 0))
            m.add_hint(v.y[(lot, k)], 1 if hint_counts.get((lot, k), 0) else 0)
    for ivs in by_printer.values():
        m.add_no_overlap(ivs)
    # objective terms: weighted lateness, finish, plates used
    lateness = _add_lateness(m, v, len(slots), lot_order, due, weight, horizon, hint_counts, hint_times)
    plates = sum(v.used)
    # solve, stage by stage
    best, status, deterministic, det = _solve_stages(m, v, slots, (lateness, v.makespan, plates), settings)
    if best is None:
        return None
    # read the answer
    counts = {key: int(best.value(x)) for key, x in v.n.items() if best.value(x)}
    counts.update(v.fixed_n)
    printer = tuple(next((i for i, x in v.lits[k].items() if best.value(x)), -1) for k in range(len(slots)))
    return ContentsAnswer(counts=counts, printer=printer,
                          start=tuple(int(best.value(s)) for s in v.start),
                          used=tuple(bool(best.value(u)) for u in v.used),
                          lateness=int(best.value(lateness)), makespan=int(best.value(v.makespan)),
                          plates=int(best.value(plates)), status=status,
                          deterministic=deterministic, wall_s=_time.monotonic() - t0, det_s=det)


@dataclass
class _ContentsVars:
    """The model's variables: copies per (lot, slot) and whether any go there (slots whose
    contents may change), the copies on fixed slots (constants), and per slot its start,
    free tick, use, printer literals and machine ticks; lateness per order; the finish."""

    n: dict = field(default_factory=dict)
    y: dict = field(default_factory=dict)
    fixed_n: dict = field(default_factory=dict)
    start: list = field(default_factory=list)
    free: list = field(default_factory=list)
    used: list = field(default_factory=list)
    lits: list = field(default_factory=list)
    machine: list = field(default_factory=list)
    late: list = field(default_factory=list)
    makespan: object = None


def _add_lots(m: cp_model.CpModel, v: _ContentsVars, slots, pairs, qty, hint_counts):
    """Copies per (lot, slot) and their use literals; every copy of a lot on some slot.
    Returns (pairs by slot, (lot, slot) keys by lot)."""
    by_slot: dict[int, list[LotPair]] = {}
    by_lot: dict[int, list] = {}
    for p in pairs:
        key = (p.lot, p.slot)
        if slots[p.slot].fixed_machine_t is not None:
            if hint_counts.get(key, 0):
                v.fixed_n[key] = hint_counts[key]
                by_lot.setdefault(p.lot, []).append(key)
            continue
        v.n[key] = m.new_int_var(0, qty[p.lot], f"n{p.lot}_{p.slot}")
        v.y[key] = m.new_bool_var(f"y{p.lot}_{p.slot}")
        m.add(v.n[key] <= qty[p.lot] * v.y[key])
        m.add(v.n[key] >= v.y[key])
        by_slot.setdefault(p.slot, []).append(p)
        by_lot.setdefault(p.lot, []).append(key)
    for lot, keys in by_lot.items():
        m.add(sum(v.n[k] if k in v.n else v.fixed_n[k] for k in keys) == qty[lot])
    return by_slot, by_lot


def _hint_machine(slots, by_slot, hint_counts) -> list[int]:
    """Machine ticks of each slot with its current contents, to hint the model."""
    out = []
    for k, sl in enumerate(slots):
        ps = by_slot.get(k, [])
        if sl.fixed_machine_t is not None:
            out.append(sl.fixed_machine_t)
            continue
        used = [p for p in ps if hint_counts.get((p.lot, p.slot), 0)]
        secs = sum(p.add_s * hint_counts[(p.lot, p.slot)] for p in used) + max((p.per_s for p in used), default=0)
        out.append(-(-secs // TICK_S))
    return out


def _slot_machine(m: cp_model.CpModel, v: _ContentsVars, k: int, sl: Slot, ps, hint_counts, u, horizon: int):
    """Machine ticks of slot ``k``: a constant for a fixed slot; else at least the additive
    seconds of its copies plus the largest per-plate share, with the capacity constraint and
    the slot used exactly when some lot goes on it."""
    if sl.fixed_machine_t is not None:
        m.add(u == 1)
        return m.new_constant(sl.fixed_machine_t)
    for p in ps:
        m.add_implication(v.y[(p.lot, p.slot)], u)
    m.add_bool_or([v.y[(p.lot, p.slot)] for p in ps] + [u.Not()])
    unit = {p.lot: math.ceil(p.hint * _UNIT - 1e-9) for p in ps}
    cap = max(int(sl.cap * _UNIT),
              sum(unit[p.lot] * hint_counts.get((p.lot, p.slot), 0) for p in ps))
    m.add(sum(unit[p.lot] * v.n[(p.lot, p.slot)] for p in ps) <= cap)
    per = m.new_int_var(0, max((p.per_s for p in ps), default=0), f"per{k}")
    for p in ps:
        m.add(per >= p.per_s).only_enforce_if(v.y[(p.lot, p.slot)])
    m.add_hint(per, max((p.per_s for p in ps if hint_counts.get((p.lot, p.slot), 0)), default=0))
    mk = m.new_int_var(0, horizon, f"m{k}")
    m.add(TICK_S * mk >= sum(p.add_s * v.n[(p.lot, p.slot)] for p in ps) + per)
    return mk


def _add_slot(m: cp_model.CpModel, v: _ContentsVars, k: int, sl: Slot, ps, hint_counts, ready, windows,
              horizon: int, by_printer: dict, hint: tuple[int, int, int], hint_printer: int,
              hint_machine: int) -> None:
    """Variables and constraints of slot ``k`` (use, machine ticks, start, clearing, free,
    printer literals) and their hints from the hint plan's ``(start, end, free)``."""
    u = m.new_bool_var(f"u{k}")
    mk = _slot_machine(m, v, k, sl, ps, hint_counts, u, horizon)
    lo = min(ready[i] for i in sl.printers)
    s = m.new_int_var_from_domain(domain(windows, 0, lo, horizon), f"s{k}")
    c = m.new_int_var_from_domain(domain(windows, sl.clear_t, lo, horizon), f"c{k}")
    f = m.new_int_var(lo, horizon, f"f{k}")
    size = m.new_int_var(0, horizon, f"z{k}")
    m.add(c >= s + mk)
    m.add(f == c + sl.clear_t)
    m.add(size == f - s)
    row = printer_choice(m, k, s, size, f, sl.printers, ready, by_printer)
    m.add(sum(row.values()) == u)
    v.start.append(s)
    v.free.append(f)
    v.used.append(u)
    v.lits.append(row)
    v.machine.append(mk)
    hs, _, hf = hint
    m.add_hint(s, hs)
    m.add_hint(c, hf - sl.clear_t)
    m.add_hint(f, hf)
    m.add_hint(size, hf - hs)
    m.add_hint(u, 1)
    for i, x in row.items():
        m.add_hint(x, i == hint_printer)
    if sl.fixed_machine_t is None:
        m.add_hint(mk, hint_machine)


def _add_lateness(m: cp_model.CpModel, v: _ContentsVars, n_slots: int, lot_order, due, weight, horizon: int,
                  hint_counts, hint_times):
    """Lateness per order (an order is as late as the latest slot holding one of its lots) and
    the finish over the used slots, hinted by the hint plan; returns the weighted lateness."""
    v.late = [m.new_int_var(0, max(0, horizon - due[o]), f"late{o}") for o in range(len(due))]
    for (lot, k), yv in v.y.items():
        m.add(v.late[lot_order[lot]] >= v.free[k] - due[lot_order[lot]]).only_enforce_if(yv)
    for (lot, k) in v.fixed_n:
        m.add(v.late[lot_order[lot]] >= v.free[k] - due[lot_order[lot]])
    v.makespan = m.new_int_var(0, horizon, "makespan")
    for k in range(n_slots):
        m.add(v.makespan >= v.free[k]).only_enforce_if(v.used[k])
    hint_late = [0] * len(due)
    for (lot, k), x in list(hint_counts.items()):
        if x:
            o = lot_order[lot]
            hint_late[o] = max(hint_late[o], hint_times[k][2] - due[o])
    for o, x in enumerate(v.late):
        m.add_hint(x, hint_late[o])
    m.add_hint(v.makespan, max((h[2] for h in hint_times), default=0))
    return sum(w * x for w, x in zip(weight, v.late))


def _rehint(m: cp_model.CpModel, v: _ContentsVars, slots, best: cp_model.CpSolver) -> None:
    """Replace the hint by the best answer so far."""
    m.clear_hints()
    for x in v.start + v.free + v.used + v.late + [v.makespan] + list(v.n.values()) + list(v.y.values()):
        m.add_hint(x, best.value(x))
    for k, mk in enumerate(v.machine):
        if slots[k].fixed_machine_t is None:
            m.add_hint(mk, best.value(mk))
    for row in v.lits:
        for x in row.values():
            m.add_hint(x, best.value(x))


def _solve_stages(m: cp_model.CpModel, v: _ContentsVars, slots, objectives, settings: ScheduleSettings):
    """Each objective in turn, the earlier ones kept at their best; (best solver or None,
    status, deterministic, deterministic time)."""
    lateness, makespan, _ = objectives
    best, status, deterministic = None, "feasible", True
    det = 0.0
    share = (0.45, 0.3, 0.25)
    for stage, objective in enumerate(objectives):
        if stage == 1:
            m.add(lateness <= int(round(best.objective_value)))
        if stage == 2:
            m.add(makespan <= int(round(best.objective_value)))
        if best is not None:
            _rehint(m, v, slots, best)
        m.minimize(objective)
        limit = settings.time_limit_s * share[stage]
        solver = make_solver(limit, settings.deterministic_limit * share[stage], settings)
        code, netted = solve_within(solver, m, limit)
        det += solver.deterministic_time
        if code == cp_model.MODEL_INVALID:
            raise PackerError("the plate contents model is invalid")
        if code == cp_model.INFEASIBLE:
            if best is None:
                raise PackerError("the plate contents model is infeasible although its hint is a plan")
            break
        deterministic &= not netted
        if code == cp_model.UNKNOWN:
            break
        best = solver
        status = "optimal" if code == cp_model.OPTIMAL else "feasible"
    return best, status, deterministic, det
