"""Seeded generator of realistic production days for the fleet benchmark.

A day mixes the three technologies: filament plates (two sizes), resin plates
and powder-bed volumes; parts range from small clips to covers nearly as
large as a plate; quantities have a long tail (most lines a few copies, a few
lines a hundred or more); due times spread over two working days.

Parts have rectangular footprints here (a box of ``w x d x h`` with a solid
share of its volume): the benchmark is about the fleet, and rectangles let
the stand-in layout check (:func:`shelf_fits`, skyline packing of boxes) be exact without the nesting
engine. Everything is in memory; nothing is written. :func:`day_spec` is the
one generator: :func:`make_day` turns it into in-memory data, and
:mod:`packer.bench.day` writes it as a real job (meshes and YAML).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, time, timedelta

import numpy as np

from packer.bench.skyline import Skyline, largest_first, skyline_place
from packer.fleet.planner import CopyRef
from packer.fleet.timemodel import PartStats
from packer.intake.job import Calendar, Printer
from packer.intake.profile import FilamentTime, Material, PlateProfile, PowderTime, ResinTime

__all__ = ["Day", "PartBox", "make_day", "day_spec", "DaySpec", "PartSpec", "OrderSpec",
           "PrinterSpec", "FleetMix", "BENCH_MIX", "bench_profiles", "box_hint", "shelf_fits", "box_can_print",
           "ShelfLayout", "day_budget_s", "bound_gap"]

MONDAY = datetime(2026, 3, 2, 7, 0)   # a Monday, shift start


def day_budget_s(copies: int) -> float:
    """Planning budget of a generated day in the benchmarks: 60 s up to 1,000 copies, else 180 s."""
    return 60.0 if copies <= 1000 else 180.0


def bound_gap(used: int, bound: int) -> float:
    """Plates used over their lower bound, as a share of the bound (0 when the bound is 0)."""
    return (used - bound) / bound if bound else 0.0


@dataclass(frozen=True)
class PartBox:
    """A generated part: its box (mm) and its statistics."""

    name: str
    technology: str
    w: float
    d: float
    h: float
    stats: PartStats


@dataclass(frozen=True)
class Day:
    copies: tuple[CopyRef, ...]
    parts: tuple[PartBox, ...]        # indexed by CopyRef.kind
    printers: tuple[Printer, ...]
    calendar: Calendar
    start: datetime

    @property
    def stats(self) -> tuple[PartStats, ...]:
        return tuple(p.stats for p in self.parts)


def _profile(name, tech, volume, time, materials, spacing, margin) -> PlateProfile:
    return PlateProfile(name=name, file="<generated>", technology=tech, build_volume=volume,
                        plate_shape="rectangle", plate_points=(), keep_out=(), spacing=spacing,
                        margin=margin, time=time, materials=materials)


def bench_profiles() -> dict[str, PlateProfile]:
    """The generic profiles of generated days: sizes our own (DEVELOPERS.md, "Profile values"); time values packer.intake.profile defaults."""
    fil = (Material("PLA", 1.24), Material("PETG", 1.27), Material("ABS", 1.04))
    return {
        "fil-m": _profile("fil-m", "filament", (244.0, 198.0, 205.0), FilamentTime(), fil, 6.0, 4.0),
        "fil-l": _profile("fil-l", "filament", (343.0, 314.0, 306.0),
                          FilamentTime(flow_mm3_s=20.0, line_width_mm=0.5), fil, 6.0, 5.0),
        "res-s": _profile("res-s", "resin", (126.0, 77.0, 153.0), ResinTime(),
                          (Material("resin-grey", 1.1), Material("resin-clear", 1.1)), 3.0, 5.0),
        "pow-m": _profile("pow-m", "powder", (293.0, 289.0, 296.0), PowderTime(),
                          (Material("PA12", 1.01, 0.43),), 3.0, 10.0),
    }


@dataclass(frozen=True)
class FleetMix:
    """Which profile and materials stand for each printer role of a generated day.

    ``roles`` maps the roles ``fil-m`` (mid-size filament), ``fil-l`` (large
    filament), ``res-s`` (resin) and ``pow-m`` (powder) to profile names;
    ``filament_sets`` are the material sets of filament printers in turn;
    ``order_materials`` the materials an order line draws from, per technology
    (4 filament, 2 resin, 1 powder entries: the draw is by position, so two mixes
    give the same day apart from the names).
    """

    roles: tuple[tuple[str, str], ...]
    filament_sets: tuple[tuple[str, ...], tuple[str, ...], tuple[str, ...]]
    resin_materials: tuple[str, ...]
    powder_materials: tuple[str, ...]
    order_materials: tuple[tuple[str, tuple[str, ...]], ...]

    def profile_of(self, role: str) -> str:
        return dict(self.roles)[role]

    def materials_for(self, technology: str) -> tuple[str, ...]:
        return dict(self.order_materials)[technology]


BENCH_MIX = FleetMix(
    roles=(("fil-m", "fil-m"), ("fil-l", "fil-l"), ("res-s", "res-s"), ("pow-m", "pow-m")),
    filament_sets=(("PLA", "PETG"), ("PLA", "ABS"), ("PLA", "PETG", "ABS")),
    resin_materials=("resin-grey", "resin-clear"), powder_materials=("PA12",),
    order_materials=(("filament", ("PLA", "PLA", "PETG", "ABS")), ("resin", ("resin-grey", "resin-clear")),
                     ("powder", ("PA12",))))
"""The in-memory profiles of :func:`bench_profiles`."""


@dataclass(frozen=True)
class PrinterSpec:
    """A generated printer: its name, role (see :class:`FleetMix`), materials and free time."""

    name: str
    role: str
    materials: tuple[str, ...]
    available_from: datetime


@dataclass(frozen=True)
class PartSpec:
    """A generated part: kind, technology, its box (mm), volume (mm^3) and surface area (mm^2) of the box part."""

    name: str
    kind: str
    technology: str
    w: float
    d: float
    h: float
    volume_mm3: float
    area_mm2: float


@dataclass(frozen=True)
class OrderSpec:
    """A generated order: ``lines`` are (part index, quantity, material)."""

    id: str
    due: datetime
    priority: int
    lines: tuple[tuple[int, int, str], ...]


@dataclass(frozen=True)
class DaySpec:
    """A generated day before it becomes data (:func:`make_day`) or files (:mod:`packer.bench.day`)."""

    parts: tuple[PartSpec, ...]
    orders: tuple[OrderSpec, ...]
    printers: tuple[PrinterSpec, ...]
    calendar: Calendar
    start: datetime

    @property
    def copies(self) -> int:
        return sum(q for o in self.orders for _, q, _ in o.lines)


def _fleet(n: int, rng: np.random.Generator, start: datetime, mix: FleetMix) -> tuple[PrinterSpec, ...]:
    """About 55 % filament (a third of them large), 25 % resin, 20 % powder; at least one of each."""
    n_res = max(1, round(n * 0.25))
    n_pow = max(1, round(n * 0.2))
    n_fil = max(1, n - n_res - n_pow)
    out = []
    for k in range(n_fil):
        out.append((f"fil-{k + 1:02d}", "fil-l" if k % 3 == 2 else "fil-m", mix.filament_sets[k % 3]))
    for k in range(n_res):
        out.append((f"res-{k + 1:02d}", "res-s", mix.resin_materials))
    for k in range(n_pow):
        out.append((f"pow-{k + 1:02d}", "pow-m", mix.powder_materials))
    printers = []
    for name, role, mats in out:
        late = float(rng.choice([0, 0, 0, 1, 2, 3]))          # some still busy at the start
        printers.append(PrinterSpec(name, role, tuple(mats), start + timedelta(hours=late)))
    return tuple(printers)


_KINDS = {
    # kind: (share, footprint side range mm, height range mm)
    "clip": (0.45, (8, 30), (3, 12)),
    "knob": (0.25, (15, 40), (8, 25)),
    "bracket": (0.20, (30, 80), (6, 35)),
    "housing": (0.07, (60, 120), (20, 60)),
    "cover": (0.03, (150, 230), (3, 15)),
}
_CAP = {"clip": 150, "knob": 60, "bracket": 16, "housing": 4, "cover": 2}


def _part(k: int, tech: str, rng: np.random.Generator, small: bool = False) -> PartSpec:
    kinds = list(_KINDS)
    share = np.array([_KINDS[x][0] for x in kinds])
    if small:
        share = share * np.array([1, 1, 0, 0, 0])
    if tech == "resin":   # resin plates are small: no covers or housings
        share = share * np.array([1, 1, 1, 0.3, 0])
    kind = kinds[int(rng.choice(len(kinds), p=share / share.sum()))]
    (lo, hi), (hlo, hhi) = _KINDS[kind][1], _KINDS[kind][2]
    if tech == "resin":   # small, detailed parts
        lo, hi = min(lo, 8), min(hi, 35)
        hlo, hhi = min(hlo, 5), min(hhi, 70)
    w = float(rng.uniform(lo, hi))
    d = float(rng.uniform(lo, hi) if kind != "cover" else rng.uniform(0.6, 0.9) * min(w, 190))
    h = float(rng.uniform(hlo, hhi))
    solid = float(rng.uniform(0.15, 0.45))       # share of the box that is material
    foot = w * d
    vol = foot * h * solid
    area = 2 * foot + 2 * (w + d) * h * 1.3     # outer box plus some inner surface
    return PartSpec(name=f"{kind}-{k:03d}", kind=kind, technology=tech, w=round(w, 1), d=round(d, 1),
                    h=round(h, 1), volume_mm3=vol, area_mm2=area)


def _box_part(spec: PartSpec) -> PartBox:
    """The box statistics of a generated part (exact-box footprint, solid share of the box)."""
    return PartBox(name=spec.name, technology=spec.technology, w=spec.w, d=spec.d, h=spec.h,
                   stats=PartStats(spec.volume_mm3, spec.area_mm2, spec.h, spec.w * spec.d))


def day_spec(*, copies: int = 500, printers: int = 12, seed: int = 0, start: datetime = MONDAY,
             small: bool = False, mix: FleetMix = BENCH_MIX) -> DaySpec:
    """Generate a day: parts, orders with due times, and the fleet (see :func:`make_day`).

    The same arguments give the same day; ``mix`` only names profiles and materials.
    """
    rng = np.random.default_rng(seed)
    fleet = _fleet(max(3, printers), rng, start, mix)
    n_parts = int(np.clip(copies // 8, 12, 160))
    techs = rng.choice(["filament", "resin", "powder"], size=n_parts, p=[0.6, 0.25, 0.15])
    parts = [_part(k, str(t), rng, small) for k, t in enumerate(techs)]
    orders: list[OrderSpec] = []
    total = 0
    while total < copies:
        oid = f"W-{101 + len(orders)}"
        day = int(rng.integers(0, 2))
        hour = int(rng.integers(13, 20) if day == 0 else rng.integers(9, 20))
        prio = int(rng.choice([1, 1, 1, 2, 2, 3]))
        lines, seen = [], set()
        for _ in range(int(rng.integers(1, 6))):
            key = int(rng.integers(0, n_parts))
            part = parts[key]
            # long tail: most lines 1-4 copies, a few lines up to 150 (small parts) or a few
            # (large parts: nobody orders 150 covers for the same day)
            q = int(min(_CAP[part.kind], math.ceil(rng.pareto(1.3) * 2)))
            q = min(q, copies - total - sum(x[1] for x in lines))
            names = mix.materials_for(part.technology)
            mat = names[int(rng.choice(len(names)))]
            if q > 0 and key not in seen:
                seen.add(key)
                lines.append((key, q, mat))
        if any(parts[k].technology == "powder" for k, _, _ in lines):
            # a powder build runs through a night (warm-up, build, cool-down): such orders
            # are due on the second day
            day, hour = 1, int(rng.integers(12, 20))
        due = start.replace(hour=hour) + timedelta(days=day)
        orders.append(OrderSpec(oid, due, prio, tuple(lines)))
        total += sum(q for _, q, _ in lines)
    cal = Calendar(shift_start=time(7), shift_end=time(19), days=(0, 1, 2, 3, 4))
    return DaySpec(parts=tuple(parts), orders=tuple(orders), printers=fleet, calendar=cal, start=start)


def make_day(*, copies: int = 500, printers: int = 12, seed: int = 0,
             start: datetime = MONDAY, small: bool = False) -> Day:
    """A generated day of about ``copies`` copies (exactly, after trimming) on ``printers`` printers.

    Parameters
    ----------
    copies
        Target number of copies (50 to 2000 are realistic).
    printers
        Fleet size (at least 3: one per technology).
    seed
        Seed of the generator; the same seed gives the same day.
    start
        Planning start (a Monday 07:00 by default).
    small
        Only clips and knobs: parts small against every plate.
    """
    spec = day_spec(copies=copies, printers=printers, seed=seed, start=start, small=small)
    prof = bench_profiles()
    fleet = tuple(Printer(name=p.name, profile=prof[BENCH_MIX.profile_of(p.role)],
                          available_from=p.available_from, materials=p.materials) for p in spec.printers)
    parts = tuple(_box_part(p) for p in spec.parts)
    out = [CopyRef(order=o.id, part=parts[key].name, copy=i + 1, kind=key, material=mat,
                   due=o.due, priority=o.priority)
           for o in spec.orders for key, q, mat in o.lines for i in range(q)]
    return Day(copies=tuple(out), parts=parts, printers=fleet, calendar=spec.calendar, start=spec.start)


# -- stand-ins for the layout stage, exact for rectangular footprints ------------------------------

def _usable(p: Printer) -> tuple[float, float]:
    """Plate grown by s/2 after the margin: the room for boxes grown by s/2 (mm)."""
    x, y, _ = p.profile.build_volume
    m, s = p.profile.margin, p.profile.spacing
    return x - 2 * m + s, y - 2 * m + s


def box_hint(parts: tuple[PartBox, ...]):
    """Capacity hint: inflated footprint area over usable plate area (powder: box volume share)."""
    def hint(p: Printer, copies) -> float:
        s = p.profile.spacing
        if p.profile.technology == "powder":
            x, y, z = p.profile.build_volume
            m = p.profile.margin
            room = (x - 2 * m + s) * (y - 2 * m + s) * (z - 2 * m + s)
            return sum((parts[c.kind].w + s) * (parts[c.kind].d + s) * (parts[c.kind].h + s)
                       for c in copies) / room
        ux, uy = _usable(p)
        corner = (4 - math.pi) * (s / 2) ** 2   # rounded corners of the exact offset
        return sum((parts[c.kind].w + s) * (parts[c.kind].d + s) - corner
                   for c in copies) / (ux * uy)
    return hint


def box_can_print(parts: tuple[PartBox, ...]):
    def can(p: Printer, c: CopyRef) -> str | None:
        b = parts[c.kind]
        ux, uy = _usable(p)
        s = p.profile.spacing
        w, d = b.w + s, b.d + s
        if not ((w <= ux and d <= uy) or (d <= ux and w <= uy)):
            return f"larger than the {p.profile.name} plate"
        if b.h > p.profile.build_volume[2] - (2 * p.profile.margin if p.profile.technology == "powder" else 0):
            return f"taller than the {p.profile.name} build volume"
        return None
    return can


@dataclass(frozen=True)
class ShelfLayout:
    """Where the boxes went: (x, y, z, turned) per copy, lower-left corners in mm."""

    places: tuple[tuple[float, float, float, bool], ...]
    build_height_mm: float


def shelf_fits(parts: tuple[PartBox, ...]):
    """A ``fits`` for the benchmark: skyline packing of the spacing-grown boxes.

    Valid by construction: grown boxes that do not overlap keep the parts
    ``spacing`` apart, and the room is the plate shrunk by the margin, grown by
    half the spacing. Powder builds stack layers of skylines; the build height
    is the sum of the layer heights.
    """
    def fits(p: Printer, copies):
        s = p.profile.spacing
        ux, uy = _usable(p)
        boxes = [(parts[c.kind].w + s, parts[c.kind].d + s, parts[c.kind].h + s) for c in copies]
        if p.profile.technology != "powder":
            pl = skyline_place(boxes, ux, uy)
            if pl is None:
                return None
            return ShelfLayout(tuple((x, y, 0.0, t) for x, y, t in pl),
                               max(parts[c.kind].h for c in copies))
        uz = p.profile.build_volume[2] - 2 * p.profile.margin + s
        left = sorted(range(len(boxes)), key=lambda k: (-boxes[k][2], k))
        z, places = 0.0, [None] * len(boxes)
        while left:
            layer_h = boxes[left[0]][2]
            if z + layer_h > uz + 1e-9:
                return None
            sh, rest = Skyline(ux, uy), []
            for k in largest_first(boxes, left):
                pos = sh.add(boxes[k][0], boxes[k][1])
                if pos is None:
                    rest.append(k)
                else:
                    places[k] = (pos[0], pos[1], z, pos[2])
            z += layer_h
            left = sorted(rest, key=lambda k: (-boxes[k][2], k))
        return ShelfLayout(tuple(places), z - s)
    return fits
