"""Flat plates (filament and resin): the layout service over the nesting engine.

Copies are laid out by their footprints (:mod:`packer.layouts.nested`: nesting
shapes, the engine, the exact re-check). The work of a call is the engine's
work units at their wall rate plus a charge per call and per copy for the
footprint offsets, the exact re-check and this module.
"""

from __future__ import annotations

from typing import Sequence

from packer.intake.footprint import nest_region
from packer.layouts import Attempt, LayoutPart, LayoutTraits, PlateLayout
from packer.layouts.nested import PlateRule, fits_empty_plate, layout_fill_plate, layout_one_plate, place_transform
from packer.nest import budget as nest_budget
from packer.nest.budget import UNITS_PER_SECOND, Meter

__all__ = ["FlatLayouts", "NEST_WALL_PER_WORK", "FIT_CALL_S", "FIT_COPY_S", "plate_rule"]

#: Work-clock charges of one layout call, so that the planner's work clock follows the wall
#: clock: wall seconds per second of the nesting engine's work units, plus a charge per call
#: and per copy for the footprint offsets, the exact re-check and the glue. Fitted to
#: per-call measurements on the development machine (the engine's units follow its CPU time
#: since they are charged per evaluated item, hence 1.0; ``packer bench day`` prints the work
#: clock beside the wall clock; re-fit when they drift apart).
NEST_WALL_PER_WORK, FIT_CALL_S, FIT_COPY_S = 1.0, 0.04, 0.003

TECHNOLOGIES = ("filament", "resin")


def plate_rule(rules, printer) -> PlateRule:
    """The plate a layout is for: the printer's profile with the job's spacing and margin for it."""
    return PlateRule(printer.profile, rules.spacing_for(printer.profile), rules.margin_for(printer.profile))


def call_seconds(n: int, seconds: float | None) -> float:
    """Time one call may use for ``n`` copies: its own allowance by size, capped by ``seconds``."""
    own = min(8.0, 1.0 + 0.08 * n)
    return own if seconds is None else min(own, seconds)


class FlatLayouts:
    """Layouts of filament and resin plates by the nesting engine.

    Parameters
    ----------
    kinds
        :class:`LayoutPart` per kind (``CopyRef.kind`` indexes it).
    rules
        The job's rules: ``spacing_for(profile)`` and ``margin_for(profile)`` (mm).
    seed
        Seed of the nesting engine.

    ``guard_hits`` counts the calls the engine's guard stopped (:mod:`packer.nest.budget`:
    4 x the call's budget of the process's CPU time, plus one second): their answers depend
    on the machine.
    """

    TRAITS = LayoutTraits(packs_volume=False, pool_fill=True)

    def __init__(self, kinds: Sequence[LayoutPart], rules, *, seed: int) -> None:
        self.kinds, self.rules, self.seed = kinds, rules, seed
        self.empty_fit: dict = {}
        self.grown_area: dict = {}
        self.guard_hits = 0

    def handles(self, profile) -> bool:
        return profile.technology in TECHNOLOGIES

    def traits(self, printer) -> LayoutTraits:
        return self.TRAITS

    def can_print(self, printer, ref) -> str | None:
        kind, rule = self.kinds[ref.kind], plate_rule(self.rules, printer)
        prof = printer.profile
        if ref.material not in printer.materials:
            return f"{printer.name} does not run {ref.material}"
        if kind.part.height > prof.build_volume[2] + 1e-9:
            return f"{kind.part.height:.1f} mm tall; {printer.name} builds {prof.build_volume[2]:g} mm high"
        key = (ref.kind, prof.name, rule.spacing, rule.margin)
        if key not in self.empty_fit:
            self.empty_fit[key] = fits_empty_plate(kind.part.footprint, kind.rotations, rule)
        if not self.empty_fit[key]:
            return f"footprint does not fit the plate of {printer.name} inside the margin in any allowed rotation"
        return None

    def capacity(self, printer, refs: Sequence) -> float:
        """Grown footprint areas over the area the nesting region offers."""
        rule = plate_rule(self.rules, printer)
        region, _ = nest_region(printer.profile, spacing=rule.spacing, margin=rule.margin)
        total = 0.0
        for r in refs:
            key = (r.kind, rule.spacing)
            if key not in self.grown_area:
                self.grown_area[key] = self.kinds[r.kind].part.footprint.buffer(rule.spacing / 2).area
            total += self.grown_area[key]
        return total / region.area

    def fits(self, printer, refs: Sequence, *, seconds: float | None = None) -> Attempt:
        rule = plate_rule(self.rules, printer)
        layout, units = self._nested(layout_one_plate, rule, refs, seconds=call_seconds(len(refs), seconds))
        work = self._work(units, len(refs))
        if layout is None:
            return Attempt(None, (), work)
        return Attempt(self._plate(layout, refs), tuple(range(len(refs))), work)

    def fill(self, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
        got, units = self._nested(layout_fill_plate, plate_rule(self.rules, printer), refs, must=must,
                                  seconds=min(seconds, 1.0 + 0.08 * len(refs)))
        work = self._work(units, len(refs))
        if got is None:
            return Attempt(None, (), work)
        layout, chosen = got
        return Attempt(self._plate(layout, [refs[k] for k in chosen]), tuple(chosen), work)

    def _nested(self, layout_fn, rule: PlateRule, refs: Sequence, **kw):
        """Call a flat-plate layout function on the copies' footprints: (its answer, the work
        units the engine counted for it)."""
        footprints = [self.kinds[r.kind].part.footprint for r in refs]
        rotations = [self.kinds[r.kind].rotations for r in refs]
        meter = Meter()
        nest_budget.GUARD_HIT[0] = False
        got = layout_fn(footprints, rotations, rule, seed=self.seed, meter=meter, **kw)
        self.guard_hits += bool(nest_budget.GUARD_HIT[0])
        return got, meter.units

    @staticmethod
    def _work(units: float, n: int) -> float:
        """Deterministic seconds of one call: engine units at their wall rate, plus per call and per copy."""
        return NEST_WALL_PER_WORK * units / UNITS_PER_SECOND + FIT_CALL_S + FIT_COPY_S * n

    def _plate(self, layout, refs: Sequence) -> PlateLayout:
        """The verified layout as the planner reads it (``layout`` numbers ``refs`` in order)."""
        parts = [self.kinds[r.kind].part for r in refs]
        moves = {pl.item: place_transform(parts[pl.item].to_print, pl) for pl in layout.places}
        return PlateLayout(transforms=tuple(moves[k] for k in range(len(refs))),
                           build_height_mm=max(p.height for p in parts),
                           utilization=layout.utilization, detail=layout)
