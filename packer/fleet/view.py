"""The planner's view of the fleet: printers, when they are ready, who may print what, caches.

One :class:`FleetView` is made per plan after screening (:func:`screen`) and handed to
every step (building plates, merging, emptying low plates, the CP-SAT steps, bounds).
It holds what does not change during the plan, the caches of the capacity hint and of
the time model, and what the layout calls taught so far (the fill each profile reached,
copies kept off a profile); it makes no layout calls itself (that is
:class:`packer.fleet.budget.Budget`'s work).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import datetime

from packer.fleet.calendar import next_open
from packer.fleet.records import CopyRef, PlannedPlate, PlannerSettings, copy_key
from packer.fleet.timemodel import PartStats, copy_work_bounds, layers, plate_time
from packer.fleet.timing import retime, start_after
from packer.intake.job import Calendar, Printer
from packer.layouts import LayoutService, LayoutTraits

__all__ = ["FleetView", "screen", "layout_height"]


def layout_height(layout) -> float | None:
    """The build height a layout reports (the time model's input), None before there is one."""
    return None if layout is None else layout.build_height_mm


def screen(copies: Sequence[CopyRef], printers: Sequence[Printer], layouts: LayoutService) -> tuple[dict, list]:
    """(copy key -> indices of the printers that can print it, unplaced copies with reasons).

    A printer can print a copy when it runs the copy's material and the layouts'
    ``can_print`` has no objection; answers are cached per (printer, kind, material).
    """
    cache: dict = {}
    eligible: dict = {}
    unplaced: list = []
    for c in copies:
        ok, reasons = [], []
        for i, p in enumerate(printers):
            key = (p.name, c.kind, c.material)
            if key not in cache:
                r = None if c.material in p.materials else f"{p.name} does not run {c.material}"
                cache[key] = r or layouts.can_print(p, c)
            r = cache[key]
            (reasons if r else ok).append(r or i)
        eligible[copy_key(c)] = ok
        if not ok:
            unplaced.append((c, "; ".join(sorted(set(reasons))) or "no printer"))
    return eligible, unplaced


@dataclass
class FleetView:
    """Printers (sorted by name), part statistics, calendar and plan start, settings, the
    layout service (read here for capacity hints and traits only) and the screening
    result; derived: each printer's first moment in a shift (``ready``), technology per
    printer name, printer index per name.

    ``target`` (profile name -> hint fill the layouts accepted lately) and ``why`` (copy key
    -> why it went unplaced) are learned while plates are built, and for builds packed in a
    volume ``height_gain`` (profile name -> the last packed build's height over the hint's
    projection of it, which the next builds' projections are scaled by).
    """

    printers: Sequence[Printer]
    stats: Sequence[PartStats]
    cal: Calendar
    start: datetime
    settings: PlannerSettings
    layouts: LayoutService
    eligible: dict
    target: dict = field(default_factory=dict)
    why: dict = field(default_factory=dict)
    height_gain: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.ready = [next_open(self.cal, max(self.start, p.available_from)) for p in self.printers]
        self.tech_of = {p.name: p.profile.technology for p in self.printers}
        self.index = {p.name: i for i, p in enumerate(self.printers)}
        self._hint1: dict = {}
        self._split: dict = {}

    def printer_of(self, p: PlannedPlate) -> Printer:
        return self.printers[self.index[p.printer]]

    def traits(self, i: int) -> LayoutTraits:
        """What the layouts of printer ``i`` let the planner assume."""
        return self.layouts.traits(self.printers[i])

    def hint1(self, i: int, c: CopyRef) -> float:
        """Capacity hint of one copy on printer ``i``'s plate, cached per (profile, kind)."""
        key = (self.printers[i].profile.name, c.kind)
        if key not in self._hint1:
            self._hint1[key] = float(self.layouts.capacity(self.printers[i], [c]))
        return self._hint1[key]

    def fill_of(self, p: PlannedPlate) -> float:
        """Capacity hint of a plate's copies on its printer."""
        i = self.index[p.printer]
        return sum(self.hint1(i, c) for c in p.copies)

    def parts(self, i: int, c: CopyRef) -> tuple[float, float]:
        """(additive, per-plate) machine time of one copy on printer ``i`` (s), cached.

        The machine time of a plate is exactly the sum of the additive terms plus the
        largest per-plate term (see :func:`~packer.fleet.timemodel.copy_work_bounds`; for
        powder with the build height taken as the tallest copy).
        """
        prof = self.printers[i].profile
        key = (prof.name, c.kind)
        if key not in self._split:
            add, _, _ = copy_work_bounds(prof, self.stats[c.kind])
            self._split[key] = (add, plate_time(prof, [self.stats[c.kind]]).machine_s - add)
        return self._split[key]

    def powder_per(self, prof, height: float) -> float:
        """Per-build machine time of a powder build ``height`` mm high (no scan), cached by layer."""
        n = layers(height, prof.time.layer_height_mm)
        key = (prof.name, "layers", n)
        if key not in self._split:
            probe = PartStats(0.0, 0.0, n * prof.time.layer_height_mm, 0.0)
            self._split[key] = plate_time(prof, [probe]).machine_s
        return self._split[key]

    def start_after(self, i: int, free: datetime, last: str | None, material: str) -> tuple[datetime, float]:
        """(start, change s) of a plate of ``material`` on printer ``i`` free from ``free``
        (:func:`packer.fleet.timing.start_after`)."""
        return start_after(self.printers[i].profile, self.cal, free, last, material)

    def retime(self, plates) -> list:
        """Left-shift every printer's plates in their current order (:func:`packer.fleet.timing.retime`)."""
        return retime(plates, self.printers, self.ready, self.cal)

    def merged(self, at: PlannedPlate, copies, layout) -> PlannedPlate:
        """Plate ``at`` with ``copies`` and ``layout`` instead of its own, time re-estimated."""
        prof = self.printer_of(at).profile
        est = plate_time(prof, [self.stats[c.kind] for c in copies], build_height_mm=layout_height(layout))
        return replace(at, copies=tuple(copies), layout=layout, time=est)

    def allowed_on(self, i: int, copies) -> bool:
        """True when printer ``i`` may print every copy."""
        return all(i in self.eligible[copy_key(c)] for c in copies)

    def same_kind_printers(self, p: PlannedPlate) -> tuple[int, ...]:
        """Printers of the plate's profile that run its material."""
        prof = self.printer_of(p).profile.name
        return tuple(j for j, q in enumerate(self.printers)
                     if q.profile.name == prof and p.material in q.materials)
