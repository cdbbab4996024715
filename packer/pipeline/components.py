"""The day split where it splits: printers that share no copy are planned apart.

A copy can go only on the printers that run its material and whose layouts accept
it (:func:`packer.fleet.view.screen`). Joining every copy to each printer that may
take it gives a bipartite graph; its connected components share nothing: no copy
can move from one to another and no printer serves two. In the demo and the
generated days, resin, powder and filament are separate components (filament is
one component: PLA runs on every filament printer).

Each component is planned by :func:`packer.fleet.planner.plan_fleet` on its own
copies and printers, as one :class:`PlanUnit` of plain data that builds its own
layout service, so the units run on any :class:`~packer.pipeline.executor.Executor`
with the same result. The budget is shared by :func:`budget_shares`. The results
are joined by :func:`packer.pipeline.join.join_results` (plates, unplaced copies,
fleet-wide statistics and bounds). With a single component the planner is called
exactly as without the split.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace
from datetime import datetime
from typing import Sequence

from packer.fleet.planner import FleetResult, plan_fleet
from packer.fleet.planbounds import finish_bound
from packer.fleet.records import CopyRef, PlannerSettings, copy_key
from packer.fleet.timemodel import PartStats
from packer.fleet.view import FleetView, screen
from packer.intake.identity import PartKind
from packer.intake.job import Job, Printer
from packer.pipeline.executor import Executor, InProcess
from packer.pipeline.join import join_results
from packer.pipeline.service import layout_service

__all__ = ["Component", "PlanUnit", "split_components", "budget_shares", "plan_unit", "plan_components",
           "BASE_SHARE"]

#: Share of the budget spread evenly over the components; the rest goes by copies.
BASE_SHARE = 0.1


@dataclass(frozen=True)
class Component:
    """Printers that share copies, and those copies: indices into the printers and the copies screened."""

    printers: tuple[int, ...]
    copies: tuple[int, ...]


@dataclass(frozen=True)
class PlanUnit:
    """One component's planning as plain, picklable data (the parts as loaded, no layout service)."""

    job: Job
    parts: dict
    kinds: tuple[PartKind, ...]
    stats: tuple[PartStats, ...]
    copies: tuple[CopyRef, ...]
    printers: tuple[Printer, ...]
    seconds: float
    seed: int
    #: the whole fleet's finishing bound when this is one component of it (the planner's
    #: ``finish_floor``), else None
    finish_floor: datetime | None = None


def split_components(copies: Sequence[CopyRef], eligible: dict) -> list[Component]:
    """The connected components of the copies-printers graph.

    ``eligible`` maps each copy key to the indices of the printers that may print it
    (:func:`packer.fleet.view.screen`). Copies no printer takes and printers no copy
    can use are in no component. Order: most copies first, then by first printer; in
    each component printers ascending and copies in the order given.

    Examples
    --------
    >>> from datetime import datetime
    >>> cs = [CopyRef("A", "p", k, 0, m, datetime(2026, 1, 5), 1) for k, m in enumerate("xyx")]
    >>> split_components(cs, {copy_key(cs[0]): [0, 1], copy_key(cs[1]): [2], copy_key(cs[2]): [1]})
    [Component(printers=(0, 1), copies=(0, 2)), Component(printers=(2,), copies=(1,))]
    """
    parent: dict[int, int] = {}

    def root(i: int) -> int:
        while parent.setdefault(i, i) != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for c in copies:
        first, *rest = eligible.get(copy_key(c)) or [None]
        if first is None:
            continue
        for j in rest:
            a, b = root(first), root(j)
            if a != b:
                parent[max(a, b)] = min(a, b)
        root(first)
    groups: dict[int, tuple[list, list]] = {}
    for i in sorted(parent):
        groups.setdefault(root(i), ([], []))[0].append(i)
    for k, c in enumerate(copies):
        el = eligible.get(copy_key(c))
        if el:
            groups[root(el[0])][1].append(k)
    comps = [Component(tuple(ps), tuple(cs)) for ps, cs in groups.values() if cs]
    return sorted(comps, key=lambda g: (-len(g.copies), g.printers[0]))


def budget_shares(sizes: Sequence[int], seconds: float) -> list[float]:
    """Each component's budget (work-clock seconds): :data:`BASE_SHARE` of ``seconds`` evenly,
    the rest in proportion to its copies. The shares add up to ``seconds``.

    Copies are the work estimate: a layout call is charged per call and per copy, and
    the calls grow with the plates, so with the copies (an estimate, additive over
    copies, known before planning and the same on every machine).

    >>> [round(s, 6) for s in budget_shares([30, 10], 40.0)]
    [29.0, 11.0]
    """
    total, k = sum(sizes), len(sizes)
    return [seconds * (BASE_SHARE / k + (1 - BASE_SHARE) * n / total) for n in sizes]


def plan_unit(unit: PlanUnit) -> FleetResult:
    """Plan one component: its own layout service, then :func:`~packer.fleet.planner.plan_fleet`.

    Layout calls that the nesting engine's guard stopped are added to the result's
    ``safety_nets`` (and make it not ``deterministic``): their answers depend on the machine.
    """
    layouts = layout_service(unit.job, unit.parts, unit.kinds, seed=unit.seed)
    got = plan_fleet(list(unit.copies), unit.printers, stats=unit.stats, calendar=unit.job.calendar,
                     start=unit.job.start, layouts=layouts, seconds=unit.seconds, seed=unit.seed,
                     finish_floor=unit.finish_floor)
    hits = sum(getattr(e, "guard_hits", 0) for e in layouts.engines)
    if not hits:
        return got
    nets = list(got.stats.get("safety_nets", [])) + [f"nesting engine stopped by its wall-clock guard in {hits} "
                                                       f"layout call{'s' if hits > 1 else ''}"]
    return replace(got, stats={**got.stats, "safety_nets": nets, "deterministic": False})


def plan_components(job: Job, parts: dict, kinds: Sequence[PartKind], stats: Sequence[PartStats],
                    copies: Sequence[CopyRef], *, seconds: float, seed: int,
                    executor: Executor | None = None) -> FleetResult:
    """Plan the job's copies component by component on ``executor`` (default in-process) and join.

    One component (or none): the fleet planner on every copy and printer, as without the
    split, in this process.
    """
    printers = sorted(job.fleet, key=lambda p: p.name)
    whole = PlanUnit(job, parts, tuple(kinds), tuple(stats), tuple(copies), tuple(job.fleet), seconds, seed)
    layouts = layout_service(job, parts, kinds, seed=seed)
    eligible, unplaced = screen(copies, printers, layouts)
    comps = split_components(copies, eligible)
    if len(comps) <= 1:
        return plan_unit(whole)
    shares = budget_shares([len(g.copies) for g in comps], seconds)
    view = FleetView(printers, tuple(stats), job.calendar, job.start, PlannerSettings(), layouts, eligible)
    floor = finish_bound(view, [c for c in copies if eligible.get(copy_key(c))])
    units = [PlanUnit(job, parts, tuple(kinds), tuple(stats), tuple(copies[k] for k in g.copies),
                      tuple(printers[i] for i in g.printers), s, seed, floor) for g, s in zip(comps, shares)]
    t0 = time.monotonic()
    results = (executor or InProcess()).map(plan_unit, units)
    wall = time.monotonic() - t0
    return join_results(whole, units, results, screened=(eligible, unplaced, layouts), wall_s=wall)
