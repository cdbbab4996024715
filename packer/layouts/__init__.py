"""The layout stage: the one interface the fleet planner asks of the layout engines.

The planner never sees an engine or a technology name. It gets one
:class:`LayoutService` (in ``packer plan``: :class:`Layouts` over the two
implementations) and asks it per printer:

- ``can_print(printer, ref)``: None, or why the printer cannot take the copy;
- ``capacity(printer, refs)``: the share of the plate (or build volume) the set
  needs by a continuous bound, nearly additive;
- ``fits(printer, refs, *, seconds)``: a verified layout of every copy, as an
  :class:`Attempt` (layout or None, and the deterministic work it cost);
- ``fill(printer, refs, *, must, seconds)``: a verified layout of the first
  ``must`` copies and as many of the others as fit;
- ``traits(printer)``: what the planner may assume of that printer's layouts
  (:class:`LayoutTraits`).

Implementations: :class:`packer.layouts.flat.FlatLayouts` (filament and resin
plates, the nesting engine) and :class:`packer.layouts.powder.PowderLayouts`
(powder builds, the 3D packer); each says which profiles it handles, and
:class:`Layouts` routes every printer to the one that does. This module holds
only the contract and the router, so the planner may import it without
loading an engine.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, Sequence

from packer.errors import PackerError

__all__ = ["LayoutTraits", "PlateLayout", "Attempt", "LayoutPart", "LayoutService", "LayoutEngine", "Layouts", "prefix_fill"]


@dataclass(frozen=True)
class LayoutTraits:
    """What the planner may assume of the layouts of one printer (the implementation says it).

    ``packs_volume``: copies are packed in a build volume. The layout's build height sets
    the plate's time, so the planner checks its time rule again with the layout; the fill
    is measured as volume density; a packing is costly, so a build gets few layout calls;
    and a build's contents stay as packed when copies move between plates.
    ``pool_fill``: :meth:`LayoutService.fill` chooses among more candidates than fit in one
    call, so the planner offers it more copies than the plate takes instead of bisecting.
    """

    packs_volume: bool
    pool_fill: bool


@dataclass(frozen=True)
class PlateLayout:
    """What the fleet planner and the plan read of any verified layout, whatever the technology.

    ``transforms`` are (4, 4) moves from each copy's source mesh to plate coordinates
    (mm), one per copy given, in the order given. ``build_height_mm`` is the height of
    the plate's print: the packed build (powder), the tallest copy (flat plates).
    ``utilization`` is the share of the plate area (flat) or the volume density of the
    build (powder). ``detail`` is the engine's whole result.
    """

    transforms: tuple
    build_height_mm: float
    utilization: float
    detail: object = None


@dataclass(frozen=True)
class Attempt:
    """The answer of one layout call: a layout (or None) and the work it cost either way.

    ``chosen`` are the indices of the copies asked that are on the layout (ascending;
    the layout numbers them in that order); empty without a layout. ``work_s`` is
    deterministic seconds of work (engine work units converted at the calibrated rate,
    plus fixed charges per call and per copy), never wall-clock time: the planner's
    work clock adds it up.
    """

    layout: PlateLayout | None
    chosen: tuple[int, ...]
    work_s: float


@dataclass(frozen=True)
class LayoutPart:
    """A part kind as the layout engines see it: the loaded part, its turns, its orientation lock.

    ``CopyRef.kind`` indexes the sequence of these an implementation is made with.
    """

    part: object                      # packer.intake.parts.Part
    rotations: tuple[float, ...]      # allowed turns about z on flat plates (degrees)
    locked: bool                      # orientation as loaded (no turn off the z axis)


class LayoutService(Protocol):
    """The one interface the fleet planner asks of the layout engines (flat plates, powder builds)."""

    def traits(self, printer) -> LayoutTraits:
        """What the planner may assume of this printer's layouts."""

    def can_print(self, printer, ref) -> str | None:
        """None when the printer can take this copy, else the reason it cannot."""

    def capacity(self, printer, refs: Sequence) -> float:
        """Share of the plate (or volume) the set needs by a continuous bound (nearly additive)."""

    def fits(self, printer, refs: Sequence, *, seconds: float | None = None) -> Attempt:
        """A verified layout of every copy of ``refs`` on one plate of the printer.

        ``seconds`` caps the call's time (the implementation caps it further by the
        number of copies); None: the implementation's own allowance for that many copies.
        """

    def fill(self, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
        """A verified layout of the first ``must`` copies and as many of the others as fit
        (no layout when the first ``must`` found none in time)."""


class LayoutEngine(LayoutService, Protocol):
    """One implementation behind :class:`Layouts`: it says which plate profiles it handles."""

    def handles(self, profile) -> bool:
        """True for the profiles (plate shapes, technologies) this implementation lays out."""


def prefix_fill(service: LayoutService, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
    """``fill`` for a service that picks nothing from a pool: the longest prefix of ``refs``
    (at least ``must``) that ``service.fits``, trying every copy first, then halving the
    optional ones. The work of every call is summed."""
    work, extra = 0.0, len(refs) - must
    while True:
        got = service.fits(printer, refs[:must + extra], seconds=seconds)
        work += got.work_s
        if got.layout is not None or extra == 0:
            return Attempt(got.layout, got.chosen, work)
        extra //= 2


class Layouts:
    """The layout service the planner gets: each printer is routed to the implementation
    that handles its profile (the first of ``engines`` that says so)."""

    def __init__(self, engines: Sequence[LayoutEngine]) -> None:
        self.engines = tuple(engines)
        self._by_profile: dict = {}

    def engine(self, printer) -> LayoutEngine:
        name = printer.profile.name
        got = self._by_profile.get(name)
        if got is None:
            got = next((e for e in self.engines if e.handles(printer.profile)), None)
            if got is None:
                raise PackerError(f"no layout engine handles profile {name!r} "
                                  f"({printer.profile.technology})")
            self._by_profile[name] = got
        return got

    def traits(self, printer) -> LayoutTraits:
        return self.engine(printer).traits(printer)

    def can_print(self, printer, ref) -> str | None:
        return self.engine(printer).can_print(printer, ref)

    def capacity(self, printer, refs: Sequence) -> float:
        return self.engine(printer).capacity(printer, refs)

    def fits(self, printer, refs: Sequence, *, seconds: float | None = None) -> Attempt:
        return self.engine(printer).fits(printer, refs, seconds=seconds)

    def fill(self, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
        return self.engine(printer).fill(printer, refs, must=must, seconds=seconds)
