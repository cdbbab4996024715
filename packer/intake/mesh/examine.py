"""Examine one mesh file: read it, convert its unit, triage its defects, measure its volume.

:func:`examine` is the part of intake that knows nothing of orientation or
plates: it returns the measuring copy of the mesh (millimetres, equal vertices
merged, each shell wound outward) and an :class:`Examination` saying what the
file is and what is wrong with it. Unusable files raise.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import RawMesh, unusable
from packer.intake.mesh.read import read_mesh
from packer.intake.mesh.topology import Topology, topology_of
from packer.intake.mesh.triage import CAUTION, Defect, caution_defects, unusable_defects
from packer.intake.mesh.units import LINE_UNITS, implausible_size, mm_per_unit
from packer.intake.mesh.volume import Volume, volume_of

__all__ = ["Examination", "examine", "merged"]


@dataclass(frozen=True, eq=False)
class Examination:
    """What a mesh file is and what is wrong with it.

    Attributes
    ----------
    path, format
        The file and its format (``"STL (binary)"``, ``"3MF"``, ...).
    unit
        The unit its numbers were read in (``"mm"``, ``"inch"``, 3MF names as written).
    unit_source
        Where the unit came from: ``"3MF unit attribute"``, ``"units key"`` or ``"default"``.
    mm_per_unit
        The scale applied to reach millimetres.
    triangles
        Triangles in the file.
    topology
        Pieces, shells, edge counts (see :class:`~packer.intake.mesh.topology.Topology`).
    volume
        Enclosed volume and its method, mm^3.
    size_mm
        (3,) float: extents as modelled, mm.
    defects
        Every caution-class defect (unusable files raise instead).
    """

    path: Path
    format: str
    unit: str
    unit_source: str
    mm_per_unit: float
    triangles: int
    topology: Topology
    volume: Volume
    size_mm: np.ndarray
    defects: tuple[Defect, ...] = field(default=())

    @property
    def cautions(self) -> tuple[Defect, ...]:
        return tuple(d for d in self.defects if d.severity == CAUTION)


def merged(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Equal vertices merged (exact equality), faces re-indexed."""
    if len(vertices) == 0:
        return vertices, faces
    uniq, inverse = np.unique(vertices, axis=0, return_inverse=True)
    return uniq, inverse.reshape(-1)[faces]


def _unit(raw: RawMesh, units: str | None) -> tuple[str, str, list[str]]:
    notes = []
    if raw.unit is not None:
        if units is not None and LINE_UNITS.get(units) != mm_per_unit(raw.unit):
            notes.append(f"{raw.path}: the line says units: {units} but the 3MF file declares "
                         f"unit=\"{raw.unit}\"; the file's unit is used")
        return raw.unit, "3MF unit attribute", notes
    if units is not None:
        return units, "units key", notes
    return "mm", "default", notes


def examine(path: str | Path, *, units: str | None = None, limits: Limits | None = None):
    """Read and examine a mesh file.

    Parameters
    ----------
    path
        STL, OBJ, PLY or 3MF.
    units
        A key of :data:`~packer.intake.mesh.units.LINE_UNITS` for files without a unit;
        None: millimetres (a 3MF file's own unit always wins).
    limits
        Reader limits.

    Returns
    -------
    (vertices (n, 3) float mm, faces (m, 3) int, Examination)
        The measuring copy: equal vertices merged, repeated-corner triangles
        dropped, shells wound outward.

    Raises
    ------
    InputError
        Missing file, unknown format.
    GeometryError
        An unusable file; the message names the file and the reason.
    """
    raw = read_mesh(path, limits=limits)
    bad = unusable_defects(raw.vertices, raw.faces)
    if bad:
        raise unusable(raw.path, "; ".join(d.detail for d in bad))
    unit, source, notes = _unit(raw, units)
    scale = mm_per_unit(unit)
    vertices, faces = merged(raw.vertices * scale, raw.faces)
    topo = topology_of(vertices, faces)
    if len(topo.faces) == 0:
        raise unusable(raw.path, "every triangle has a repeated corner: no triangle has an area")
    volume = volume_of(vertices, topo)
    size = np.ptp(vertices[np.unique(topo.faces)], axis=0)
    if not volume.mm3 > 1e-9 * float(size.max()) ** 3:
        raise unusable(raw.path, f"the triangles enclose no volume ({volume.mm3:.3g} mm^3 by the "
                                 f"{volume.method} method): a surface, not a solid")
    key = "the 3MF unit attribute" if source == "3MF unit attribute" else "units"
    warning = implausible_size(float(size.max()), unit=unit, key=key)
    defects = caution_defects(topo, volume, notes=(*raw.notes, *notes), size_warning=warning)
    exam = Examination(path=raw.path, format=raw.format, unit=unit, unit_source=source, mm_per_unit=scale,
                       triangles=len(raw.faces), topology=topo, volume=volume, size_mm=size,
                       defects=tuple(defects))
    return vertices, topo.faces, exam
