"""Repair on request (``repair: true``): fill small holes, fix winding, unite shells, drop degenerates.

Without the key nothing here runs and the plate files carry the customer's own
triangles. With it, :func:`repair_mesh` turns the measuring copy of a mesh
(millimetres, equal vertices merged, see :func:`packer.intake.mesh.examine.examine`)
into a new mesh, in the file's frame and in millimetres:

1. **Winding.** Each piece is wound as its majority and turned outward (cavities
   inward): the walk of :mod:`packer.intake.mesh.topology`.
2. **Small holes filled.** Every loop of open edges is cut into simple loops; a
   loop is *small* and filled when all of these hold (thresholds of our own
   choosing, no published source): at most :data:`HOLE_EDGES` edges; its points
   lie within :data:`HOLE_FLATNESS` (10 %) of its largest extent from their
   best-fit plane; the patch covers at most :data:`HOLE_SHARE` (a quarter) of the
   rest of the surface, so a cube missing one whole face (a fifth) is closed
   while a bowl is not turned into a box. The patch is the constrained Delaunay
   triangulation of the loop in that plane (shapely), or, where the projected loop
   crosses itself and has at most :data:`FAN_EDGES` edges (a crack), a fan from
   the loop's centre. Larger holes stay open and
   are named in :attr:`Repair.left`.
3. **Shells united.** Edges shared by more than two triangles (shells touching
   along an edge) are untangled: around such an edge the triangles are sorted by
   angle and each is paired with its neighbour across a solid sector, and
   vertices are split so each shell is its own closed surface. Every closed
   shell goes to manifold3d (a maintained library of exact mesh booleans, which
   also drops triangles without area), and the union of the solids minus the
   cavities is the repaired mesh. A shell manifold3d refuses (still open,
   or not separable) is kept as it is, and named in :attr:`Repair.left`.
4. **Measured again.** Vertices are rounded to 1e-5 mm (what packer's 3MF
   files carry; an edge rounding makes of no length is collapsed, :func:`weld`), the result's open, crowded and degenerate counts and shells are
   counted on equal vertices merged (what any reader sees), ``closed`` is checked
   on the mesh's own vertex indices (what a 3MF file keeps: shells that touch
   only along an edge stay touching there, with their own copies of the edge's
   vertices), and the volume is measured again by :func:`~packer.intake.mesh.volume.volume_of`.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from packer.intake.mesh.holes import FAN_EDGES, HOLE_EDGES, HOLE_FLATNESS, HOLE_SHARE, fill_holes
from packer.intake.mesh.shells import closed_as_indexed, unite_shells
from packer.intake.mesh.topology import Topology, topology_of
from packer.intake.mesh.volume import Volume, volume_of

__all__ = ["MeshCounts", "Repair", "repair_mesh", "counts_of", "closed_as_indexed", "repaired_name",
           "repaired_names", "HOLE_EDGES", "HOLE_FLATNESS", "HOLE_SHARE", "FAN_EDGES", "DECIMALS"]

#: Decimals (mm) of the repaired vertices: the precision of packer's 3MF files (plate files and
#: repaired meshes alike, so both show the same vertices as the same).
DECIMALS = 5


@dataclass(frozen=True)
class MeshCounts:
    """What a mesh's edges and volume say, before or after repair.

    Attributes
    ----------
    triangles, open_edges, crowded_edges, shells, degenerate
        Counted with equal vertices merged (crowded: edges of more than two triangles).
    flipped, inward
        Triangles wound against their neighbours; shells facing inward.
    closed
        Every edge of the mesh, by its own vertex indices, is used by exactly two
        triangles running it in opposite directions.
    volume_mm3, volume_method
        The volume and the method of :mod:`packer.intake.mesh.volume` that gave it.
    """

    triangles: int
    open_edges: int
    crowded_edges: int
    shells: int
    degenerate: int
    flipped: int
    inward: int
    closed: bool
    volume_mm3: float
    volume_method: str


@dataclass(frozen=True, eq=False)
class Repair:
    """A repaired mesh and what changed.

    Attributes
    ----------
    vertices
        (n, 3) float64, read-only: mm, in the file's frame, rounded to :data:`DECIMALS`.
    faces
        (m, 3) int64, read-only.
    before, after
        :class:`MeshCounts` of the customer's mesh and of the repaired one.
    holes_filled
        Holes closed with a patch.
    united
        Shells that went into the union.
    changed
        What repair did, in words.
    left
        What it could not do, in words (empty: closed and consistently wound).
    """

    vertices: np.ndarray
    faces: np.ndarray
    before: MeshCounts
    after: MeshCounts
    holes_filled: int = 0
    united: int = 0
    changed: tuple[str, ...] = field(default=())
    left: tuple[str, ...] = field(default=())


def counts_of(vertices: np.ndarray, faces: np.ndarray, *, topo: Topology | None = None,
              volume: Volume | None = None) -> MeshCounts:
    """:class:`MeshCounts` of a mesh (topology and volume measured unless given)."""
    if topo is None:
        uniq, inverse = np.unique(vertices, axis=0, return_inverse=True)
        topo = topology_of(uniq, inverse.reshape(-1)[faces])
        if volume is None:
            volume = volume_of(uniq, topo)
    return MeshCounts(triangles=len(faces), open_edges=topo.open_edges, crowded_edges=topo.crowded_edges,
                      shells=topo.shells, degenerate=topo.degenerate, flipped=topo.flipped, inward=topo.inward,
                      closed=closed_as_indexed(faces), volume_mm3=float(volume.mm3), volume_method=volume.method)


def repaired_name(stem: str, *, tag: str = "") -> str:
    """The file a repaired mesh gets in a plan's folder: ``meshes/<stem>[-<tag>]-repaired.3mf``.

    ``stem`` is made file-system safe; ``tag`` tells apart files of the same stem.
    """
    safe = re.sub(r"[^A-Za-z0-9._-]+", "-", stem).strip(".-_")[:80] or "mesh"
    return f"meshes/{safe}{'-' + tag if tag else ''}-repaired.3mf"


def repaired_names(paths, base: Path) -> dict[Path, Path]:
    """A repaired mesh's file (relative to the plan's folder) for each source mesh path.

    Sources that share a stem get 8 hex digits of the SHA-256 of their path relative to
    ``base`` (the job file's folder), so names never depend on where the checkout lies.
    """
    paths = sorted(set(paths), key=str)
    stems: dict[str, int] = {}
    for p in paths:
        stems[p.stem] = stems.get(p.stem, 0) + 1
    out = {}
    for p in paths:
        tag = ""
        if stems[p.stem] > 1:
            try:
                rel = p.resolve().relative_to(Path(base).resolve()).as_posix()
            except ValueError:
                rel = p.name + str(paths.index(p))
            tag = hashlib.sha256(rel.encode("utf-8", "surrogatepass")).hexdigest()[:8]
        out[p] = Path(repaired_name(p.stem, tag=tag))
    return out


# --- the whole repair -------------------------------------------------------------------

def _needs_repair(topo: Topology, volume: Volume) -> bool:
    return bool(topo.open_edges or topo.crowded_edges or topo.flipped or topo.inward or topo.degenerate
                or topo.shells > 1 or volume.shared_mm3 > 0)


def repair_mesh(vertices: np.ndarray, topo: Topology, volume: Volume) -> Repair:
    """Repair the measuring copy of a mesh (module notes).

    Parameters
    ----------
    vertices : (n, 3) float, mm, equal vertices merged
    topo, volume
        The mesh's topology (its ``faces`` wound piece by piece) and volume, from
        :func:`~packer.intake.mesh.examine.examine`.

    Returns
    -------
    Repair
        The repaired mesh (the triangles of ``topo.faces`` unchanged when nothing is
        wrong) with the counts before and after.
    """
    before = counts_of(vertices, topo.faces, topo=topo, volume=volume)
    before = MeshCounts(**{**before.__dict__, "closed": bool(topo.balanced and not topo.open_edges
                                                              and not topo.crowded_edges)})
    if not _needs_repair(topo, volume):
        v, f = _frozen(vertices, topo.faces)
        return Repair(v, f, before, before, changed=("nothing to repair",))
    changed = []
    if topo.flipped or topo.inward:
        changed.append(f"winding made consistent ({topo.flipped} triangles turned, {topo.inward} shells turned "
                       "outward)")
    v, f, filled, left = fill_holes(vertices, topo.faces)
    if filled:
        changed.append(f"{filled} hole{'s' if filled > 1 else ''} filled")
    rewound = topology_of(v, f)                      # the patches joined their pieces: wind again
    v, f, united, kept = unite_shells(v, rewound.faces, rewound.piece)
    left += kept
    if united:
        changed.append(f"{united} shell{'s' if united > 1 else ''} rebuilt as one solid through manifold3d "
                       "(union, cavities subtracted, simplified within 1e-4 mm, triangles without area dropped or "
                       "flipped away)")
    v, f = _frozen(*weld(v, f))
    after = counts_of(v, f)
    measured = volume_of(v, topology_of(v, f))      # on the mesh's own indices: shells that touch stay apart
    after = MeshCounts(**{**after.__dict__, "volume_mm3": float(measured.mm3), "volume_method": measured.method})
    if not after.closed and not left:
        left.append("the result is not closed")
    if after.crowded_edges:
        left.append(f"{after.crowded_edges} edges where shells only touch (the solid meets itself along an "
                    "edge): each shell keeps its own copy of the edge's vertices")
    if after.degenerate:
        left.append(f"{after.degenerate} triangles without area left (slivers where shells' faces cross or "
                    "meet, which neither an edge collapse within 1e-4 mm nor an edge flip removes; they add "
                    "no volume)")
    return Repair(v, f, before, after, holes_filled=filled, united=united, changed=tuple(changed),
                  left=tuple(left))


def weld(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Vertices rounded to :data:`DECIMALS`; an edge whose ends then coincide is collapsed (its
    two triangles dropped, its ends made one vertex), so rounding leaves no triangle with a
    repeated corner. When a collapse would open the mesh, the rounded mesh is kept uncollapsed."""
    v = np.round(vertices, DECIMALS) + 0.0
    he = faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    short = np.all(v[he[:, 0]] == v[he[:, 1]], axis=1)
    if not short.any():
        return v, faces
    n = len(v)
    graph = sparse.coo_matrix((np.ones(int(short.sum())), (he[short, 0], he[short, 1])), shape=(n, n))
    _, label = csgraph.connected_components(graph, directed=False)
    g = label[faces]
    g = g[(g[:, 0] != g[:, 1]) & (g[:, 1] != g[:, 2]) & (g[:, 2] != g[:, 0])]
    if closed_as_indexed(faces) and not closed_as_indexed(g):
        return v, faces
    first = np.zeros(label.max() + 1, dtype=np.int64)
    first[label[::-1]] = np.arange(n)[::-1]
    used, inverse = np.unique(g, return_inverse=True)
    return v[first[used]], inverse.reshape(-1, 3)


def _frozen(vertices, faces):
    v = np.ascontiguousarray(vertices, dtype=np.float64)
    f = np.ascontiguousarray(faces, dtype=np.int64)
    v.setflags(write=False)
    f.setflags(write=False)
    return v, f
