"""A layout service for the fleet and replan tests, answering from the tests' own functions.

The tests state their stand-in rules as plain functions (a fit test by area, a hint,
a screening rule); :class:`FnLayouts` puts them behind the planner's layout interface
(:class:`packer.layouts.LayoutService`) with a fixed work charge per call.
"""

from packer.layouts import Attempt, LayoutTraits, PlateLayout

#: a layout as the stand-ins give it: no placements, the time model's default height
LAYOUT = PlateLayout(transforms=(), build_height_mm=0.0, utilization=0.0)


class FnLayouts:
    """``fits(printer, copies)`` -> a layout (any object: its ``build_height_mm`` is used when
    it has one) or None; ``hint(printer, copies)`` -> share of the plate; ``can_print(printer,
    copy)`` -> None or a reason; optional ``fill(printer, copies, *, must, seconds)`` ->
    (layout, kept indices) or None (then ``pool_fill``); ``work(copies, seconds)`` -> the
    seconds charged per call (default a quarter second, the planner's smallest allowance).
    With ``timed``, ``fits`` is called with the ``seconds`` keyword too."""

    def __init__(self, fits, hint, can_print=lambda p, c: None, fill=None, work=None, timed=False):
        self._fits, self._hint, self._can, self._fill, self._timed = fits, hint, can_print, fill, timed
        self._work = work or (lambda copies, seconds: 0.25)

    def traits(self, printer) -> LayoutTraits:
        powder = printer.profile.technology == "powder"
        return LayoutTraits(packs_volume=powder, pool_fill=self._fill is not None and not powder)

    def can_print(self, printer, ref):
        return self._can(printer, ref)

    def capacity(self, printer, refs):
        return self._hint(printer, refs)

    def fits(self, printer, refs, *, seconds=None) -> Attempt:
        got = self._fits(printer, refs, seconds=seconds) if self._timed else self._fits(printer, refs)
        work = self._work(refs, seconds)
        if got is None:
            return Attempt(None, (), work)
        return Attempt(_plate(got), tuple(range(len(refs))), work)

    def fill(self, printer, refs, *, must, seconds) -> Attempt:
        got = self._fill(printer, refs, must=must, seconds=seconds)
        work = self._work(refs, seconds)
        if got is None:
            return Attempt(None, (), work)
        return Attempt(_plate(got[0]), tuple(got[1]), work)


def _plate(got) -> PlateLayout:
    if isinstance(got, PlateLayout):
        return got
    return PlateLayout(transforms=(), build_height_mm=getattr(got, "build_height_mm", 0.0), utilization=0.0,
                       detail=got)
