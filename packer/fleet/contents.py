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
(see :func:`packer.fleet.planner._work_lb`), exact for filament and resin.
Slots marked fixed (powder builds, whose time depends on the packed height)
keep their contents.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Sequence
from dataclasses import dataclass

from ortools.sat.python import cp_model

from packer.errors import PackerError
from packer.fleet.schedule import (TICK_S, PlateTask, ScheduleSettings, _domain, _solver, list_schedule_ticks, printer_choice)

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
    by_slot: dict[int, list[LotPair]] = {}
    by_lot: dict[int, list] = {}
    n, y = {}, {}          # variables of the slots whose contents may change
    fixed_n: dict = {}     # (lot, slot) -> copies on fixed slots
    for p in pairs:
        key = (p.lot, p.slot)
        if slots[p.slot].fixed_machine_t is not None:
            if hint_counts.get(key, 0):
                fixed_n[key] = hint_counts[key]
                by_lot.setdefault(p.lot, []).append(key)
            continue
        else:
            n[key] = m.new_int_var(0, qty[p.lot], f"n{p.lot}_{p.slot}")
            y[key] = m.new_bool_var(f"y{p.lot}_{p.slot}")
            m.add(n[key] <= qty[p.lot] * y[key])
            m.add(n[key] >= y[key])
        by_slot.setdefault(p.slot, []).append(p)
        by_lot.setdefault(p.lot, []).append(key)
    for lot, keys in by_lot.items():
        m.add(sum(n[k] if k in n else fixed_n[k] for k in keys) == qty[lot])
    # current machine ticks of each slot, to hint the model
    hint_machine = []
    for k, sl in enumerate(slots):
        ps = by_slot.get(k, [])
        if sl.fixed_machine_t is not None:
            hint_machine.append(sl.fixed_machine_t)
            continue
        used = [p for p in ps if hint_counts.get((p.lot, p.slot), 0)]
        secs = sum(p.add_s * hint_counts[(p.lot, p.slot)] for p in used) + max((p.per_s for p in used), default=0)
        hint_machine.append(-(-secs // TICK_S))
    tasks = [PlateTask(printers=sl.printers, machine_t=hint_machine[k], clear_t=sl.clear_t, orders=())
             for k, sl in enumerate(slots)]
    hint_times = list_schedule_ticks(tasks, hint_printer, hint_order, ready, windows)

    start, free, used, lits, machine = [], [], [], [], []
    by_printer: dict[int, list] = {}
    for k, sl in enumerate(slots):
        ps = by_slot.get(k, [])
        u = m.new_bool_var(f"u{k}")
        if sl.fixed_machine_t is not None:
            m.add(u == 1)
            mk = m.new_constant(sl.fixed_machine_t)
        else:
            for p in ps:
                m.add_implication(y[(p.lot, p.slot)], u)
            m.add_bool_or([y[(p.lot, p.slot)] for p in ps] + [u.Not()])
            unit = {p.lot: math.ceil(p.hint * _UNIT - 1e-9) for p in ps}
            cap = max(int(sl.cap * _UNIT),
                      sum(unit[p.lot] * hint_counts.get((p.lot, p.slot), 0) for p in ps))
            m.add(sum(unit[p.lot] * n[(p.lot, p.slot)] for p in ps) <= cap)
            per = m.new_int_var(0, max((p.per_s for p in ps), default=0), f"per{k}")
            for p in ps:
                m.add(per >= p.per_s).only_enforce_if(y[(p.lot, p.slot)])
            m.add_hint(per, max((p.per_s for p in ps if hint_counts.get((p.lot, p.slot), 0)), default=0))
            mk = m.new_int_var(0, horizon, f"m{k}")
            m.add(TICK_S * mk >= sum(p.add_s * n[(p.lot, p.slot)] for p in ps) + per)
        lo = min(ready[i] for i in sl.printers)
        s = m.new_int_var_from_domain(_domain(windows, 0, lo, horizon), f"s{k}")
        c = m.new_int_var_from_domain(_domain(windows, sl.clear_t, lo, horizon), f"c{k}")
        f = m.new_int_var(lo, horizon, f"f{k}")
        size = m.new_int_var(0, horizon, f"z{k}")
        m.add(c >= s + mk)
        m.add(f == c + sl.clear_t)
        m.add(size == f - s)
        row = printer_choice(m, k, s, size, f, sl.printers, ready, by_printer)
        m.add(sum(row.values()) == u)
        start.append(s)
        free.append(f)
        used.append(u)
        lits.append(row)
        machine.append(mk)
        hs, _, hf = hint_times[k]
        m.add_hint(s, hs)
        m.add_hint(c, hf - sl.clear_t)
        m.add_hint(f, hf)
        m.add_hint(size, hf - hs)
        m.add_hint(u, 1)
        for i, x in row.items():
            m.add_hint(x, i == hint_printer[k])
        if sl.fixed_machine_t is None:
            m.add_hint(mk, hint_machine[k])
    for (lot, k), v in n.items():
        if slots[k].fixed_machine_t is None:
            m.add_hint(v, hint_counts.get((lot, k), 0))
            m.add_hint(y[(lot, k)], 1 if hint_counts.get((lot, k), 0) else 0)
    for ivs in by_printer.values():
        m.add_no_overlap(ivs)
    late = [m.new_int_var(0, max(0, horizon - due[o]), f"late{o}") for o in range(len(due))]
    for (lot, k), yv in y.items():
        m.add(late[lot_order[lot]] >= free[k] - due[lot_order[lot]]).only_enforce_if(yv)
    for (lot, k) in fixed_n:
        m.add(late[lot_order[lot]] >= free[k] - due[lot_order[lot]])
    makespan = m.new_int_var(0, horizon, "makespan")
    for k in range(len(slots)):
        m.add(makespan >= free[k]).only_enforce_if(used[k])
    # complete the hint: lateness and finish of the hint plan
    hint_late = [0] * len(due)
    for (lot, k), v in list(hint_counts.items()):
        if v:
            o = lot_order[lot]
            hint_late[o] = max(hint_late[o], hint_times[k][2] - due[o])
    for o, v in enumerate(late):
        m.add_hint(v, hint_late[o])
    m.add_hint(makespan, max((h[2] for h in hint_times), default=0))
    lateness = sum(w * v for w, v in zip(weight, late))
    plates = sum(used)

    best, status, deterministic = None, "feasible", True
    det = 0.0
    share = (0.45, 0.3, 0.25)
    for stage, objective in enumerate((lateness, makespan, plates)):
        if stage == 1:
            m.add(lateness <= int(round(best.objective_value)))
        if stage == 2:
            m.add(makespan <= int(round(best.objective_value)))
        if best is not None:
            m.clear_hints()
            for v in start + free + used + late + [makespan] + list(n.values()) + list(y.values()):
                m.add_hint(v, best.value(v))
            for k, mk in enumerate(machine):
                if slots[k].fixed_machine_t is None:
                    m.add_hint(mk, best.value(mk))
            for row in lits:
                for x in row.values():
                    m.add_hint(x, best.value(x))
        m.minimize(objective)
        limit = settings.time_limit_s * share[stage]
        solver = _solver(limit, settings.deterministic_limit * share[stage], settings)
        code = solver.solve(m)
        det += solver.deterministic_time
        if code == cp_model.MODEL_INVALID:
            raise PackerError("the plate contents model is invalid")
        if code == cp_model.INFEASIBLE:
            if best is None:
                raise PackerError("the plate contents model is infeasible although its hint is a plan")
            break
        deterministic &= solver.wall_time < limit * 0.98
        if code == cp_model.UNKNOWN:
            break
        best = solver
        status = "optimal" if code == cp_model.OPTIMAL else "feasible"
    if best is None:
        return None
    counts = {key: int(best.value(v)) for key, v in n.items() if best.value(v)}
    counts.update(fixed_n)
    printer = tuple(next((i for i, x in lits[k].items() if best.value(x)), -1) for k in range(len(slots)))
    return ContentsAnswer(counts=counts, printer=printer,
                          start=tuple(int(best.value(s)) for s in start),
                          used=tuple(bool(best.value(u)) for u in used),
                          lateness=int(best.value(lateness)), makespan=int(best.value(makespan)),
                          plates=int(best.value(plates)), status=status,
                          deterministic=deterministic, wall_s=_time.monotonic() - t0, det_s=det)
