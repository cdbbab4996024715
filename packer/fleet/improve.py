"""Improving a built plan with CP-SAT: sequencing fixed plates and moving copies between plates.

:func:`sequence_fixed` chooses printers and starts of plates whose contents stay
(:mod:`packer.fleet.schedule`); :func:`move_copies` lets copies of one order line move
between filament and resin plates (:mod:`packer.fleet.contents`) and confirms every
changed plate with a layout.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace as dc_replace
from datetime import timedelta

from packer.errors import PackerError
from packer.fleet.budget import Budget
from packer.fleet.builder import build_plates, sort_key
from packer.fleet.calendar import next_open, printer_free_after
from packer.fleet.contents import LotPair, Slot, solve_contents
from packer.fleet.records import PlannedPlate, copy_key
from packer.fleet.schedule import TICK_S
from packer.fleet.scoring import score_plan
from packer.fleet.timemodel import plate_time
from packer.fleet.timing import order_ticks, sequence_plates, tick_time, tick_windows, ticks, ticks_up
from packer.fleet.view import FleetView

__all__ = ["sequence_fixed", "move_copies"]


def sequence_fixed(view: FleetView, budget: Budget, plates, budget_s: float, seed: int, det_limit: float):
    """Printers (same profile, material set up) and starts of ``plates`` by CP-SAT, contents fixed,
    re-timed in real seconds in the solver's order; (plates or None, statistics)."""
    origin = view.start
    ways = [[(j, p.time.machine_s) for j in view.same_kind_printers(p)] for p in plates]
    extra_s = TICK_S * sum(ticks_up(p.time.machine_s) + ticks_up(p.time.clear_s) for p in plates)
    hint_printer = [view.index[p.printer] for p in plates]
    hint_order = sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer))
    solver = budget.solver_settings(budget_s, det_limit, seed)
    ans = sequence_plates(plates, ways, [p.time.clear_s for p in plates], ready=view.ready, calendar=view.cal,
                          origin=origin, last=max(p.free for p in plates), extra_s=extra_s,
                          hint_printer=hint_printer, hint_order=hint_order, settings=solver)
    budget.charge_solve(ans, solver)
    if ans is None:
        return None, {"status": "no answer in time"}
    # re-time in real seconds, keeping the solver's printer and order (left shift)
    free_at = list(view.ready)
    out = [None] * len(plates)
    for j in sorted(range(len(plates)), key=lambda j: (ans.start[j], ans.printer[j])):
        i = ans.printer[j]
        p = plates[j]
        begin = next_open(view.cal, free_at[i])
        end = begin + timedelta(seconds=p.time.machine_s)
        free = printer_free_after(view.cal, end, p.time.clear_s)
        if free > tick_time(ans.start[j] + ticks_up(p.time.machine_s), origin) + timedelta(days=7):
            raise PackerError("re-timed plate ends far after the model's time: a bug")
        free_at[i] = free
        out[j] = dc_replace(p, printer=view.printers[i].name, start=begin, end=end, free=free)
    out = view.retime(out)          # the same order with the material changes and post-processing
    return out, {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
                 "model_finish_h": ans.makespan * TICK_S / 3600, "deterministic": ans.deterministic,
                 "wall_s": ans.wall_s, "det_s": round(ans.det_s, 2), "plates": len(plates)}


def _lots(plates) -> tuple[list, dict]:
    """Copies grouped by order line (lots, each sorted by copy number) and copy key -> lot."""
    def line(c):
        return (c.order, c.part, c.kind, c.material, c.due, c.priority, c.boost)
    lot_of: dict = {}
    lots: list = []
    for p in plates:
        for c in p.copies:
            if line(c) not in lot_of:
                lot_of[line(c)] = len(lots)
                lots.append([])
            lots[lot_of[line(c)]].append(c)
    for cs in lots:
        cs.sort(key=lambda c: c.copy)
    return lots, {copy_key(c): lot_of[line(c)] for p in plates for c in p.copies}


def _slots(view: FleetView, plates) -> list[Slot]:
    """A slot per plate: its printers, clearing, capacity (the larger of its current fill and
    the fill its profile reached); builds packed in a volume (powder) keep their contents and
    machine time."""
    slots = []
    for p in plates:
        prof = view.printer_of(p).profile
        slots.append(Slot(printers=view.same_kind_printers(p), clear_t=ticks_up(p.time.clear_s),
                          cap=max(view.fill_of(p), view.target.get(prof.name, view.settings.fill_target)),
                          fixed_machine_t=ticks_up(p.time.machine_s)
                          if view.traits(view.index[p.printer]).packs_volume else None))
    return slots


