"""Print time and material per plate, one model per technology.

Every model follows the structure of Gibson, Rosen and Stucker, *Additive
Manufacturing Technologies*, 2nd ed., section 16.6.2: a build takes the time
to deposit (or cure, or scan) material, plus the time of the layer
transitions, plus fixed delays (warm-up, cool-down). The parameters live in
the plate profile (:mod:`packer.intake.profile`: ``FilamentTime``, ``ResinTime``,
``PowderTime``).

Times are in seconds, lengths in mm, volumes in mm3, masses in g; densities
in the profile are g/cm3 (1 g/cm3 = 1e-3 g/mm3).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from packer.errors import InputError
from packer.intake.profile import FilamentTime, PlateProfile, PowderTime, ResinTime

__all__ = ["PartStats", "TimeEstimate", "plate_time", "layers", "deposited_volume_mm3",
           "copy_work_bounds", "part_mass_g", "powder_use_g", "bed_material_g"]



@dataclass(frozen=True)
class PartStats:
    """What the time and material models need to know about one copy.

    Attributes
    ----------
    volume_mm3 : float
        Solid volume of the part.
    area_mm2 : float
        Surface area of the part (for the shell of a filament part).
    height_mm : float
        Height as printed (after orientation).
    footprint_mm2 : float
        Area of its XY shadow on the plate.
    """

    volume_mm3: float
    area_mm2: float
    height_mm: float
    footprint_mm2: float


@dataclass(frozen=True)
class TimeEstimate:
    """Time of one plate, in seconds.

    Attributes
    ----------
    setup_s : float
        Warm-up after the operator starts the plate.
    print_s : float
        From the end of warm-up until the parts can be taken off (for powder
        beds this includes the cool-down).
    clear_s : float
        Operator work to take the parts off and ready the printer.
    total_s : float
        ``setup_s + print_s + clear_s``.
    terms : dict
        The terms of the model by name (s), for reports.
    """

    setup_s: float
    print_s: float
    clear_s: float
    terms: dict = field(default_factory=dict, compare=False)

    @property
    def total_s(self) -> float:
        return self.setup_s + self.print_s + self.clear_s

    @property
    def machine_s(self) -> float:
        """Warm-up plus print: how long the printer runs without an operator."""
        return self.setup_s + self.print_s


def layers(height_mm: float, layer_height_mm: float) -> int:
    """Number of layers to build ``height_mm``: ``ceil(H / h)``.

    A relative tolerance keeps exact multiples exact in floating point
    (50 mm at 0.05 mm is 1000 layers, not 1001).
    """
    if height_mm <= 0:
        return 0
    return max(1, math.ceil(height_mm / layer_height_mm - 1e-9))


def deposited_volume_mm3(t: FilamentTime, part: PartStats) -> float:
    """Volume a filament printer deposits for one part.

    ``V_dep = V_shell + infill * (V - V_shell)`` with the shell approximated as
    ``V_shell = min(V, A * walls * line_width)`` (REFERENCES.md, Materials:
    mass of a printed part). Supports, skirt and brim are not counted.
    """
    shell = min(part.volume_mm3, part.area_mm2 * t.walls * t.line_width_mm)
    return shell + t.infill * (part.volume_mm3 - shell)


def plate_time(profile: PlateProfile, parts: Sequence[PartStats], *,
               build_height_mm: float | None = None) -> TimeEstimate:
    """Estimate the time of one plate (or powder build) holding ``parts``.

    Parameters
    ----------
    profile
        The plate profile; its ``technology`` picks the model and ``time``
        holds the parameters.
    parts
        One entry per copy on the plate.
    build_height_mm
        Powder beds only: the height of the packed build (the 3D packer knows
        it). Default: the tallest part, which is a lower bound.

    Returns
    -------
    TimeEstimate

    Raises
    ------
    InputError
        If ``parts`` is empty.

    Notes
    -----
    filament
        ``T = sum(V_dep) / Q + N * t_layer + sum_i(N_i) * t_travel`` with
        ``N = ceil(H_max / h)`` the plate's layers and ``N_i`` each part's
        layers: the deposit term at the effective volumetric flow ``Q``
        (REFERENCES.md: ``Q = v h w``), one layer change per layer and a travel
        move to each part on each of its layers (more parts, more travel).
    resin
        ``N = ceil(H_max / h)``; ``T = n_b t_b + (N - n_b) t_e +
        N (d / v_up + d / v_down + t_rest)``: every layer cures at once, so
        the time follows the tallest part, not the part count (Gibson et al.
        ch. 4 and 16; REFERENCES.md check value 8637.5 s).
    powder
        ``N = ceil(H_build / h)`` layers, each recoated, plus the scan time of
        the sliced area: ``sum over layers of A_layer / (hatch * v_scan)``
        with ``sum A_layer ~ V / h``, so ``T_scan = V / (h * hatch * v_scan)``
        (Gibson et al. eqs. 16.8-16.11). Cool-down is ``cooldown_factor``
        times the build time.
    """
    if not parts:
        raise InputError("a plate needs at least one part to estimate its time")
    t = profile.time
    if profile.technology == "filament":
        return _filament(t, parts)
    if profile.technology == "resin":
        return _resin(t, parts)
    if profile.technology == "powder":
        return _powder(t, parts, build_height_mm)
    raise InputError(f"no time model for technology {profile.technology!r}")


def _filament(t: FilamentTime, parts: Sequence[PartStats]) -> TimeEstimate:
    deposit = sum(deposited_volume_mm3(t, p) for p in parts) / t.flow_mm3_s
    n = layers(max(p.height_mm for p in parts), t.layer_height_mm)
    layer_changes = n * t.layer_change_s
    travel = sum(layers(p.height_mm, t.layer_height_mm) for p in parts) * t.travel_per_part_s
    terms = {"deposit_s": deposit, "layer_change_s": layer_changes, "travel_s": travel,
             "layers": n}
    return TimeEstimate(setup_s=t.warmup_s, print_s=deposit + layer_changes + travel,
                        clear_s=t.clear_s, terms=terms)


def _resin(t: ResinTime, parts: Sequence[PartStats]) -> TimeEstimate:
    n = layers(max(p.height_mm for p in parts), t.layer_height_mm)
    nb = min(t.bottom_layers, n)
    exposure = nb * t.bottom_exposure_s + (n - nb) * t.exposure_s
    move = n * (t.lift_mm / t.lift_speed_mm_s + t.lift_mm / t.retract_speed_mm_s + t.rest_s)
    terms = {"exposure_s": exposure, "lift_retract_rest_s": move, "layers": n}
    return TimeEstimate(setup_s=t.warmup_s, print_s=exposure + move, clear_s=t.clear_s,
                        terms=terms)


def _powder(t: PowderTime, parts: Sequence[PartStats], build_height_mm: float | None) -> TimeEstimate:
    height = max(p.height_mm for p in parts)
    if build_height_mm is not None:
        height = max(height, build_height_mm)
    n = layers(height, t.layer_height_mm)
    recoat = n * t.recoat_s
    scan = sum(p.volume_mm3 for p in parts) / (t.layer_height_mm * t.hatch_mm * t.scan_speed_mm_s)
    cool = t.cooldown_factor * (recoat + scan)
    terms = {"recoat_s": recoat, "scan_s": scan, "cooldown_s": cool, "layers": n,
             "build_height_mm": height}
    return TimeEstimate(setup_s=t.warmup_s, print_s=recoat + scan + cool, clear_s=t.clear_s,
                        terms=terms)


def _material(profile: PlateProfile, name: str):
    m = profile.material(name)
    if m is None:
        runs = ", ".join(x.name for x in profile.materials) or "nothing"
        raise InputError(f"profile {profile.name!r} does not run material {name!r} (it runs {runs})")
    return m


def part_mass_g(profile: PlateProfile, material_name: str, part: PartStats) -> float:
    """Mass of one printed copy in g.

    filament: density times the deposited volume (shell plus infill, see
    :func:`deposited_volume_mm3`; REFERENCES.md, Materials). resin and powder:
    density times the solid volume (resin supports are not counted).

    Raises
    ------
    InputError
        If the profile does not run ``material_name``.
    """
    m = _material(profile, material_name)
    g_per_mm3 = m.density_g_cm3 * 1e-3
    if profile.technology == "filament":
        return g_per_mm3 * deposited_volume_mm3(profile.time, part)
    return g_per_mm3 * part.volume_mm3


def powder_use_g(profile: PlateProfile, material: str, *, build_volume_used_mm3: float,
                 parts_volume_mm3: float) -> float:
    """Powder a build consumes, in g.

    ``use = rho_solid * V_parts + r * rho_loose * (V_build - V_parts)``: the
    powder that leaves fused in the parts, plus the refresh share ``r`` of the
    unfused powder in the used part of the bed, which has aged and is replaced
    by fresh powder (refresh ratio 20-50 %, common practice, no source).

    Parameters
    ----------
    build_volume_used_mm3
        Volume of the bed that was filled (plate area times build height).
    parts_volume_mm3
        Sum of the solid volumes of the parts in the build.

    Notes
    -----
    When the profile gives no loose-powder density the solid density is used,
    which over-estimates the powder used.
    """
    if profile.technology != "powder":
        raise InputError(f"profile {profile.name!r} is {profile.technology}, not a powder bed")
    m = _material(profile, material)
    loose = m.powder_density_g_cm3 if m.powder_density_g_cm3 is not None else m.density_g_cm3
    unfused = max(0.0, build_volume_used_mm3 - parts_volume_mm3)
    return 1e-3 * (m.density_g_cm3 * parts_volume_mm3
                   + profile.time.refresh_ratio * loose * unfused)


def bed_material_g(profile: PlateProfile, material: str, *, build_volume_used_mm3: float,
                   parts_volume_mm3: float) -> float:
    """Material a plate uses beyond its copies' masses, in g: a powder build's powder
    (:func:`powder_use_g`); nothing for filament and resin plates."""
    if profile.technology != "powder":
        return 0.0
    return powder_use_g(profile, material, build_volume_used_mm3=build_volume_used_mm3,
                        parts_volume_mm3=parts_volume_mm3)


def copy_work_bounds(profile: PlateProfile, s: PartStats) -> tuple[float, float, float]:
    """Lower bounds of the work one copy brings on a profile (s).

    Returns (additive share, its plate alone, per-plate share). The additive
    share is what the copy adds to any plate: filament deposit and travel,
    powder scan with cool-down, nothing for resin (a layer cures at once).
    The plate alone (warm-up, print, clear) is the longest indivisible piece
    it takes part in. The per-plate share is what a plate whose tallest copy
    is this one costs beyond the additive shares: warm-up, clear and the
    layer-count terms.
    """
    t = profile.time
    est = plate_time(profile, [s])
    if profile.technology == "filament":
        add = deposited_volume_mm3(t, s) / t.flow_mm3_s + layers(s.height_mm, t.layer_height_mm) * t.travel_per_part_s
    elif profile.technology == "powder":
        add = (1 + t.cooldown_factor) * s.volume_mm3 / (t.layer_height_mm * t.hatch_mm * t.scan_speed_mm_s)
    else:
        add = 0.0
    return add, est.total_s, est.total_s - add
