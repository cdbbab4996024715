"""Edges, shells and orientation of a triangle soup, whatever its defects.

Two triangles are *neighbours* when they share an edge that exactly two
triangles use; a *piece* is a set of triangles connected through neighbours.
Within a piece the triangles are made to agree on which side is outside (a
breadth-first walk turns each triangle whose shared edge runs the same way as
its neighbour's; the majority's winding is kept), and a closed piece whose
signed volume is negative is turned outward unless it lies inside another
piece (a cavity). A *shell*, as reported, is a set of triangles connected
through any shared edge (a support touching its part along an edge is one
shell with it). None of this changes the customer's file: it gives the
measures a consistently wound copy.

The whole mesh is *balanced* when every edge is run as often one way as the
other: then the triangles bound a solid (possibly with shells overlapping) and
the divergence theorem gives the integral of the winding number exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from packer.intake.mesh.winding import bfs_flips, winding_numbers

__all__ = ["Topology", "topology_of", "piece_volumes"]


@dataclass(frozen=True, eq=False)
class Topology:
    """What the edges say about a mesh.

    Attributes
    ----------
    faces
        (m, 3) int64: the triangles with repeated corners dropped, each piece
        consistently wound and turned outward (cavities inward).
    piece
        (m,) int: piece of each triangle.
    piece_closed
        (pieces,) bool: every edge of the piece is used by exactly two of its triangles.
    cavity
        (pieces,) bool: a closed piece wound inward inside another piece.
    shells
        Sets of triangles connected through any shared edge.
    balanced
        Every edge is run equally often in each direction (after the walk).
    open_edges, crowded_edges
        Edges used by one triangle, and by more than two.
    degenerate
        Triangles with a repeated corner (dropped) or no area (kept: they may
        close a seam).
    flipped
        Triangles turned over to agree with their piece's neighbours.
    inward
        Pieces (not cavities) turned outward because their volume was negative.
    euler
        V - E + F over the referenced vertices, unique edges and triangles.
    """

    faces: np.ndarray
    piece: np.ndarray
    piece_closed: np.ndarray
    cavity: np.ndarray
    shells: int
    balanced: bool
    open_edges: int
    crowded_edges: int
    degenerate: int
    flipped: int
    inward: int
    euler: int

    @property
    def pieces(self) -> int:
        return len(self.piece_closed)


def _edges(faces: np.ndarray, n_vertices: int):
    """Directed half-edges (3m, 2), their undirected edge index, and each edge's use count."""
    directed = faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    key = directed.min(axis=1) * np.int64(n_vertices) + directed.max(axis=1)
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    return directed, inverse.reshape(-1), counts


