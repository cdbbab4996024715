"""Changes to plates not started that a replan may make for lateness or for waiting copies.

- :func:`ways_of`: the printers a plate may run on with its own layout (same
  profile, material set up, printer usable).
- :func:`other_profiles`: layouts of a plate nested for the other profiles that
  run its material, so the sequencing may move it there when that lowers
  weighted lateness (each layout confirmed by the usual ``fits``).
- :func:`renest_shrunk`: a plate that lost cancelled copies takes waiting copies
  of its material (pool fill with the kept copies required, or ``fits``), or for
  a build packed in a volume (powder) a lower repacking; otherwise it stays as it is.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Sequence

from packer.fleet.timemodel import plate_time
from packer.intake.identity import copy_key
from packer.intake.job import Printer
from packer.replan.sequence import Way
from packer.replan.state import PlateState

__all__ = ["ways_of", "other_profiles", "renest_shrunk"]


def ways_of(p: PlateState, printers: Sequence[Printer], usable: set) -> list[Way]:
    """Ways to run ``p`` with its own layout: its printer first, then the others of its profile."""
    by_name = {q.name: q for q in printers}
    prof = by_name[p.printer].profile.name
    names = sorted(n for n in usable if by_name[n].profile.name == prof and p.material in by_name[n].materials)
    names.sort(key=lambda n: n != p.printer)
    return [Way(n, p.machine_s, p.clear_s) for n in names]


def other_profiles(p: PlateState, printers: Sequence[Printer], usable: set, *, stats, layouts,
                   fit_s: float | None = None) -> tuple[list[Way], int, float]:
    """Ways to run ``p``'s copies on the usable printers of every other profile that can print them all,
    the number of ``fits`` calls made (one per profile tried, on its first printer by name) and the
    work they reported (s). ``fit_s``: the time each call is allowed."""
    by_name = {q.name: q for q in printers}
    own = by_name[p.printer].profile
    out, calls, work = [], 0, 0.0
    profiles = sorted({by_name[n].profile.name for n in usable} - {own.name})
    for prof_name in profiles:
        names = sorted(n for n in usable if by_name[n].profile.name == prof_name
                       and p.material in by_name[n].materials)
        if not names or by_name[names[0]].profile.technology != own.technology:
            continue
        rep = by_name[names[0]]
        if any(layouts.can_print(rep, c) is not None for c in p.copies):
            continue
        got = layouts.fits(rep, list(p.copies), seconds=fit_s)
        calls += 1
        work += got.work_s
        if got.layout is None:
            continue
        est = plate_time(rep.profile, [stats[c.kind] for c in p.copies], build_height_mm=got.layout.build_height_mm)
        out += [Way(n, est.machine_s, est.clear_s, got.layout) for n in names]
    return out, calls, work


def _waiting(p: PlateState, printer: Printer, pool, layouts, room: float) -> list:
    """Copies of the pool ``p``'s printer can take, most urgent first, up to ``room`` of the plate by the hint."""
    cands = sorted((c for c in pool if c.material == p.material and layouts.can_print(printer, c) is None),
                   key=lambda c: (c.due, -c.priority * (1 + c.boost), copy_key(c)))
    out = []
    for c in cands:
        if layouts.capacity(printer, list(p.copies) + out + [c]) > room:
            break
        out.append(c)
    return out


def renest_shrunk(plates: Sequence[PlateState], pool: Sequence, *, printers: Sequence[Printer], stats,
                  layouts) -> tuple[list[PlateState], list, list[str]]:
    """Plates that lost cancelled copies, nested again where that takes waiting copies (or, for a
    build packed in a volume, lowers it); the others as they are.

    Returns
    -------
    (plates, pool left, notes)
    """
    by_name = {q.name: q for q in printers}
    pool = list(pool)
    out, notes = [], []
    for p in plates:
        if not p.origin.startswith("shrunk:"):
            out.append(p)
            continue
        src, printer = p.origin.split(":", 1)[1], by_name[p.printer]
        traits = layouts.traits(printer)
        if traits.packs_volume:
            layout = layouts.fits(printer, list(p.copies)).layout
            est = plate_time(printer.profile, [stats[c.kind] for c in p.copies],
                             build_height_mm=layout.build_height_mm) if layout else None
            if est is not None and est.machine_s < p.machine_s - 60:
                out.append(replace(p, layout=layout, machine_s=est.machine_s, origin=f"renested:{src}"))
                notes.append(f"{src} lost cancelled copies and was packed again: "
                             f"{(p.machine_s - est.machine_s) / 60:.0f} min shorter")
            else:
                out.append(p)
            continue
        extra = _waiting(p, printer, pool, layouts, 1.3 if traits.pool_fill else 1.0)
        got = _place(p, printer, extra, layouts, traits.pool_fill)
        if got is None:
            out.append(p)
            continue
        layout, copies = got
        taken = {copy_key(c) for c in copies} - {copy_key(c) for c in p.copies}
        pool = [c for c in pool if copy_key(c) not in taken]
        est = plate_time(printer.profile, [stats[c.kind] for c in copies])
        out.append(replace(p, copies=tuple(copies), layout=layout, machine_s=est.machine_s, origin=f"renested:{src}"))
        notes.append(f"{src} lost cancelled copies and was nested again with {len(taken)} waiting copies")
    return out, pool, notes


def _place(p: PlateState, printer: Printer, extra: list, layouts, pool_fill: bool):
    """(layout, copies) of ``p``'s copies with as many of ``extra`` as fit (at least one), or None."""
    if not extra:
        return None
    cands = list(p.copies) + extra
    if pool_fill:
        res = layouts.fill(printer, cands, must=len(p.copies), seconds=1.0 + 0.08 * len(cands))
        if res.layout is None or len(res.chosen) <= len(p.copies):
            return None
        return res.layout, [cands[i] for i in res.chosen]
    n = len(extra)
    while n >= 1:
        layout = layouts.fits(printer, cands[:len(p.copies) + n]).layout
        if layout is not None:
            return layout, cands[:len(p.copies) + n]
        n //= 2
    return None
