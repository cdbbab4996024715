"""Free-nesting reference: the plates a planner with no deadlines would get.

For a planned job, the placed copies of each technology and material are nested
together, with no due times, by the same engines the plan uses (the nesting engine's
``nest_plates`` for filament and resin, the 3D packer for powder), on the largest
plate of that technology that runs the material, with the job's spacing and margin.
The whole plan's budget is shared among the groups by their number of copies, so the
reference gets the same total budget as the plan. The planner's own cost is then
``plan plates / free-nesting plates`` per day: how many plates the due times, the
printers' calendars and the time budget cost over nesting everything at once.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np

from packer.intake.footprint import nest_region
from packer.layouts.nested import layout_plates
from packer.pack3d import Body, pack_builds
from packer.pack3d.orient import axis_rotations
from packer.intake.parts import powder_mesh
from packer.layouts.flat import plate_rule
from packer.layouts.powder import POWDER_FLAT_ORIENTATIONS, POWDER_VARIANTS
from packer.pipeline import expand_copies

__all__ = ["free_nesting_plates"]


def _largest(job, technology: str, material: str):
    """The printer of ``technology`` running ``material`` with the most usable plate (or volume)."""
    best, best_size = None, -1.0
    for printer in job.fleet:
        prof = printer.profile
        if prof.technology != technology or material not in printer.materials:
            continue
        rule = plate_rule(job.rules, printer)
        if technology == "powder":
            size = float(np.prod(np.array(prof.build_volume) - 2 * rule.margin))
        else:
            size = nest_region(prof, spacing=rule.spacing, margin=rule.margin)[0].area
        if size > best_size:
            best, best_size = printer, size
    return best


def _flattest(part) -> np.ndarray:
    rots = axis_rotations()
    z = np.array([np.ptp(part.mesh.vertices @ r[2]) for r in rots])
    return rots[np.argsort(np.round(z, 6), kind="stable")[:POWDER_FLAT_ORIENTATIONS]]


def free_nesting_plates(outcome, *, seconds: float, seed: int = 0) -> dict[str, int]:
    """Plates per ``technology/material`` when every placed copy of the group is nested at once.

    Parameters
    ----------
    outcome : packer.pipeline.Outcome
        A planned job (its plan says which copies were placed and on what technology).
    seconds : float
        Total budget (s), shared among the groups by their number of copies.
    seed : int

    Returns
    -------
    dict
        ``{"filament/PLA": plates, ...}``; a group whose copies do not all fit its largest
        plate counts the copies left over as one plate each (never fewer plates than copies
        the engine could not place).
    """
    job, parts, plan = outcome.job, outcome.parts, outcome.plan
    placed = {(c.order, c.part, c.copy): p.technology for p in plan.plates for c in p.items}
    copies, _, _ = expand_copies(job, parts, {})
    groups: dict = defaultdict(list)
    for c in copies:
        tech = placed.get((c.order, c.part, c.copy))
        if tech is not None:
            groups[(tech, c.material)].append(c)
    total = sum(len(v) for v in groups.values()) or 1
    out = {}
    for (tech, material), group in sorted(groups.items()):
        share = seconds * len(group) / total
        printer = _largest(job, tech, material)
        rule = plate_rule(job.rules, printer)
        if tech == "powder":
            bodies = [Body(powder_mesh(parts[c.kind.part]),
                           "locked" if c.kind.part.locked else _flattest(parts[c.kind.part])) for c in group]
            res = pack_builds(bodies, volume=tuple(printer.profile.build_volume), spacing=rule.spacing,
                              margin=rule.margin, seconds=share, seed=seed, variants=POWDER_VARIANTS)
            out[f"{tech}/{material}"] = len(res.builds) + len(res.unplaced)
        else:
            layouts, unplaced = layout_plates([parts[c.kind.part].footprint for c in group],
                                              [c.kind.rotations for c in group], rule, seconds=share, seed=seed)
            out[f"{tech}/{material}"] = len(layouts) + len(unplaced)
    return out
