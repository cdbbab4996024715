"""Closed-solid checks of a mesh: open and crowded edges, winding, signed volume, genus.

:func:`check_mesh` reports whether a mesh is a closed, consistently oriented
solid of positive volume (a :class:`MeshCheck`): the self-check of every part
the generator makes (:func:`packer.bench.partgen.make_part`) and of meshes in
the tests. Inverted meshes are reported, never repaired. (Intake itself finds
the defects of a customer's mesh in :mod:`packer.intake.mesh.topology`.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import trimesh

__all__ = ["MeshCheck", "check_mesh"]


@dataclass(frozen=True)
class MeshCheck:
    """What :func:`check_mesh` found.

    Attributes
    ----------
    watertight
        Every edge is shared by exactly two triangles.
    winding_consistent
        Every shared edge is traversed in opposite directions by its two triangles.
    volume
        Signed enclosed volume, mm^3 (negative: the triangles face inward);
        meaningful only for a closed, consistently oriented mesh.
    euler
        Euler characteristic V - E + F (referenced vertices, unique edges, triangles).
    genus
        Total genus ``(2 * bodies - euler) / 2`` of a closed orientable mesh, else None.
    bodies
        Edge-connected pieces.
    problems
        Human-readable reasons the mesh is unusable; empty when it is fine.
    """

    watertight: bool
    winding_consistent: bool
    volume: float
    euler: int
    genus: int | None
    bodies: int
    problems: tuple[str, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


def _signed_volume(vertices: np.ndarray, faces: np.ndarray) -> float:
    """Signed volume (1/6) sum v0 . (v1 x v2) over the triangles (divergence theorem), mm^3.

    Vertices (n, 3) are first centred on their mean, which leaves the volume of a
    closed mesh unchanged and keeps the products small.
    """
    v = vertices - vertices.mean(axis=0)
    t = v[faces]
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def check_mesh(mesh: trimesh.Trimesh) -> MeshCheck:
    """Check that a mesh is a closed, consistently oriented solid of positive volume.

    Parameters
    ----------
    mesh
        Vertices (n, 3) float, mm; faces (m, 3) int.

    Returns
    -------
    MeshCheck
        ``problems`` names each defect: open edges, edges shared by more than
        two triangles, inconsistent orientation, inside-out or empty volume.
        Inverted meshes are reported, not repaired.
    """
    faces = np.asarray(mesh.faces)
    if len(faces) == 0:
        return MeshCheck(False, False, 0.0, 0, None, 0, ("mesh has no triangles",))
    edges = np.sort(faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2), axis=1)
    _, counts = np.unique(edges, axis=0, return_counts=True)
    n_open = int(np.sum(counts == 1))
    n_crowded = int(np.sum(counts > 2))
    euler = int(len(np.unique(faces)) - len(counts) + len(faces))
    bodies = int(len(np.unique(trimesh.graph.connected_component_labels(
        mesh.face_adjacency, node_count=len(faces)))))
    watertight = bool(n_open == 0 and n_crowded == 0)
    winding = bool(mesh.is_winding_consistent) if watertight else False
    volume = _signed_volume(np.asarray(mesh.vertices, dtype=float), faces)

    problems = []
    if n_open:
        problems.append(f"mesh is not closed: {_count(n_open, 'open edge')}")
    if n_crowded:
        problems.append(f"mesh is not manifold: {_count(n_crowded, 'edge')} shared by more than two triangles")
    if watertight and not winding:
        problems.append("triangles are not consistently oriented: neighbours disagree on which side is outside")
    genus = None
    if watertight and winding:
        scale = float(np.ptp(mesh.vertices, axis=0).max()) or 1.0
        if volume < -1e-9 * scale ** 3:
            problems.append(f"mesh is inside out: its triangles face inward (signed volume {volume:.6g} mm^3)")
        elif volume <= 1e-9 * scale ** 3:
            problems.append(f"mesh encloses no volume ({volume:.3g} mm^3)")
        twice = 2 * bodies - euler
        if twice >= 0 and twice % 2 == 0:
            genus = twice // 2
    return MeshCheck(watertight=watertight, winding_consistent=winding, volume=volume, euler=euler,
                     genus=genus, bodies=bodies, problems=tuple(problems))