def topology_of(vertices: np.ndarray, faces: np.ndarray) -> Topology:
    """Pieces, shells, defects and a consistently wound copy of the triangles.

    Parameters
    ----------
    vertices : (n, 3) float, equal vertices already merged
    faces : (m, 3) int
    """
    f = np.asarray(faces, dtype=np.int64).reshape(-1, 3)
    repeated = (f[:, 0] == f[:, 1]) | (f[:, 1] == f[:, 2]) | (f[:, 2] == f[:, 0])
    f = f[~repeated]
    tri = vertices[f]
    area2 = np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1)
    scale = float(np.ptp(vertices, axis=0).max()) if len(vertices) else 1.0
    flat = int(np.sum(area2 <= 1e-12 * max(scale, 1e-300) ** 2))
    m = len(f)
    directed, inverse, counts = _edges(f, len(vertices))
    owner = np.arange(3 * m) // 3
    twice = np.flatnonzero(counts[inverse] == 2)
    pairs = twice[np.argsort(inverse[twice], kind="stable")].reshape(-1, 2)
    fa, fb = owner[pairs[:, 0]], owner[pairs[:, 1]]
    same = directed[pairs[:, 0], 0] == directed[pairs[:, 1], 0]
    n_pieces, piece = _components(fa, fb, m)
    flip = _walk(fa, fb, same, m)
    flipped_per = np.bincount(piece, weights=flip, minlength=n_pieces)
    size = np.bincount(piece, minlength=n_pieces)
    flip ^= (flipped_per > size / 2)[piece]           # keep the majority's winding
    oriented = f.copy()
    oriented[flip] = oriented[flip][:, ::-1]
    # a piece is closed when each of its edges is used twice within it: count (piece, edge)
    # pairs, as one integer key per half-edge
    edges = max(len(counts), 1)
    pair, uses = np.unique(piece[owner].astype(np.int64) * edges + inverse, return_counts=True)
    closed = np.ones(n_pieces, dtype=bool)
    closed[pair[uses != 2] // edges] = False
    oriented, cavity, inward = _outward(vertices, oriented, piece, closed, n_pieces)
    # shells: connected through any shared edge
    first = np.full(len(counts), -1, dtype=np.int64)
    first[inverse[::-1]] = owner[::-1]
    n_shells, _ = _components(owner, first[inverse], m)
    return Topology(faces=oriented, piece=piece, piece_closed=closed, cavity=cavity, shells=n_shells,
                    balanced=_balanced(oriented, len(vertices)), open_edges=int(np.sum(counts == 1)),
                    crowded_edges=int(np.sum(counts > 2)), degenerate=int(repeated.sum()) + flat,
                    flipped=int(np.sum(np.minimum(flipped_per, size - flipped_per))), inward=inward,
                    euler=int(len(np.unique(f)) - len(counts) + m) if m else 0)


def _components(a: np.ndarray, b: np.ndarray, m: int) -> tuple[int, np.ndarray]:
    graph = sparse.coo_matrix((np.ones(len(a)), (a, b)), shape=(m, m))
    return csgraph.connected_components(graph, directed=False)


def _balanced(faces: np.ndarray, n_vertices: int) -> bool:
    """Every edge is run as often a -> b as b -> a."""
    directed = faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    forward = directed[:, 0] < directed[:, 1]
    key = directed.min(axis=1) * np.int64(n_vertices) + directed.max(axis=1)
    uniq, inverse = np.unique(key, return_inverse=True)
    net = np.bincount(inverse.reshape(-1), weights=np.where(forward, 1, -1), minlength=len(uniq))
    return bool(len(faces) and not np.any(net))


def _walk(fa, fb, same, m) -> np.ndarray:
    """Flip flags (m,) bool from a breadth-first walk over neighbours."""
    rows = np.concatenate([fa, fb])
    cols = np.concatenate([fb, fa])
    rel = np.concatenate([same, same])
    order = np.argsort(rows, kind="stable")
    indptr = np.concatenate([[0], np.cumsum(np.bincount(rows, minlength=m))]).astype(np.int64)
    return bfs_flips(indptr, cols[order].astype(np.int64), rel[order], m)


def piece_volumes(vertices: np.ndarray, faces: np.ndarray, piece: np.ndarray, n: int) -> np.ndarray:
    """Signed volume of each piece (divergence theorem, about the mesh centroid), mm^3."""
    c = vertices.mean(axis=0) if len(vertices) else np.zeros(3)
    t = vertices[faces] - c
    six = np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2]))
    return np.bincount(piece, weights=six, minlength=n) / 6.0


def _outward(vertices, faces, piece, closed, n):
    """Turn closed pieces of negative volume outward, except those inside another piece."""
    vol = piece_volumes(vertices, faces, piece, n)
    cavity = np.zeros(n, dtype=bool)
    turn = []
    for s in np.flatnonzero((vol < 0) & closed):
        probe = vertices[faces[piece == s][0]].mean(axis=0)[None, :]
        others = faces[(piece != s) & (vol[piece] > 0)]
        if len(others) and abs(float(winding_numbers(vertices, others, probe)[0])) > 0.5:
            cavity[s] = True
        else:
            turn.append(s)
    if turn:
        mask = np.isin(piece, turn)
        faces = faces.copy()
        faces[mask] = faces[mask][:, ::-1]
    return faces, cavity, len(turn)
