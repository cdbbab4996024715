"""Building plates by list scheduling: choose copies by the capacity hint, confirm with layouts.

See :mod:`packer.fleet.planner` for how the steps fit together. Without a budget
(:func:`build_plates` with ``budget=None``) plates stay hint-only: no layout is asked,
which is how the fill rules are compared before any layout call.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta

from packer.errors import PackerError
from packer.fleet.budget import Budget
from packer.fleet.calendar import printer_free_after, shift_windows
from packer.fleet.records import CopyRef, PlannedPlate, copy_key, post_done
from packer.fleet.scarcity import Scarcity
from packer.fleet.scoring import copy_weight
from packer.fleet.timemodel import plate_time
from packer.fleet.view import FleetView, layout_height

__all__ = ["Built", "build_plates", "plate_on", "sort_key", "due_bucket", "projected_height"]


@dataclass
class Built:
    plates: list
    unplaced: list


def due_bucket(view: FleetView, c: CopyRef) -> int:
    """The copy's due half-day (``due_bucket_h``), one earlier for a boosted copy."""
    bucket_s = view.settings.due_bucket_h * 3600
    return math.floor((c.due - view.start).total_seconds() / bucket_s) - (1 if c.boost > 0 else 0)


def sort_key(view: FleetView, c: CopyRef, banded: bool):
    """Order in which copies are taken: due half-day, height (when banded), due, weight, name.

    Due time before weight inside a half-day: a light copy due in the morning goes before a
    heavy one due in the evening of the same half-day (weights decide between equal due
    times; the lateness they weigh is the model's, ordering by weight first made light
    morning copies late on full days, fleet README "Why large days go late")."""
    h = -round(view.stats[c.kind].height_mm, 1) if banded else 0.0
    if not view.settings.due_first:
        return (due_bucket(view, c), h, -copy_weight(c), c.due, c.order, c.part, c.copy)
    return (due_bucket(view, c), h, c.due, -copy_weight(c), c.order, c.part, c.copy)


def build_plates(view: FleetView, budget: Budget | None, pool, *, banded: bool, mode: str,
                 free_from: Sequence[datetime] | None = None, few_calls_after: float = math.inf,
                 only: frozenset | None = None, spare: bool = False) -> Built:
    """Plates for ``pool`` by list scheduling: the printer free soonest takes the next plate.

    With a budget, each plate is confirmed by a layout; after ``few_calls_after`` on the
    work clock a plate gets fewer layout calls. ``free_from``: when each printer is free
    (default: ready). ``only``: printer indices to use for every copy one of them may print
    (the others only for the rest). ``spare``: material choice by scarcity (:mod:`packer.fleet.scarcity`).
    """
    remaining = sorted(pool, key=lambda c: sort_key(view, c, banded))
    allowed = {copy_key(c): _allowed(view, c, only) for c in remaining}
    free_at = list(free_from or view.ready)
    scarce = Scarcity(view, remaining, allowed) if spare else None
    last: dict = {}                 # printer index -> material of its last plate
    plates, unplaced = [], []
    live = set(range(len(view.printers)))
    while remaining:
        live = {i for i in live if any(i in allowed[copy_key(c)] for c in remaining)}
        cands = [(free_at[i], view.printers[i].name, i) for i in sorted(live)]
        if not cands:
            for c in remaining:
                unplaced.append((c, view.why.get(copy_key(c), "no printer can take it")))
            break
        _, _, i = min(cands)
        first = _first_copy(view, i, remaining, allowed, last.get(i))
        first = scarce.first(i, first, remaining, free_at, live) if scarce else first
        begin, _ = view.start_after(i, free_at[i], last.get(i), first.material)
        pool_fill = budget is not None and view.traits(i).pool_fill
        limit = view.settings.pool_target if pool_fill else view.settings.fill_target
        chosen, proj, cum = _choose(view, i, remaining, allowed, first, begin, mode, limit)
        if view.settings.night_fill and _across_night(begin, proj) and not view.traits(i).packs_volume:
            order = _night_order(view, i, remaining, first, proj[-1])
            chosen, proj, cum = _choose(view, i, order, allowed, first, begin, mode, limit)
        layout = None
        if budget is not None:
            head = chosen[0]
            chosen, layout = _confirm(view, budget, i, chosen, proj, cum, begin, mode, pool_fill, few_calls_after)
            if not chosen:
                _keep_off(view, i, allowed, head)
                continue
        taken = {copy_key(c) for c in chosen}
        remaining = [c for c in remaining if copy_key(c) not in taken]
        if scarce:
            scarce.drop(taken)
        job = plate_on(view, i, chosen, layout, free_at[i], len(plates), last.get(i))
        free_at[i] = job.free
        last[i] = job.material
        plates.append(job)
    return Built(plates, unplaced)


