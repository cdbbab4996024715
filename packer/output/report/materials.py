"""Material totals of a plan, per material and per printer, in the units a shop buys.

Filament in grams and 1 kg spools, resin in grams and litres of cured part
volume (supports not counted), powder in kilograms used (parts plus the fresh
powder that refreshes the unfused bed, see :func:`packer.fleet.timemodel.powder_use_g`).
"""

from __future__ import annotations

from dataclasses import dataclass

from packer.output.plan import Plan, PlatePlan
from packer.output.report.fmt import litres, mass, spools

__all__ = ["MaterialTotal", "totals_by_material", "totals_by_printer"]


@dataclass(frozen=True)
class MaterialTotal:
    """What one material (on one printer, or fleet-wide) takes."""

    printer: str             # "" for fleet-wide totals
    technology: str
    material: str
    plates: int
    copies: int
    mass_g: float
    parts_volume_mm3: float

    @property
    def amount(self) -> str:
        """The total in the unit the shop buys."""
        if self.technology == "filament":
            return f"{mass(self.mass_g)} = {spools(self.mass_g)}"
        if self.technology == "resin":
            return f"{mass(self.mass_g)} = {litres(self.parts_volume_mm3)} of resin"
        return f"{self.mass_g / 1000.0:.2f} kg of powder used"


def _totals(plates: list[PlatePlan], key) -> list[MaterialTotal]:
    groups: dict = {}
    for p in plates:
        groups.setdefault(key(p), []).append(p)
    out = []
    for (printer, tech, material), ps in sorted(groups.items()):
        out.append(MaterialTotal(printer, tech, material, len(ps), sum(len(p.items) for p in ps),
                                 sum(p.mass_g for p in ps),
                                 sum(c.volume_mm3 for p in ps for c in p.items)))
    return out


def totals_by_material(plan: Plan) -> list[MaterialTotal]:
    """Fleet-wide totals, one per (technology, material)."""
    return _totals(list(plan.plates), lambda p: ("", p.technology, p.material))


def totals_by_printer(plan: Plan) -> list[MaterialTotal]:
    """Totals per printer and material."""
    return _totals(list(plan.plates), lambda p: (p.printer, p.technology, p.material))