def _pairs(view: FleetView, plates, lots, counts: dict, slots) -> list[LotPair]:
    """Where each lot may go: where it is, plus the ``contents_neighbours`` slots of its
    material nearest in start time on printers it may use (not for lots on fixed slots)."""
    pairs = []
    for lot, cs in enumerate(lots):
        here = sorted({k for (ll, k) in counts if ll == lot})
        if any(slots[k].fixed_machine_t is not None for k in here):
            cand = here
        else:
            c = cs[0]
            ok_printers = set(view.eligible[copy_key(c)])
            others = [k for k in range(len(plates)) if slots[k].fixed_machine_t is None
                      and plates[k].material == c.material and k not in here
                      and any(i in ok_printers for i in slots[k].printers)]
            t_here = [plates[k].start for k in here]
            others.sort(key=lambda k: (min(abs((plates[k].start - t).total_seconds()) for t in t_here), k))
            cand = sorted(here + others[:view.settings.contents_neighbours])
        for k in cand:
            i = slots[k].printers[0]
            a, q = view.parts(i, cs[0])
            pairs.append(LotPair(lot=lot, slot=k, hint=view.hint1(i, cs[0]),
                                 add_s=math.ceil(a - 1e-9), per_s=math.ceil(q - 1e-9)))
    return pairs


def _promises(ans, plates, origin) -> bool:
    """True when the model's answer promises less lateness, or as little and an earlier finish,
    or neither worse and fewer plates."""
    lat, fin, n_plates = score_plan(plates, origin)
    return any((ans.lateness * TICK_S < lat - 1,
                ans.lateness * TICK_S <= lat + 1 and ans.makespan * TICK_S < fin - TICK_S,
                ans.lateness * TICK_S <= lat + 1 and ans.makespan * TICK_S <= fin + TICK_S
                and ans.plates < n_plates))


def move_copies(view: FleetView, budget: Budget, plates, budget_s: float, seed: int, hard_deadline: float,
                det_limit: float):
    """Let CP-SAT move copies between filament and resin plates, then confirm with layouts.

    Lots are the copies of one order line. Plates keep their profile and material; powder
    builds stay as they are. Every changed plate is confirmed by a layout (the longest
    fitting prefix, most urgent first); copies that do not fit go on new plates by list
    scheduling after the others. Up to ``contents_rounds`` rounds: the slots that did not
    nest get the capacity they reached. Returns (plates or None, statistics).
    """
    t0 = budget.clock.now()
    lots, lot_idx = _lots(plates)
    oidx, due, weight = order_ticks(plates, view.start)
    counts: dict = {}
    for k, p in enumerate(plates):
        for c in p.copies:
            counts[(lot_idx[copy_key(c)], k)] = counts.get((lot_idx[copy_key(c)], k), 0) + 1
    slots = _slots(view, plates)
    pairs = _pairs(view, plates, lots, counts, slots)
    model = dict(qty=[len(cs) for cs in lots], lot_order=[oidx[cs[0].order] for cs in lots], hint_counts=counts,
                 hint_printer=[view.index[p.printer] for p in plates],
                 hint_order=sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer)),
                 ready=[ticks(r, view.start, up=True) for r in view.ready], due=due, weight=weight,
                 windows=tick_windows(view.cal, view.start, max(p.free for p in plates),
                                      TICK_S * sum(math.ceil(p.time.machine_s / TICK_S) + 3600 // TICK_S
                                                   for p in plates)))
    stats = {"lots": len(lots), "slots": len(slots), "pairs": len(pairs), "rounds": []}
    best, best_score = None, score_plan(plates, view.start)
    for _ in range(view.settings.contents_rounds):
        limit = min(budget_s - (budget.clock.now() - t0), hard_deadline - budget.clock.now()) * 0.6
        if limit < 0.5:
            stats["rounds"].append("out of time")
            budget.cuts.append("contents rounds cut short")
            break
        solver = budget.solver_settings(limit, det_limit, seed)
        ans = solve_contents(slots, pairs, settings=solver, **model)
        budget.charge_solve(ans, solver)
        if ans is None:
            stats["rounds"].append("no answer in time")
            break
        if not _promises(ans, plates, view.start):
            stats["rounds"].append({"status": ans.status, "note": "no better plan proposed",
                                    "wall_s": round(ans.wall_s, 2), "deterministic": ans.deterministic})
            break
        out, failed, info = _realise(view, budget, plates, lots, ans, hard_deadline)
        stats["rounds"].append(info)
        if out is not None and score_plan(out, view.start) < best_score:
            best, best_score = out, score_plan(out, view.start)
        if not failed:
            break
        # overflow goes back: the slots that did not nest get the capacity they reached
        # (never below their current verified contents, so the current plan stays a hint)
        slots = [dc_replace(sl, cap=max(view.fill_of(plates[k]), failed[k])) if k in failed else sl
                 for k, sl in enumerate(slots)]
    stats["status"] = "improved" if best is not None else "no better plan"
    return best, stats