def _first_copy(view: FleetView, i: int, remaining, allowed, last: str | None) -> CopyRef:
    """The next plate's first copy: the most urgent one printer ``i`` may take, or the most
    urgent one of the material it ran last (``last``) when that is due in the same half-day
    (a printer stays on its material where that costs no urgency)."""
    prof = view.printers[i].profile
    first = next(c for c in remaining if i in allowed[copy_key(c)])
    if last is not None and first.material != last and prof.material_change_s > 0:
        same = next((c for c in remaining if c.material == last and i in allowed[copy_key(c)]), None)
        if same is not None and due_bucket(view, same) <= due_bucket(view, first):
            first = same
    return first


def _allowed(view: FleetView, c: CopyRef, only: frozenset | None) -> set:
    """The printers copy ``c`` may go on: those of ``only`` that may print it, else all that may."""
    every = set(view.eligible[copy_key(c)])
    return (every & only or every) if only is not None else every


def _across_night(begin: datetime, proj) -> bool:
    """True when the plate is cleared only after a closed period (its printer is free on a
    later day than it starts; shifts do not cross midnight)."""
    return bool(proj) and proj[-1].date() > begin.date()


def _night_order(view: FleetView, i: int, remaining, first: CopyRef, morning: datetime) -> list:
    """The candidates of a plate that runs across a closed period and is cleared at ``morning``.

    The printer stands finished from the plate's end to ``morning`` whatever the plate holds,
    so the plate should bring as much machine time as it can: first the copy the plate was
    started for and the copies due before ``morning`` (done no sooner on any later plate of
    this printer), in the usual order; then the copies due after ``morning``, most machine
    time per capacity share first (tall, solid parts), so the short ones are left for the
    plates of the next shift.
    """
    def density(c: CopyRef) -> float:
        return view.parts(i, c)[0] / max(view.hint1(i, c), 1e-9)
    early = [c for c in remaining if c is first or c.due < morning]
    rank = {copy_key(c): k for k, c in enumerate(remaining)}
    late = sorted((c for c in remaining if c is not first and c.due >= morning),
                  key=lambda c: (-density(c), rank[copy_key(c)]))
    return early + late


