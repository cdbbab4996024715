"""Building plates: screening, list scheduling, confirmation by layouts, merging.

See :mod:`packer.fleet.planner` for how the steps fit together.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta

from packer.errors import PackerError
from packer.fleet.calendar import next_open, printer_free_after
from packer.fleet.clock import WorkClock
from packer.fleet.records import CopyRef, PlannedPlate, copy_key
from packer.fleet.scoring import copy_weight, score_plan
from packer.fleet.timemodel import PartStats, copy_work_bounds, layers, plate_time
from packer.fleet.timing import retime, start_after

__all__ = ["Builder"]


@dataclass
class _Built:
    plates: list
    unplaced: list



def _height(layout) -> float | None:
    """The build height a layout reports (the time model's input), None before there is one."""
    return None if layout is None else layout.build_height_mm


class Builder:
    """State shared by the steps of one plan (caches, counters) and the plate-building steps:
    screening, list scheduling with confirmation by the layout service, re-timing and merging."""

    def __init__(self, printers, stats, calendar, start, layouts, settings):
        self.printers = printers
        self.stats = stats
        self.cal = calendar
        self.start = start
        self.layouts = layouts          # the layout service (packer.layouts.LayoutService)
        self.settings = settings
        self.fits_calls = 0
        self._hint1: dict = {}
        self.ready = [next_open(calendar, max(start, p.available_from)) for p in printers]
        self.tech_of = {p.name: p.profile.technology for p in printers}
        self.why: dict = {}
        self.target: dict = {}          # per profile: the hint fill fits accepted lately
        self.deadline = math.inf        # work-clock time after which plates get fewer fits calls
        self.fits_s = 0.0               # wall seconds in fits (statistics only)
        self.clock = WorkClock()        # planning time by work done: every budget decision reads it
        self.cuts: list[str] = []       # budget decisions that shortened a step
        self.eligible: dict | None = None   # copy key -> printer indices, set by screen()
        self._index = {p.name: i for i, p in enumerate(printers)}
        self._split: dict = {}
        self.fit_allowance: float | None = None   # s per fits call, fixed by the budget
        self.hard_end = math.inf                   # work-clock time of the whole budget

    # -- screening ---------------------------------------------------------------------------
    def screen(self, copies):
        cache: dict = {}
        eligible: dict = {}
        unplaced: list = []
        for c in copies:
            ok, reasons = [], []
            for i, p in enumerate(self.printers):
                key = (p.name, c.kind, c.material)
                if key not in cache:
                    r = None if c.material in p.materials else f"{p.name} does not run {c.material}"
                    cache[key] = r or self.layouts.can_print(p, c)
                r = cache[key]
                (reasons if r else ok).append(r or i)
            eligible[copy_key(c)] = ok
            if not ok:
                unplaced.append((c, "; ".join(sorted(set(reasons))) or "no printer"))
        self.eligible = eligible
        return eligible, unplaced

    def hint1(self, i: int, c: CopyRef) -> float:
        key = (self.printers[i].profile.name, c.kind)
        if key not in self._hint1:
            self._hint1[key] = float(self.layouts.capacity(self.printers[i], [c]))
        return self._hint1[key]

    # -- plates by list scheduling -------------------------------------------------------------
    def _bucket(self, c: CopyRef) -> int:
        """The copy's due half-day (``due_bucket_h``), one earlier for a boosted copy."""
        bucket_s = self.settings.due_bucket_h * 3600
        return math.floor((c.due - self.start).total_seconds() / bucket_s) - (1 if c.boost > 0 else 0)

    def start_after(self, i: int, free: datetime, last: str | None, material: str) -> tuple[datetime, float]:
        """(start, change s) of a plate of ``material`` on printer ``i`` free from ``free``
        (:func:`packer.fleet.timing.start_after`)."""
        return start_after(self.printers[i].profile, self.cal, free, last, material)

    def _key(self, c: CopyRef, banded: bool):
        bucket_s = self.settings.due_bucket_h * 3600
        bucket = math.floor((c.due - self.start).total_seconds() / bucket_s)
        h = -round(self.stats[c.kind].height_mm, 1) if banded else 0.0
        return (bucket - (1 if c.boost > 0 else 0), h, -copy_weight(c), c.due, c.order, c.part, c.copy)

    def build(self, pool, eligible, *, banded: bool, mode: str, confirm: bool = True,
              free_from: Sequence[datetime] | None = None) -> _Built:
        remaining = sorted(pool, key=lambda c: self._key(c, banded))
        allowed = {copy_key(c): set(eligible[copy_key(c)]) for c in remaining}
        free_at = list(free_from or self.ready)
        last: dict = {}                 # printer index -> material of its last plate
        plates, unplaced = [], []
        live = set(range(len(self.printers)))
        while remaining:
            live = {i for i in live if any(i in allowed[copy_key(c)] for c in remaining)}
            cands = [(free_at[i], self.printers[i].name, i) for i in sorted(live)]
            if not cands:
                for c in remaining:
                    unplaced.append((c, self.why.get(copy_key(c), "no printer can take it")))
                break
            _, _, i = min(cands)
            chosen, layout = self._fill(i, remaining, allowed, confirm, free_at[i], mode, last.get(i))
            if not chosen:
                continue
            taken = {copy_key(c) for c in chosen}
            remaining = [c for c in remaining if copy_key(c) not in taken]
            job = self._timed(i, chosen, layout, free_at[i], len(plates), last.get(i))
            free_at[i] = job.free
            last[i] = job.material
            plates.append(job)
        return _Built(plates, unplaced)

    def _parts(self, i: int, c: CopyRef) -> tuple[float, float]:
        """(additive, per-plate) machine time of one copy on printer ``i`` (s), cached.

        The machine time of a plate is exactly the sum of the additive terms plus the
        largest per-plate term (see :func:`copy_work_bounds`; for powder with the build height
        taken as the tallest copy).
        """
        prof = self.printers[i].profile
        key = (prof.name, c.kind)
        if key not in self._split:
            add, _, _ = copy_work_bounds(prof, self.stats[c.kind])
            self._split[key] = (add, plate_time(prof, [self.stats[c.kind]]).machine_s - add)
        return self._split[key]

    def _powder_per(self, prof, height: float) -> float:
        """Per-build machine time of a powder build ``height`` mm high (no scan), cached by layer."""
        n = layers(height, prof.time.layer_height_mm)
        key = (prof.name, "layers", n)
        if key not in self._split:
            probe = PartStats(0.0, 0.0, n * prof.time.layer_height_mm, 0.0)
            self._split[key] = plate_time(prof, [probe]).machine_s
        return self._split[key]

    def _fill(self, i, remaining, allowed, confirm, free, mode, last=None):
        """Choose the copies of the next plate of printer ``i``, free from ``free``.

        In the sorted order, a copy of the first copy's material joins while the
        capacity hint allows and, by ``mode`` (see ``FILL_MODES``), the due times allow.
        The first copy is the most urgent one, or the most urgent one of the material
        the printer ran last (``last``) when it is due in the same half-day: a printer
        stays on its material where that costs no urgency, and a change of material
        delays the plate by the profile's ``material_change_s``.
        """
        s = self.settings
        prof = self.printers[i].profile
        clear = prof.time.clear_s
        traits = self.layouts.traits(self.printers[i])
        volume = traits.packs_volume    # a build packed in a volume: its height sets its time
        first = next(c for c in remaining if i in allowed[copy_key(c)])
        if last is not None and first.material != last and prof.material_change_s > 0:
            same = next((c for c in remaining if c.material == last and i in allowed[copy_key(c)]), None)
            if same is not None and self._bucket(same) <= self._bucket(first):
                first = same
        begin, _ = self.start_after(i, free, last, first.material)
        # with a pool fill, the layout engine chooses from more candidates than fit
        pool = confirm and traits.pool_fill
        limit = s.pool_target if pool else s.fill_target
        chosen, load, proj, cum = [], 0.0, [], []
        add_sum, per_max, due_min, tallest = 0.0, 0.0, None, 0.0
        cur_free, due_min_ok = None, None
        for c in remaining:
            if c.material != first.material or i not in allowed[copy_key(c)]:
                continue
            h = self.hint1(i, c)
            if chosen and load + h > limit:
                continue
            a, q = self._parts(i, c)
            per = max(per_max, q)
            if volume:   # the build is at least as high as the parts' volume share of the room
                height = max(tallest, self.stats[c.kind].height_mm, (load + h) * prof.build_volume[2])
                per = max(per, self._powder_per(prof, height))
            end = begin + timedelta(seconds=add_sum + a + per)
            new_free = printer_free_after(self.cal, end, clear)
            d = c.due if due_min is None else min(due_min, c.due)
            if chosen and new_free > cur_free:
                if mode == "strict":
                    blocked = new_free > d
                elif mode == "due":      # protect the copies that are on time so far
                    on_time = [x for x in (due_min_ok, c.due if c.due >= cur_free else None) if x]
                    blocked = bool(on_time) and new_free > min(on_time)
                else:
                    blocked = False
                if blocked:
                    continue
            chosen.append(c)
            proj.append(new_free)
            load += h
            cum.append(load)
            if c.due >= new_free:
                due_min_ok = c.due if due_min_ok is None else min(due_min_ok, c.due)
            if due_min_ok is not None and due_min_ok < new_free:
                due_min_ok = min((x.due for x in chosen if x.due >= new_free), default=None)
            add_sum, per_max, due_min, cur_free = add_sum + a, max(per_max, q), d, new_free
            tallest = max(tallest, self.stats[c.kind].height_mm)
            if load >= limit:
                break
        if not confirm:
            return chosen, None
        p = self.printers[i]
        target = self.target.get(prof.name, min(s.fill_target, s.first_probe_fill))
        if pool:
            # one call: the most urgent copies (up to a share of the fill reached lately) must
            # go on, the engine adds as many of the others as fit
            must = max(1, sum(1 for x in cum if x <= s.must_share * target + 1e-9))
            got = self.timed_fill(p, chosen, must)
            if got is not None:
                layout, keep = got
                if not set(range(must)) <= set(keep):
                    raise PackerError("the pool fill left a required copy off the plate (a layout bug)")
                self.target[prof.name] = min(s.fill_target, sum(self.hint1(i, chosen[k]) for k in keep))
                return [chosen[k] for k in keep], layout
            chosen, cum, proj = chosen[:must], cum[:must], proj[:must]   # bisect on the required part
        late_anyway = mode == "full"

        def fits(k: int):
            """A layout of the first k copies that keeps the fill rule with the layout's time."""
            layout = self.timed_fits(p, chosen[:k])
            if layout is None or late_anyway or not volume:
                return layout     # flat plates: the time does not depend on the layout
            est = plate_time(prof, [self.stats[c.kind] for c in chosen[:k]],
                             build_height_mm=layout.build_height_mm)
            free = printer_free_after(self.cal, begin + timedelta(seconds=est.machine_s), clear)
            ok = free <= max(proj[k - 1], min(c.due for c in chosen[:k])) or k == 1
            if mode == "due":
                ok = ok or all(c.due < proj[k - 1] or c.due >= free for c in chosen[:k])
            return layout if ok else None

        # the longest fitting prefix (copies were added most urgent first): bounded bisection,
        # first probing the fill this profile reached before (learned from earlier plates)
        n = len(chosen)
        first_probe = max(1, sum(1 for x in cum if x <= target + 1e-9))
        ok_n, ok_layout, fail_n, probe = 0, None, n + 1, first_probe
        tries = 2 if self.past(self.deadline, "fewer fits calls per plate") else s.max_fit_tries
        if volume:       # a build packing is costly; a few copies more or less matter little
            tries = min(tries, s.max_powder_tries)
        if tries == 2 and self.past(self.hard_end, "one fits call per plate after the budget"):
            tries = 1     # probe the fill this profile reached; then the last resorts below
        for t in range(tries):
            layout = fits(probe)
            if layout is not None:
                ok_n, ok_layout = probe, layout
            else:
                fail_n = probe
            if fail_n - ok_n <= 1:
                break
            if ok_n == 0 and t == 0 and tries > 2:
                probe = max(1, min(fail_n - 1, math.floor(probe * (1 - s.overflow_share))))
            else:
                probe = (ok_n + fail_n) // 2
        # nothing fitted within the tries: a quarter of the last failed set, then one copy
        # (a plate of one copy is the last resort, not the next step)
        for last in (fail_n // 4, 1):
            if ok_n or not 1 <= last < fail_n:
                continue
            layout = fits(last)
            if layout is not None:
                ok_n, ok_layout = last, layout
            else:
                fail_n = last
        if fail_n <= n:
            # the next plate's first probe: just below the fill that did not nest
            self.target[prof.name] = max(cum[ok_n - 1] if ok_n else 0.0,
                                         cum[fail_n - 1] - 0.01 if ok_n else cum[fail_n - 1] * 0.5)
        elif ok_n:
            self.target[prof.name] = min(s.fill_target, max(target, cum[ok_n - 1]) + 0.02)
        if ok_n:
            return chosen[:ok_n], ok_layout
        # the first copy does not fit alone on this profile: keep it off every printer of it
        prof = p.profile.name
        for j, q in enumerate(self.printers):
            if q.profile.name == prof:
                allowed[copy_key(chosen[0])].discard(j)
        self.why[copy_key(chosen[0])] = f"does not fit on an empty plate of profile {prof}"
        return [], None

    def _timed(self, i, chosen, layout, free_at, k, last=None) -> PlannedPlate:
        p = self.printers[i]
        parts = [self.stats[c.kind] for c in chosen]
        est = plate_time(p.profile, parts, build_height_mm=_height(layout))
        begin, change = self.start_after(i, free_at, last, chosen[0].material)
        end = begin + timedelta(seconds=est.machine_s)
        free = printer_free_after(self.cal, end, est.clear_s)
        return PlannedPlate(id=f"G{k}", printer=p.name, material=chosen[0].material,
                        copies=tuple(chosen), layout=layout, start=begin, end=end, free=free,
                        time=est, change_s=change, post=p.profile.post_processing, cal=self.cal)

    def past(self, deadline: float, what: str) -> bool:
        """True once the work clock passed ``deadline`` (seconds of planning work).

        The clock counts work, not wall time, so the decision is the same on any
        machine; the steps it shortened are recorded in ``cuts``.
        """
        if self.clock.past(deadline):
            if what not in self.cuts:
                self.cuts.append(what)
            return True
        return False

    def timed_fill(self, printer, copies, must: int):
        """Ask the pool fill with the same allowance as a ``fits`` call; (layout, kept) or None."""
        allow = self._allowance()
        got = self._layout_call(lambda: self.layouts.fill(printer, copies, must=must, seconds=allow))
        return None if got.layout is None else (got.layout, list(got.chosen))

    def timed_fits(self, printer, copies):
        """Ask the layout service for a layout of every copy, telling it the seconds it may use.

        The allowance is fixed from the budget before any call; when the work clock
        leaves less than ``fits_reserve_calls`` allowances before the end of the
        budget, it is cut to share what is left (recorded in ``cuts``). Returns the
        layout or None.
        """
        allow = None if self.fit_allowance is None else self._allowance()
        return self._layout_call(lambda: self.layouts.fits(printer, copies, seconds=allow)).layout

    def _allowance(self) -> float:
        """Seconds one layout call may use: fixed by the budget, cut near its end."""
        allow = self.fit_allowance if self.fit_allowance is not None else self.settings.min_fit_s
        left = self.hard_end - self.clock.now()
        reserve = self.settings.fits_reserve_calls
        if left < reserve * allow:
            self.past(-math.inf, "fits allowance cut near the end of the budget")
            # not below half the allowance: a layout given too little time fails and
            # leaves an under-filled plate, which costs more than the seconds saved
            allow = max(self.settings.min_fit_s, 0.5 * allow, left / reserve)
        return allow

    def _layout_call(self, call):
        """Run one layout call (``fits`` or the pool fill): count it, time it, and charge the
        work clock the work the answer reports."""
        t = _time.monotonic()
        self.fits_calls += 1
        got = call()
        self.fits_s += _time.monotonic() - t
        self.clock.charge_layout(got.work_s)
        return got

    # -- merging plates ---------------------------------------------------------------------------
    def _fill_of(self, p: PlannedPlate) -> float:
        i = self._index[p.printer]
        return sum(self.hint1(i, c) for c in p.copies)

    def retime(self, plates):
        """Left-shift every printer's plates in their current order (:func:`packer.fleet.timing.retime`)."""
        return retime(plates, self.printers, self.ready, self.cal)

    def merge(self, plates, deadline: float):
        """Merge pairs of plates (same technology and material) while the plan gets no worse.

        Emptiest plates first; each is tried against three partners: first those whose
        merged plate stays within the fill ``fits`` reached on that profile before (likely
        to nest), fullest first, then the others within ``fill_target``. The merged plate runs on the printer and
        in the place of either partner (so plates of two profiles of one technology can
        merge onto the profile every copy can be printed on), laid out for that printer.
        A merge is kept when the re-timed plan scores better (weighted lateness, finish,
        plates: so never when an order gets later or the day ends later) and ``fits``
        confirms the merged plate. Bounded by the deadline and by one pass over the plates.
        """
        self._index = {p.name: i for i, p in enumerate(self.printers)}
        cur = list(plates)
        if len({p.id for p in cur}) != len(cur):
            raise PackerError("merging needs unique plate ids (a planner bug)")
        best = score_plan(cur, self.start)
        merges = 0
        fill = {p.id: self._fill_of(p) for p in cur}
        eligible = self.eligible

        def fill_on(at: PlannedPlate, copies) -> float | None:
            """Hint fill of ``copies`` on ``at``'s printer, or None when one of them cannot go there."""
            i = self._index[at.printer]
            if eligible is not None and any(i not in eligible[copy_key(c)] for c in copies):
                return None
            return sum(self.hint1(i, c) for c in copies)

        for b_id in [p.id for p in sorted(cur, key=lambda p: (fill[p.id], p.start, p.id))]:
            if self.past(deadline, "merging cut short"):
                break
            b = next((p for p in cur if p.id == b_id), None)
            if b is None:
                continue
            tech = self.tech_of[b.printer]
            options = []
            for a in cur:
                if a.id == b.id or a.material != b.material or self.tech_of[a.printer] != tech:
                    continue
                first, second = sorted((a, b), key=lambda p: (p.start, p.id))
                copies = tuple(first.copies) + tuple(second.copies)
                fills = [(f, at) for at in (a, b) if (f := fill_on(at, copies)) is not None
                         and f <= self.settings.fill_target + 1e-9]
                if fills:
                    # likely to nest: within the fill ``fits`` reached on that profile before
                    likely = any(f <= self.target.get(self.printers[self._index[at.printer]].profile.name,
                                                      self.settings.fill_target) + 1e-9 for f, at in fills)
                    options.append((not likely, -max(f for f, _ in fills), a.start, a.id, a, copies,
                                    [at for _, at in fills]))
            options.sort(key=lambda o: o[:4])
            done = False
            for _, _, _, _, a, copies, places in options[:3]:
                rest = [p for p in cur if p.id not in (a.id, b.id)]
                # the merged plate runs in one partner's place, on its printer (the earlier
                # place, or the later one, which can keep an early order on time), whichever
                # re-times better
                slots = sorted(((score_plan(self.retime(rest + [self._merged(at, copies, None)]), self.start),
                                 k, at) for k, at in enumerate(places)), key=lambda x: x[:2])
                if slots[0][0] >= best:
                    continue
                layouts: dict = {}
                for sc0, _, at in slots:
                    if sc0 >= best:
                        break
                    prof = self.printers[self._index[at.printer]].profile.name
                    if prof not in layouts:
                        layouts[prof] = self.timed_fits(self.printers[self._index[at.printer]], list(copies))
                    layout = layouts[prof]
                    if layout is None:
                        continue
                    timed = self.retime(rest + [self._merged(at, copies, layout)])
                    sc = score_plan(timed, self.start)
                    if sc < best:
                        cur, best = timed, sc
                        fill[at.id] = fill_on(at, copies)
                        merges += 1
                        done = True
                        break
                if done:
                    break
        return cur, merges

    def _merged(self, first: PlannedPlate, copies, layout) -> PlannedPlate:
        from dataclasses import replace
        prof = self.printers[self._index[first.printer]].profile
        est = plate_time(prof, [self.stats[c.kind] for c in copies], build_height_mm=_height(layout))
        return replace(first, copies=tuple(copies), layout=layout, time=est)

    # -- sequencing ------------------------------------------------------------------------------