def _realise(view: FleetView, budget: Budget, plates, lots, ans, hard_deadline: float):
    """Turn a contents answer into confirmed plates; returns (plates or None, failed caps, info)."""
    info = {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
            "model_finish_h": ans.makespan * TICK_S / 3600, "model_plates": ans.plates,
            "deterministic": ans.deterministic, "wall_s": round(ans.wall_s, 2)}
    new_copies: dict = {k: [] for k in range(len(plates))}
    taken = [0] * len(lots)
    for (lot, k) in sorted(ans.counts, key=lambda lk: (ans.start[lk[1]], lk[1], lk[0])):
        v = ans.counts[(lot, k)]
        new_copies[k].extend(lots[lot][taken[lot]:taken[lot] + v])
        taken[lot] += v
    changed = [k for k in range(len(plates)) if ans.used[k]
               and {copy_key(c) for c in new_copies[k]} != {copy_key(c) for c in plates[k].copies}]
    avg_fit = budget.clock.now() / max(1, budget.fits_calls)     # work-clock seconds per call, at most
    if budget.past(hard_deadline - 2 * avg_fit * len(changed), "contents not confirmed"):
        info["status"] += ", no time to confirm the plates"
        return None, {}, info
    out, leftovers, failed = [], [], {}
    for k in range(len(plates)):
        if not ans.used[k]:
            continue
        i = ans.printer[k]
        p = plates[k]
        if k in changed:
            cs = sorted(new_copies[k], key=lambda c: sort_key(view, c, True))
            ok, layout = _confirm_prefix(view, budget, i, cs)
            if len(ok) < len(cs):
                leftovers += cs[len(ok):]
                failed[k] = sum(view.hint1(i, c) for c in ok)
            if not ok:
                continue
            p = _merged_on(view, i, p, ok, layout)
        else:
            p = dc_replace(p, printer=view.printers[i].name)
        out.append(dc_replace(p, start=tick_time(ans.start[k], view.start)))
    info["changed_plates"] = len(changed)
    info["overflow_copies"] = len(leftovers)
    out = view.retime(out)
    if leftovers:
        extra = _overflow(view, budget, plates, out, leftovers)
        if extra is None:
            info["status"] += ", overflow could not be placed"
            return None, failed, info
        out += extra
    return out, failed, info


def _overflow(view: FleetView, budget: Budget, plates, out, leftovers):
    """New plates for the copies that did not nest, after the plates ``out`` on each printer,
    with ids no plate uses yet (the count can repeat an id after merges); None when some
    copy found no plate."""
    free_from = list(view.ready)
    for p in out:
        i = view.index[p.printer]
        free_from[i] = max(free_from[i], p.free)
    extra = build_plates(view, budget, leftovers, banded=True, mode="due", free_from=free_from)
    if extra.unplaced:
        return None
    taken = {p.id for p in plates} | {p.id for p in out}
    fresh = (f"G{n}" for n in itertools.count(len(plates)) if f"G{n}" not in taken)
    return [dc_replace(p, id=next(fresh)) for p in extra.plates]


def _confirm_prefix(view: FleetView, budget: Budget, i: int, copies):
    """The longest prefix of ``copies`` that a layout takes on printer ``i`` (bisection)."""
    p = view.printers[i]
    n = len(copies)
    layout = budget.timed_fits(p, copies)
    if layout is not None:
        return copies, layout
    ok_n, ok_layout, fail_n = 0, None, n
    for _ in range(view.settings.max_fit_tries - 1):
        if fail_n - ok_n <= 1:
            break
        probe = (ok_n + fail_n) // 2
        lay = budget.timed_fits(p, copies[:probe])
        if lay is not None:
            ok_n, ok_layout = probe, lay
        else:
            fail_n = probe
    return copies[:ok_n], ok_layout


def _merged_on(view: FleetView, i: int, p: PlannedPlate, copies, layout) -> PlannedPlate:
    prof = view.printers[i].profile
    est = plate_time(prof, [view.stats[c.kind] for c in copies], build_height_mm=layout.build_height_mm)
    return dc_replace(p, printer=view.printers[i].name, copies=tuple(copies), layout=layout,
                      time=est, material=copies[0].material)