def _choose(view: FleetView, i: int, remaining, allowed, first: CopyRef, begin: datetime, mode: str,
            limit: float):
    """The copies of the next plate of printer ``i`` started at ``begin``, by hint and fill rule.

    In the sorted order, a copy of the first copy's material joins while the capacity hint
    stays within ``limit`` and, by ``mode`` (see ``FILL_MODES``), the due times allow. A
    ``strict`` plate whose first copy is late even alone on it fills by the ``due`` rule:
    strictly it could take no second copy, and a day of one-copy plates only gets later
    (fleet README, "The 5,000-copy regression").
    Returns (chosen, projected free time after each, cumulative hint after each).
    """
    prof = view.printers[i].profile
    clear = prof.time.clear_s
    volume = view.traits(i).packs_volume
    chosen, load, proj, cum = [], 0.0, [], []
    add_sum, per_max, due_min, tallest = 0.0, 0.0, None, 0.0
    cur_done, due_min_ok, late_cap = None, None, None
    for c in remaining:
        if c.material != first.material or i not in allowed[copy_key(c)]:
            continue
        h = view.hint1(i, c)
        if chosen and load + h > limit:
            continue
        a, q = view.parts(i, c)
        per = max(per_max, q)
        if volume:   # the build is at least as high as the parts' volume share of the room
            height = view.height_gain.get(prof.name, 1.0) * projected_height(
                prof, max(tallest, view.stats[c.kind].height_mm), load + h)
            per = max(per, view.powder_per(prof, height))
        new_free = printer_free_after(view.cal, begin + timedelta(seconds=add_sum + a + per), clear)
        done = post_done(prof.post_processing, view.cal, new_free)    # due times judge this moment
        d = c.due if due_min is None else min(due_min, c.due)
        if chosen and done > cur_done and _blocked(mode, done, d, due_min_ok, c, cur_done):
            continue
        if chosen and volume and mode != "full" and due_min_ok is None and c.due < done and done > late_cap:
            continue        # a late build runs through two closed periods at most
        if not chosen and mode == "strict" and c.due < done:
            mode = "due"    # late alone: a short plate saves it nothing, it only adds plates
        if not chosen and volume:
            late_cap = _late_build_cap(view, done)
        chosen.append(c)
        proj.append(new_free)
        load += h
        cum.append(load)
        if c.due >= done:
            due_min_ok = c.due if due_min_ok is None else min(due_min_ok, c.due)
        if due_min_ok is not None and due_min_ok < done:
            due_min_ok = min((x.due for x in chosen if x.due >= done), default=None)
        add_sum, per_max, due_min, cur_done = add_sum + a, max(per_max, q), d, done
        tallest = max(tallest, view.stats[c.kind].height_mm)
        if load >= limit:
            break
    return chosen, proj, cum


def _late_build_cap(view: FleetView, done: datetime) -> datetime:
    """The latest moment a build whose copies are all late may be done: the end of the second
    shift after the one its first copy alone is done in.

    Copies already late do not hold a plate back by the due rule, and a build's time grows
    with its height, so without a cap a late build takes copies until the chamber is full: on
    a 10,000-copy day one build of 833 copies ran 213 h (fleet README, "Late builds capped at
    two nights"). Capped so, a late build runs through at most two closed periods (one only
    left copies for later builds that ended later still: fleet README, same section)."""
    wins = shift_windows(view.cal, done, 21)
    return wins[min(2, len(wins) - 1)][1] if wins else done


def _blocked(mode: str, done: datetime, due_min: datetime, due_min_ok, c: CopyRef, cur_done) -> bool:
    """True when copy ``c``, moving the moment the plate's parts are done (cleared and through
    post-processing) to ``done``, breaks the fill rule."""
    if mode == "strict":
        return done > due_min
    if mode == "due":      # protect the copies that are on time so far
        on_time = [x for x in (due_min_ok, c.due if c.due >= cur_done else None) if x]
        return bool(on_time) and done > min(on_time)
    return False


def _confirm(view: FleetView, budget: Budget, i: int, chosen, proj, cum, begin: datetime, mode: str,
             pool_fill: bool, few_calls_after: float):
    """(copies, layout) of the plate confirmed by the layout engine, the fill of the profile
    learned; ([], None) when not even the first copy fits."""
    s = view.settings
    prof = view.printers[i].profile
    target = view.target.get(prof.name, min(s.fill_target, s.first_probe_fill))
    if pool_fill:
        # one call: the most urgent copies (up to a share of the fill reached lately) must
        # go on, the engine adds as many of the others as fit
        must = max(1, sum(1 for x in cum if x <= s.must_share * target + 1e-9))
        got = budget.timed_fill(view.printers[i], chosen, must)
        if got is not None:
            layout, keep = got
            if not set(range(must)) <= set(keep):
                raise PackerError("the pool fill left a required copy off the plate (a layout bug)")
            view.target[prof.name] = min(s.fill_target, sum(view.hint1(i, chosen[k]) for k in keep))
            return [chosen[k] for k in keep], layout
        chosen, cum, proj = chosen[:must], cum[:must], proj[:must]   # bisect on the required part
    ok_n, ok_layout, fail_n, packed_n = _longest_prefix(view, budget, i, chosen, proj, cum, begin, mode, target,
                                                        few_calls_after)
    if fail_n <= len(chosen):
        # the next plate's first probe: just below the fill that did not nest
        view.target[prof.name] = max(cum[packed_n - 1] if packed_n else 0.0,
                                     cum[fail_n - 1] - 0.01 if packed_n else cum[fail_n - 1] * 0.5)
    elif packed_n:
        # every probe packed (a build refused on its time, not its geometry, still taught the fill)
        view.target[prof.name] = min(s.fill_target, max(target, cum[packed_n - 1]) + 0.02)
    if ok_n:
        return chosen[:ok_n], ok_layout
    return [], None


