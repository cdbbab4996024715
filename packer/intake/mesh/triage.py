"""Triage of mesh defects: what makes a part unusable, what only calls for caution.

*Unusable* (the part is refused, with the reason): an unreadable or truncated
file, no triangles, coordinates that are not finite numbers (or beyond
:data:`MAX_COORDINATE`), no extent along
some axis, faces pointing at vertices that do not exist (the readers refuse
those with the element named).

*Printable with caution* (planned, and reported with what packer did about it):
open edges, edges shared by more than two triangles, inconsistent or inward
winding, several shells, overlapping shells, degenerate triangles, a header
that disagrees with the content, an implausible size for the unit. A job or a
line with ``meshes: strict`` refuses these too.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from packer.intake.mesh.topology import Topology
from packer.intake.mesh.volume import METHODS, Volume

__all__ = ["Defect", "UNUSABLE", "CAUTION", "unusable_defects", "caution_defects"]

UNUSABLE, CAUTION = "unusable", "caution"
#: Largest coordinate magnitude accepted, in the file's unit: a billion millimetres is a thousand
#: kilometres, so anything beyond is a broken file (and would overflow the measures).
MAX_COORDINATE = 1e9


@dataclass(frozen=True)
class Defect:
    """One kind of defect found in a mesh.

    Attributes
    ----------
    kind
        Short name, e.g. ``"open edges"``.
    severity
        ``"unusable"`` or ``"caution"``.
    count
        How many (edges, triangles, shells, ...); 1 for a yes/no defect.
    detail
        What was found, in words.
    action
        What packer did about it.
    """

    kind: str
    severity: str
    count: int
    detail: str
    action: str

    def __str__(self) -> str:
        return f"{self.kind}: {self.detail}" + (f" ({self.action})" if self.action else "")


def unusable_defects(vertices: np.ndarray, faces: np.ndarray) -> list[Defect]:
    """Defects that make the triangles unusable (empty list: usable)."""
    if len(faces) == 0:
        return [Defect("no triangles", UNUSABLE, 1, "the file holds no triangles", "refused")]
    used = vertices[np.unique(faces)]
    bad = ~np.isfinite(used).all(axis=1)
    if bad.any():
        return [Defect("coordinates not finite", UNUSABLE, int(bad.sum()),
                       f"{int(bad.sum())} vertices have coordinates that are not finite numbers", "refused")]
    huge = np.abs(used).max(axis=1) > MAX_COORDINATE
    if huge.any():
        return [Defect("coordinates out of range", UNUSABLE, int(huge.sum()),
                       f"{int(huge.sum())} vertices lie farther than {MAX_COORDINATE:g} units from the origin",
                       "refused")]
    extent = np.ptp(used, axis=0)
    flat = [a for a, e in zip("xyz", extent) if not e > 0]
    if flat:
        return [Defect("zero extent", UNUSABLE, len(flat),
                       f"the triangles have no extent along {', '.join(flat)} (flat or a point)", "refused")]
    return []


def _n(count: int, noun: str, plural: str | None = None) -> str:
    return f"{count} {noun}" if count == 1 else f"{count} {plural or noun + 's'}"


def caution_defects(topo: Topology, volume: Volume, *, notes=(), size_warning: str | None = None) -> list[Defect]:
    """Defects a part can be planned with, each with what packer did about it."""
    out = [Defect("file content", CAUTION, 1, note.split(": ", 1)[-1], "read as described") for note in notes]
    measured = "volume by " + METHODS[volume.method]
    if topo.open_edges:
        out.append(Defect("open edges", CAUTION, topo.open_edges,
                          _n(topo.open_edges, "edge") + " used by one triangle only (holes or seams)",
                          f"{measured}; plate file keeps the triangles as they are"))
    if topo.crowded_edges:
        out.append(Defect("non-manifold edges", CAUTION, topo.crowded_edges,
                          _n(topo.crowded_edges, "edge") + " shared by more than two triangles",
                          "measured as touching shells; plate file unchanged"))
    if topo.flipped:
        out.append(Defect("inconsistent winding", CAUTION, topo.flipped,
                          _n(topo.flipped, "triangle") + " wound against their neighbours",
                          "turned for measuring only; plate file unchanged"))
    if topo.inward:
        out.append(Defect("inward winding", CAUTION, topo.inward,
                          _n(topo.inward, "shell") + " with triangles facing inward",
                          "turned outward for measuring only; plate file unchanged"))
    if topo.shells > 1:
        out.append(Defect("several shells", CAUTION, topo.shells,
                          _n(topo.shells, "separate shell") + " in one file", "planned together as one part"))
    if volume.shared_mm3 > 0:
        out.append(Defect("overlapping shells", CAUTION, 1,
                          f"shells overlap, sharing {volume.shared_mm3:.4g} mm^3",
                          "shared volume counted once in volume, mass and time"))
    if topo.degenerate:
        out.append(Defect("degenerate triangles", CAUTION, topo.degenerate,
                          _n(topo.degenerate, "triangle") + " without area", "ignored for measuring"))
    if size_warning:
        out.append(Defect("implausible size", CAUTION, 1, size_warning.split(": ", 1)[-1],
                          "not rescaled"))
    return out
