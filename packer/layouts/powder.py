"""Powder builds: the layout service over the 3D packer.

A build confirmation packs the copies' meshes (:func:`packer.intake.parts.powder_mesh`)
into one build volume with :func:`packer.pack3d.pack_builds`, which checks every
build exactly before it returns it. The work of a call is a fixed charge by the
number of bodies (the voxel packing and the exact pairwise checks grow faster
than linearly), fitted like the flat plates' charges.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from packer.intake.parts import powder_mesh
from packer.layouts import Attempt, LayoutPart, LayoutTraits, PlateLayout, prefix_fill
from packer.layouts.flat import FIT_CALL_S, plate_rule
from packer.pack3d import Body, pack_builds
from packer.pack3d.orient import axis_rotations

__all__ = ["PowderLayouts", "POWDER_VARIANTS", "POWDER_BODY_S", "POWDER_PAIR_S", "POWDER_FLAT_ORIENTATIONS"]

#: Packing variants of a powder build confirmation (fixed, so the answer is deterministic),
#: and its charge: ``FIT_CALL_S + POWDER_BODY_S * n + POWDER_PAIR_S * n**2`` for n bodies.
POWDER_VARIANTS, POWDER_BODY_S, POWDER_PAIR_S = 1, 0.025, 0.00001
#: Orientations a copy may take in a powder build confirmation: the flattest of the 24 axis
#: rotations. Builds in a day plan are short (their contents are cut by due times), so
#: lying flat is what counts; on a 185-body build of the generated day this gave the same
#: height as all 24 in a third of the time.
POWDER_FLAT_ORIENTATIONS = 4


class PowderLayouts:
    """Layouts of powder builds by the 3D packer (same parameters as :class:`~packer.layouts.flat.FlatLayouts`)."""

    TRAITS = LayoutTraits(packs_volume=True, pool_fill=False)

    def __init__(self, kinds: Sequence[LayoutPart], rules, *, seed: int) -> None:
        self.kinds, self.rules, self.seed = kinds, rules, seed
        self.flat: dict = {}        # kind -> flattest rotations

    def handles(self, profile) -> bool:
        return profile.technology == "powder"

    def traits(self, printer) -> LayoutTraits:
        return self.TRAITS

    def can_print(self, printer, ref) -> str | None:
        if ref.material not in printer.materials:
            return f"{printer.name} does not run {ref.material}"
        kind, rule = self.kinds[ref.kind], plate_rule(self.rules, printer)
        inner = np.array(printer.profile.build_volume, dtype=float) - 2 * rule.margin
        dims = np.asarray(kind.part.mesh.extents)
        if kind.locked:
            fits = all(dims <= inner) or all(dims[[1, 0, 2]] <= inner)
        else:
            fits = all(np.sort(dims) <= np.sort(inner))
        return None if fits else f"larger than the build volume of {printer.name} inside the margin"

    def capacity(self, printer, refs: Sequence) -> float:
        """Spacing-grown bounding boxes over the build volume inside the margin."""
        rule = plate_rule(self.rules, printer)
        usable = float(np.prod(np.array(printer.profile.build_volume) - 2 * rule.margin))
        need = sum(float(np.prod(np.asarray(self.kinds[r.kind].part.mesh.extents) + rule.spacing)) for r in refs)
        return need / usable

    def fits(self, printer, refs: Sequence, *, seconds: float | None = None) -> Attempt:
        """One build of every copy, or none; charged by the number of bodies either way."""
        rule = plate_rule(self.rules, printer)
        budget = 3 * min(8.0, 1.0 + 0.08 * len(refs))
        if seconds is not None:
            budget = min(budget, seconds)
        bodies = [Body(powder_mesh(self.kinds[r.kind].part), self._rotations(r.kind)) for r in refs]
        result = pack_builds(bodies, volume=tuple(printer.profile.build_volume), spacing=rule.spacing,
                             margin=rule.margin, seconds=budget, seed=self.seed, variants=POWDER_VARIANTS)
        work = FIT_CALL_S + POWDER_BODY_S * len(refs) + POWDER_PAIR_S * len(refs) ** 2
        if len(result.builds) != 1 or result.unplaced:
            return Attempt(None, (), work)
        return Attempt(self._plate(printer, result.builds[0], refs), tuple(range(len(refs))), work)

    def fill(self, printer, refs: Sequence, *, must: int, seconds: float) -> Attempt:
        """The longest prefix of ``refs`` (at least ``must``) that packs: every copy first,
        then halving the optional ones. A build picks no copies from a pool, so its
        ``pool_fill`` trait is False and the planner bisects with :meth:`fits` itself."""
        return prefix_fill(self, printer, refs, must=must, seconds=seconds)

    def _rotations(self, kind: int):
        """Orientations of a copy in powder builds: as loaded when locked, else the flattest."""
        if self.kinds[kind].locked:
            return "locked"
        if kind not in self.flat:
            rots = axis_rotations()
            verts = self.kinds[kind].part.mesh.vertices
            z = np.array([np.ptp(verts @ r[2]) for r in rots])
            order = np.argsort(np.round(z, 6), kind="stable")[:POWDER_FLAT_ORIENTATIONS]
            self.flat[kind] = rots[order]
        return self.flat[kind]

    def _plate(self, printer, build, refs: Sequence) -> PlateLayout:
        """The build as the planner reads it: moves from the source meshes, height, volume density."""
        parts = [self.kinds[r.kind].part for r in refs]
        moves = {bp.index: np.asarray(bp.transform, dtype=float) for bp in build.placements}
        height = build.height
        x, y, _ = printer.profile.build_volume
        volume = sum(p.volume for p in parts)
        return PlateLayout(transforms=tuple(moves[k] @ np.asarray(p.to_print) for k, p in enumerate(parts)),
                           build_height_mm=height,
                           utilization=volume / (x * y * height) if height else 0.0, detail=build)
