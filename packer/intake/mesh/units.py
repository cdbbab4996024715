"""Length units of mesh files, and the plausibility of a part's size in them.

The 3MF core specification (3MF Consortium, *3D Manufacturing Format Core
Specification*, v1.4.0, section 3.4 Model, attribute ``unit``) lists
micron, millimeter, centimeter, inch, foot and meter, millimeter by default.
STL, OBJ and PLY carry no unit: a job line says ``units: mm|cm|m|inch``
(millimetres by default). packer never rescales without a declared unit; a part
whose size looks wrong for its unit gets a warning naming the likely unit.
"""

from __future__ import annotations

__all__ = ["THREEMF_UNITS", "LINE_UNITS", "mm_per_unit", "implausible_size"]

#: mm per unit for the values of the 3MF ``unit`` attribute (3MF core specification v1.4.0, section 3.4).
THREEMF_UNITS = {"micron": 0.001, "millimeter": 1.0, "centimeter": 10.0, "inch": 25.4,
                 "foot": 304.8, "meter": 1000.0}

#: mm per unit for the ``units`` key of a job line (files without units).
LINE_UNITS = {"mm": 1.0, "cm": 10.0, "m": 1000.0, "inch": 25.4}

#: A part's largest extent outside this range (mm) is implausible for a printed part
#: (common practice, no source: desktop and production machines build from about 5 mm
#: features up to about 2 m).
PLAUSIBLE_MM = (5.0, 2000.0)
#: The range a better unit must bring the largest extent into to be suggested (our choice).
ORDINARY_MM = (10.0, 1000.0)


def mm_per_unit(unit: str) -> float:
    """mm per unit for a 3MF unit name or a line unit key."""
    if unit in THREEMF_UNITS:
        return THREEMF_UNITS[unit]
    return LINE_UNITS[unit]


def implausible_size(largest_mm: float, *, unit: str, key: str) -> str | None:
    """A warning when the largest extent is implausible in the stated unit, else None.

    Parameters
    ----------
    largest_mm
        Largest extent of the part after conversion to mm.
    unit
        The unit the numbers were read in (a key of :data:`LINE_UNITS` or
        :data:`THREEMF_UNITS`).
    key
        What to tell the planner to set, e.g. ``"units"`` on a job line or
        ``"the 3MF unit attribute"``.

    Returns
    -------
    str or None
        E.g. ``"every extent is under 5 mm (largest 2 mm read as mm); read as inch
        it would be 50.8 mm: if the file is in inches, set units: inch"``.
    """
    lo, hi = PLAUSIBLE_MM
    if lo <= largest_mm <= hi:
        return None
    raw = largest_mm / mm_per_unit(unit)
    names = LINE_UNITS if unit in LINE_UNITS else THREEMF_UNITS
    candidates = [(u, raw * f) for u, f in names.items() if u != unit
                  and ORDINARY_MM[0] <= raw * f <= ORDINARY_MM[1]]
    # the candidate whose reading lands nearest the middle of the ordinary range (log scale)
    candidates.sort(key=lambda c: abs(_log10(c[1]) - 2.0))
    where = f"every extent is under {lo:g} mm" if largest_mm < lo else f"it is over {hi:g} mm long"
    msg = f"implausible size: {where} (largest {largest_mm:.4g} mm, read as {unit})"
    if candidates:
        u, size = candidates[0]
        msg += f"; read as {u} it would be {size:.4g} mm: if the file is in {u}, set {key}: {u}"
    return msg + "; packer did not rescale it"


def _log10(x: float) -> float:
    import math
    return math.log10(x) if x > 0 else -99.0