def _longest_prefix(view: FleetView, budget: Budget, i: int, chosen, proj, cum, begin: datetime, mode: str,
                    target: float, few_calls_after: float):
    """(copies that fit, their layout, fewest copies known not to pack, most copies known to pack)
    for the longest fitting prefix of ``chosen`` (most urgent first): bounded bisection, first
    probing the fill this profile reached before; when nothing fits, a quarter of the last failed
    set, then one copy (a plate of one copy is the last resort, not the next step).

    A build that packs but breaks the fill rule with its packed height (the hint projects a lower
    one) failed on time, not geometry: the next probe is the longest prefix that keeps the rule at
    that height (dropping copies from a packing never makes it higher), and it counts as packed
    for the fill the profile learns, so a day's late builds do not shrink the next probes."""
    s = view.settings
    n = len(chosen)
    ok_n, ok_layout, fail_n, geo_fail, packed_n, timed = 0, None, n + 1, n + 1, 0, 0
    probe = max(1, sum(1 for x in cum if x <= target + 1e-9))
    tries = 2 if budget.past(few_calls_after, "fewer fits calls per plate") else s.max_fit_tries
    if view.traits(i).packs_volume:       # a build packing is costly; a few copies more or less matter little
        tries = min(tries, s.max_powder_tries)
    if tries == 2 and budget.past(budget.hard_end, "one fits call per plate after the budget"):
        tries = 1     # probe the fill this profile reached; then the last resorts below

    def ask(k: int) -> bool:
        nonlocal ok_n, ok_layout, fail_n, geo_fail, packed_n, timed
        layout, packed = _fits_rule(view, budget, i, chosen, proj, k=k, load=cum[k - 1], begin=begin, mode=mode)
        if layout is not None:
            ok_n, ok_layout = k, layout
        else:
            fail_n = k
        if packed is None:
            geo_fail = min(geo_fail, k)
        else:
            packed_n = max(packed_n, k)
        if layout is None and packed is not None:      # packed, but too late built that high
            timed = _time_prefix(view, i, chosen, proj, k, begin, mode, packed.build_height_mm)
        return layout is not None

    for t in range(tries):
        if t and not _affordable(budget, view.printers[i], probe, t, few_calls_after):
            break
        ask(probe)
        if fail_n - ok_n <= 1:
            break
        if ok_n == 0 and t == 0 and tries > 2:
            probe = max(1, min(fail_n - 1, math.floor(probe * (1 - s.overflow_share))))
        else:
            probe = (ok_n + fail_n) // 2
    for last in (timed, fail_n // 4, 1):
        if ok_n or not 1 <= last < fail_n:
            continue
        ask(last)
    return ok_n, ok_layout, geo_fail, packed_n


def _affordable(budget: Budget, printer, n: int, t: int, few_calls_after: float) -> bool:
    """Whether probe ``t`` (> 0) of ``n`` copies may start: it is expected to end within the
    budget (:meth:`Budget.affords`, the work per copy of the profile's last call), and from the
    third probe on by ``few_calls_after``. Before, the tries were counted when the plate's
    first probe started, so a packing of a whole build (9 s for 316 bodies) could run long
    past both."""
    if not budget.affords(printer, n, budget.hard_end, "one fits call per plate after the budget"):
        return False
    return t < 2 or budget.affords(printer, n, few_calls_after, "fewer fits calls per plate")


def _fits_rule(view: FleetView, budget: Budget, i: int, chosen, proj, *, k: int, load: float, begin: datetime,
               mode: str):
    """(layout of the first ``k`` copies that keeps the fill rule with the layout's time or None,
    the layout found whether or not it keeps the rule, None when they did not pack).

    A packed build also teaches the profile how its packed height compares with the hint's
    projection (``FleetView.height_gain``), so the next builds are chosen at heights they reach."""
    p = view.printers[i]
    layout = budget.timed_fits(p, chosen[:k])
    if layout is None or not view.traits(i).packs_volume:
        return layout, layout     # flat plates: the time does not depend on the layout
    projected = projected_height(p.profile, max(view.stats[c.kind].height_mm for c in chosen[:k]), load)
    if projected > 0 and layout.build_height_mm > 0:
        view.height_gain[p.profile.name] = layout.build_height_mm / projected
    if mode == "full":
        return layout, layout
    ok = _rule_holds(view, i, chosen, proj, k=k, begin=begin, mode=mode, height=layout.build_height_mm)
    return (layout if ok else None), layout


def projected_height(prof, tallest: float, load: float) -> float:
    """The hint's projection of a build's height: at least its tallest copy and the copies'
    volume share of the room (mm)."""
    return max(tallest, load * prof.build_volume[2])


def _rule_holds(view: FleetView, i: int, chosen, proj, *, k: int, begin: datetime, mode: str,
                height: float) -> bool:
    """True when the first ``k`` copies, built ``height`` mm high from ``begin``, keep the fill rule."""
    prof = view.printers[i].profile
    est = plate_time(prof, [view.stats[c.kind] for c in chosen[:k]], build_height_mm=height)
    free = printer_free_after(view.cal, begin + timedelta(seconds=est.machine_s), prof.time.clear_s)
    done, planned = (post_done(prof.post_processing, view.cal, t) for t in (free, proj[k - 1]))
    ok = done <= max(planned, min(c.due for c in chosen[:k])) or k == 1
    if mode == "due":
        ok = ok or all(c.due < planned or c.due >= done for c in chosen[:k])
    return ok


def _time_prefix(view: FleetView, i: int, chosen, proj, k: int, begin: datetime, mode: str,
                 height: float) -> int:
    """The longest prefix shorter than ``k`` that keeps the fill rule built ``height`` mm high
    (the packed height of the first ``k``; at least one copy)."""
    for j in range(k - 1, 1, -1):
        if _rule_holds(view, i, chosen, proj, k=j, begin=begin, mode=mode, height=height):
            return j
    return 1


def _keep_off(view: FleetView, i: int, allowed, c: CopyRef) -> None:
    """Copy ``c`` does not fit alone on printer ``i``'s profile: keep it off every printer of it."""
    prof = view.printers[i].profile.name
    for j, q in enumerate(view.printers):
        if q.profile.name == prof:
            allowed[copy_key(c)].discard(j)
    view.why[copy_key(c)] = f"does not fit on an empty plate of profile {prof}"


def plate_on(view: FleetView, i: int, chosen, layout, free_at: datetime, k: int,
             last: str | None = None) -> PlannedPlate:
    """Plate ``G{k}`` of ``chosen`` on printer ``i``, started when it is free from ``free_at``
    (after a material change from ``last``), with its time estimate."""
    p = view.printers[i]
    parts = [view.stats[c.kind] for c in chosen]
    est = plate_time(p.profile, parts, build_height_mm=layout_height(layout))
    begin, change = view.start_after(i, free_at, last, chosen[0].material)
    end = begin + timedelta(seconds=est.machine_s)
    free = printer_free_after(view.cal, end, est.clear_s)
    return PlannedPlate(id=f"G{k}", printer=p.name, material=chosen[0].material,
                        copies=tuple(chosen), layout=layout, start=begin, end=end, free=free,
                        time=est, change_s=change, post=p.profile.post_processing, cal=view.cal)
