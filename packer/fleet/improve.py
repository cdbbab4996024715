"""Improving a built plan with CP-SAT: sequencing fixed plates and moving copies between plates.

Methods mixed into the planner's context (:class:`packer.fleet.builder.Builder`).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace as dc_replace
from datetime import timedelta

from packer.errors import PackerError
from packer.fleet.calendar import next_open, printer_free_after
from packer.fleet.contents import LotPair, Slot, solve_contents
from packer.fleet.records import PlannedPlate, copy_key
from packer.fleet.schedule import TICK_S, ScheduleSettings
from packer.fleet.scoring import score_plan
from packer.fleet.timing import order_ticks, sequence_plates, tick_time, tick_windows, ticks, ticks_up
from packer.fleet.timemodel import plate_time

__all__ = ["Improver"]


#: Work-clock seconds charged per unit of CP-SAT deterministic time. Its wall time per
#: unit was 1.5-5 s on the two-core development machine (model loading and presolve
#: count little in deterministic time), so the work clock follows the wall clock there.
CPSAT_WALL_PER_DET = 2.5


def _wall_net(limit_s: float, det_limit: float) -> float:
    """Wall-clock limit of a CP-SAT solve: a safety net far above its deterministic limit.

    The solve stops on its deterministic time; the wall clock only stops it on a
    machine many times slower than the one the efforts were set on.
    """
    return max(limit_s, 12.0 * det_limit + 2.0)


class Improver:
    """CP-SAT steps of the planner (needs the attributes of :class:`Builder`)."""

    def _solver_settings(self, budget_s: float, det_limit: float, seed: int) -> ScheduleSettings:
        """CP-SAT settings for a solve that may use ``budget_s`` work-clock seconds and at
        most ``det_limit`` deterministic units; the wall clock is only a far safety net."""
        det = min(det_limit, budget_s / CPSAT_WALL_PER_DET)
        return ScheduleSettings(time_limit_s=_wall_net(budget_s, det), deterministic_limit=det,
                                workers=self.settings.workers, seed=seed, log=self.settings.log)

    def _charge_solve(self, ans, solver: ScheduleSettings) -> None:
        """Charge a solve's deterministic time (its whole limit when it gave no answer)."""
        used = ans.det_s if ans is not None else solver.deterministic_limit
        self.clock.charge(CPSAT_WALL_PER_DET * used)

    def _slot_printers(self, p: PlannedPlate) -> tuple[int, ...]:
        prof = self.printers[self._index[p.printer]].profile.name
        return tuple(j for j, q in enumerate(self.printers)
                     if q.profile.name == prof and p.material in q.materials)

    def sequence(self, plates, budget_s, seed, det_limit):
        origin = self.start
        idx = {p.name: i for i, p in enumerate(self.printers)}
        ways = [[(j, p.time.machine_s) for j in self._slot_printers(p)] for p in plates]
        extra_s = TICK_S * sum(ticks_up(p.time.machine_s) + ticks_up(p.time.clear_s) for p in plates)
        hint_printer = [idx[p.printer] for p in plates]
        hint_order = sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer))
        solver = self._solver_settings(budget_s, det_limit, seed)
        ans = sequence_plates(plates, ways, [p.time.clear_s for p in plates], ready=self.ready, calendar=self.cal,
                              origin=origin, last=max(p.free for p in plates), extra_s=extra_s,
                              hint_printer=hint_printer, hint_order=hint_order, settings=solver)
        self._charge_solve(ans, solver)
        if ans is None:
            return None, {"status": "no answer in time"}
        # re-time in real seconds, keeping the solver's printer and order (left shift)
        free_at = list(self.ready)
        out = [None] * len(plates)
        for j in sorted(range(len(plates)), key=lambda j: (ans.start[j], ans.printer[j])):
            i = ans.printer[j]
            p = plates[j]
            begin = next_open(self.cal, free_at[i])
            end = begin + timedelta(seconds=p.time.machine_s)
            free = printer_free_after(self.cal, end, p.time.clear_s)
            if free > tick_time(ans.start[j] + ticks_up(p.time.machine_s), origin) + timedelta(days=7):
                raise PackerError("re-timed plate ends far after the model's time: a bug")
            free_at[i] = free
            out[j] = dc_replace(p, printer=self.printers[i].name, start=begin, end=end, free=free)
        out = self.retime(out)          # the same order with the material changes and post-processing
        return out, {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
                     "model_finish_h": ans.makespan * TICK_S / 3600, "deterministic": ans.deterministic,
                     "wall_s": ans.wall_s, "det_s": round(ans.det_s, 2), "plates": len(plates)}

    # -- moving copies between plates (CP-SAT) ------------------------------------------------------
    def contents(self, plates, pool, eligible, budget_s, seed, hard_deadline, det_limit):
        """Let CP-SAT move copies between filament and resin plates, then confirm with ``fits``.

        Lots are the copies of one order line. Plates keep their profile and material; powder
        builds stay as they are. Every changed plate is confirmed by ``fits`` (the longest
        fitting prefix, most urgent first); copies that do not fit go on new plates by list
        scheduling after the others. Returns (plates or None, statistics).
        """
        t0 = self.clock.now()
        volume = [self.layouts.traits(self.printers[self._index[p.printer]]).packs_volume for p in plates]
        lot_of: dict = {}
        lots: list = []
        for p in plates:
            for c in p.copies:
                key = (c.order, c.part, c.kind, c.material, c.due, c.priority, c.boost)
                if key not in lot_of:
                    lot_of[key] = len(lots)
                    lots.append([])
                lots[lot_of[key]].append(c)
        for cs in lots:
            cs.sort(key=lambda c: c.copy)
        lot_idx = {copy_key(c): lot_of[(c.order, c.part, c.kind, c.material, c.due, c.priority, c.boost)]
                   for p in plates for c in p.copies}
        oidx, due, weight = order_ticks(plates, self.start)
        lot_order = [oidx[cs[0].order] for cs in lots]
        counts: dict = {}
        for k, p in enumerate(plates):
            for c in p.copies:
                key = (lot_idx[copy_key(c)], k)
                counts[key] = counts.get(key, 0) + 1
        slots = []
        for k, p in enumerate(plates):
            printers = self._slot_printers(p)
            fixed = volume[k]         # a build's contents stay as packed
            prof = self.printers[self._index[p.printer]].profile.name
            load = self._fill_of(p)
            slots.append(Slot(printers=printers, clear_t=ticks_up(p.time.clear_s),
                              cap=max(load, self.target.get(prof, self.settings.fill_target)),
                              fixed_machine_t=ticks_up(p.time.machine_s) if fixed else None))
        # candidate slots per lot: where it is, plus the nearest slots of its kind
        kind = [(self.printers[self._index[p.printer]].profile.name, p.material) for p in plates]
        pairs = []
        for l, cs in enumerate(lots):
            here = sorted({k for (ll, k) in counts if ll == l})
            if any(slots[k].fixed_machine_t is not None for k in here):
                cand = here
            else:
                c = cs[0]
                ok_printers = set(eligible[copy_key(c)])
                others = [k for k in range(len(plates)) if slots[k].fixed_machine_t is None
                          and kind[k][1] == c.material and k not in here
                          and any(i in ok_printers for i in slots[k].printers)]
                t_here = [plates[k].start for k in here]
                others.sort(key=lambda k: (min(abs((plates[k].start - t).total_seconds()) for t in t_here), k))
                cand = sorted(here + others[:self.settings.contents_neighbours])
            for k in cand:
                i = slots[k].printers[0]
                a, q = self._parts(i, cs[0])
                pairs.append(LotPair(lot=l, slot=k, hint=self.hint1(i, cs[0]),
                                     add_s=math.ceil(a - 1e-9), per_s=math.ceil(q - 1e-9)))
        windows = tick_windows(self.cal, self.start, max(p.free for p in plates),
                               TICK_S * sum(math.ceil(p.time.machine_s / TICK_S) + 3600 // TICK_S for p in plates))
        ready = [ticks(r, self.start, up=True) for r in self.ready]
        hint_printer = [self._index[p.printer] for p in plates]
        hint_order = sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer))
        stats = {"lots": len(lots), "slots": len(slots), "pairs": len(pairs), "rounds": []}
        best, best_score = None, score_plan(plates, self.start)
        for _ in range(self.settings.contents_rounds):
            left = hard_deadline - self.clock.now()
            limit = min(budget_s - (self.clock.now() - t0), left) * 0.6
            if limit < 0.5:
                stats["rounds"].append("out of time")
                self.cuts.append("contents rounds cut short")
                break
            solver = self._solver_settings(limit, det_limit, seed)
            ans = solve_contents(slots, pairs, qty=[len(cs) for cs in lots], lot_order=lot_order,
                                 hint_counts=counts, hint_printer=hint_printer, hint_order=hint_order,
                                 ready=ready, windows=windows, due=due, weight=weight, settings=solver)
            self._charge_solve(ans, solver)
            if ans is None:
                stats["rounds"].append("no answer in time")
                break
            lat, fin, n_plates = score_plan(plates, self.start)
            promise = (ans.lateness * TICK_S < lat - 1, ans.lateness * TICK_S <= lat + 1
                       and ans.makespan * TICK_S < fin - TICK_S,
                       ans.lateness * TICK_S <= lat + 1 and ans.makespan * TICK_S <= fin + TICK_S
                       and ans.plates < n_plates)
            if not any(promise):
                stats["rounds"].append({"status": ans.status, "note": "no better plan proposed",
                                        "wall_s": round(ans.wall_s, 2), "deterministic": ans.deterministic})
                break
            out, failed, info = self._realise(plates, lots, ans, eligible, hard_deadline)
            stats["rounds"].append(info)
            if out is not None and score_plan(out, self.start) < best_score:
                best, best_score = out, score_plan(out, self.start)
            if not failed:
                break
            # overflow goes back: the slots that did not nest get the capacity they reached
            # (never below their current verified contents, so the current plan stays a hint)
            slots = [dc_replace(sl, cap=max(self._fill_of(plates[k]), failed[k])) if k in failed else sl
                     for k, sl in enumerate(slots)]
        stats["status"] = "improved" if best is not None else "no better plan"
        return best, stats

    def _realise(self, plates, lots, ans, eligible, hard_deadline):
        """Turn a contents answer into confirmed plates; returns (plates or None, failed caps, info)."""
        info = {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
                "model_finish_h": ans.makespan * TICK_S / 3600, "model_plates": ans.plates,
                "deterministic": ans.deterministic, "wall_s": round(ans.wall_s, 2)}
        new_copies: dict = {k: [] for k in range(len(plates))}
        taken = [0] * len(lots)
        for (l, k) in sorted(ans.counts, key=lambda lk: (ans.start[lk[1]], lk[1], lk[0])):
            v = ans.counts[(l, k)]
            new_copies[k].extend(lots[l][taken[l]:taken[l] + v])
            taken[l] += v
        changed = [k for k in range(len(plates)) if ans.used[k]
                   and {copy_key(c) for c in new_copies[k]} != {copy_key(c) for c in plates[k].copies}]
        avg_fit = self.clock.now() / max(1, self.fits_calls)     # work-clock seconds per call, at most
        if self.past(hard_deadline - 2 * avg_fit * len(changed), "contents not confirmed"):
            info["status"] += ", no time to confirm the plates"
            return None, {}, info
        out, leftovers, failed = [], [], {}
        for k in range(len(plates)):
            if not ans.used[k]:
                continue
            i = ans.printer[k]
            p = plates[k]
            if k in changed:
                cs = sorted(new_copies[k], key=lambda c: self._key(c, True))
                ok, layout = self._confirm(i, cs)
                if len(ok) < len(cs):
                    leftovers += cs[len(ok):]
                    failed[k] = sum(self.hint1(i, c) for c in ok)
                if not ok:
                    continue
                p = self._merged_on(i, p, ok, layout)
            else:
                p = dc_replace(p, printer=self.printers[i].name)
            out.append(dc_replace(p, start=tick_time(ans.start[k], self.start)))
        info["changed_plates"] = len(changed)
        info["overflow_copies"] = len(leftovers)
        out = self.retime(out)
        if leftovers:
            free_from = list(self.ready)
            for p in out:
                i = self._index[p.printer]
                free_from[i] = max(free_from[i], p.free)
            extra = self.build(leftovers, eligible, banded=True, mode="due", free_from=free_from)
            if extra.unplaced:
                info["status"] += ", overflow could not be placed"
                return None, failed, info
            # ids not used by any plate yet (the count can repeat an id after merges)
            taken = {p.id for p in plates} | {p.id for p in out}
            fresh = (f"G{n}" for n in itertools.count(len(plates)) if f"G{n}" not in taken)
            out += [dc_replace(p, id=next(fresh)) for p in extra.plates]
        return out, failed, info

    def _confirm(self, i, copies):
        """The longest prefix of ``copies`` that ``fits`` lays out on printer ``i`` (bisection)."""
        p = self.printers[i]
        n = len(copies)
        layout = self.timed_fits(p, copies)
        if layout is not None:
            return copies, layout
        ok_n, ok_layout, fail_n = 0, None, n
        for _ in range(self.settings.max_fit_tries - 1):
            if fail_n - ok_n <= 1:
                break
            probe = (ok_n + fail_n) // 2
            lay = self.timed_fits(p, copies[:probe])
            if lay is not None:
                ok_n, ok_layout = probe, lay
            else:
                fail_n = probe
        return copies[:ok_n], ok_layout

    def _merged_on(self, i: int, p: PlannedPlate, copies, layout) -> PlannedPlate:
        prof = self.printers[i].profile
        est = plate_time(prof, [self.stats[c.kind] for c in copies], build_height_mm=layout.build_height_mm)
        return dc_replace(p, printer=self.printers[i].name, copies=tuple(copies), layout=layout,
                          time=est, material=copies[0].material)

    # -- bounds ----------------------------------------------------------------------------------
