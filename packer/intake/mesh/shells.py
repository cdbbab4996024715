"""Uniting the shells of a mesh (part of repair on request, :mod:`packer.intake.mesh.repair`).

Edges shared by more than two triangles (shells touching along an edge) are untangled: around
such an edge the triangles are sorted by angle and each is paired with its neighbour across a
solid sector, and vertices are split so each shell is its own closed surface. Every closed
shell goes to manifold3d, a maintained library of exact mesh booleans (it also drops triangles
without area); the union of the solids minus the cavities is the result, simplified by
manifold3d within :data:`SIMPLIFY_MM`, and the slivers without area that are left with a corner
on their long edge are turned away by flipping that edge (:func:`flip_caps`). Shells manifold3d
refuses are kept as they are.
"""

from __future__ import annotations

import manifold3d
import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

__all__ = ["closed_as_indexed", "split_shells", "unite_shells", "flip_caps", "flat_triangles", "SIMPLIFY_MM"]

#: After the union, manifold3d collapses edges where the surface moves by less than this (mm;
#: our choice, far below any printer's resolution): the slivers a boolean leaves where faces cross.
SIMPLIFY_MM = 1e-4


def closed_as_indexed(faces: np.ndarray) -> bool:
    """Every edge (by vertex index) used by exactly two triangles, in opposite directions."""
    f = np.asarray(faces, dtype=np.int64).reshape(-1, 3)
    if len(f) == 0:
        return False
    he = f[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    n = int(f.max()) + 1
    forward = he[:, 0] * n + he[:, 1]
    backward = he[:, 1] * n + he[:, 0]
    uniq, counts = np.unique(forward, return_counts=True)
    if np.any(counts != 1):
        return False
    return bool(np.all(np.isin(backward, uniq, assume_unique=False)))


def _pairs_around(vertices, faces, he, owner, piece, idx, a, b) -> list[tuple[int, int]]:
    """Pair the half-edges ``idx`` of one edge (a, b) across solid sectors (module notes, step 3).

    A triangle running a -> b faces the counter-clockwise side about a -> b and has the solid
    clockwise of it; one running b -> a the other way round. In counter-clockwise order, each
    b -> a triangle opens a solid sector that the next unmatched a -> b triangle closes.
    Triangles at the same angle (shells whose faces coincide) are ordered so that openers and
    closers of the same piece nest: openers by piece, closers by piece reversed.
    """
    d = vertices[b] - vertices[a]
    d = d / np.linalg.norm(d)
    e1 = np.cross(d, [1.0, 0.0, 0.0] if abs(d[0]) < 0.9 else [0.0, 1.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(d, e1)
    w = vertices[faces[owner[idx]].sum(axis=1) - a - b] - vertices[a]
    angle = np.round(np.arctan2(w @ e2, w @ e1), 9)
    forward = he[idx, 0] == a
    own = piece[owner[idx]]
    order = np.lexsort((np.where(forward, -own, own), angle))
    idx, forward = idx[order], forward[order]
    run = np.cumsum(np.where(forward, -1, 1))
    if run[-1] != 0:
        return []
    first = (int(np.argmin(run)) + 1) % len(idx)
    stack, pairs = [], []
    for k in range(len(idx)):
        j = (first + k) % len(idx)
        if not forward[j]:
            stack.append(j)
        else:
            pairs.append((int(idx[stack.pop()]), int(idx[j])))
    return pairs


def split_shells(vertices: np.ndarray, faces: np.ndarray, piece: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Give each shell its own vertices where shells touch along edges or at vertices.

    ``piece``: (m,) the piece of each face (:class:`~packer.intake.mesh.topology.Topology`), to
    order triangles that lie at the same angle about an edge.

    Returns
    -------
    vertices (k, 3), faces (m, 3) indexing them, and the shell of each face (m,) int.
    """
    m = len(faces)
    he = faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    owner = np.arange(3 * m) // 3
    lo, hi = he.min(axis=1), he.max(axis=1)
    key = lo * np.int64(len(vertices)) + hi
    order = np.argsort(key, kind="stable")
    sk = key[order]
    starts = np.flatnonzero(np.r_[True, sk[1:] != sk[:-1]])
    ends = np.r_[starts[1:], len(sk)]
    pa, pb = [], []
    two = ends - starts == 2
    pa.append(order[starts[two]])
    pb.append(order[starts[two] + 1])
    for s, e in zip(starts[ends - starts > 2], ends[ends - starts > 2]):
        idx = order[s:e]
        got = _pairs_around(vertices, faces, he, owner, piece, idx, lo[idx[0]], hi[idx[0]])
        if got:
            pa.append(np.array([p for p, _ in got]))
            pb.append(np.array([q for _, q in got]))
    pa, pb = np.concatenate(pa).astype(np.int64), np.concatenate(pb).astype(np.int64)
    tail = lambda h, end: (h // 3) * 3 + (h % 3 + end) % 3      # noqa: E731  corner a half-edge leaves / enters
    rows = np.concatenate([tail(pa, 0), tail(pa, 1)])
    cols = np.concatenate([tail(pb, 1), tail(pb, 0)])
    graph = sparse.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(3 * m, 3 * m))
    n, corner = csgraph.connected_components(graph, directed=False)
    split_v = np.zeros((n, 3))
    split_v[corner] = vertices[faces.reshape(-1)]
    split_f = corner.reshape(-1, 3).astype(np.int64)
    faces_graph = sparse.coo_matrix((np.ones(len(pa)), (owner[pa], owner[pb])), shape=(m, m))
    _, shell = csgraph.connected_components(faces_graph, directed=False)
    return split_v, split_f, shell


def _solid(vertices, faces):
    used, inverse = np.unique(faces, return_inverse=True)
    if not closed_as_indexed(inverse.reshape(-1, 3)):
        return None
    mesh = manifold3d.Mesh64(vert_properties=np.ascontiguousarray(vertices[used], dtype=np.float64),
                             tri_verts=inverse.reshape(-1, 3).astype(np.uint64))
    solid = manifold3d.Manifold(mesh)
    return None if solid.status() != manifold3d.Error.NoError else solid


def unite_shells(vertices: np.ndarray, faces: np.ndarray, piece: np.ndarray) -> tuple[np.ndarray, np.ndarray, int, list[str]]:
    """The union of the closed shells minus the cavities (manifold3d), plus the shells it refuses.

    Returns vertices, faces, shells united, and what was kept as it was (words).
    """
    sv, sf, shell = split_shells(vertices, faces, piece)
    solids, holes, kept = [], [], []
    for s in range(int(shell.max()) + 1 if len(shell) else 0):
        f = sf[shell == s]
        solid = _solid(sv, f)
        if solid is None:
            kept.append(f)
        elif solid.volume() > 0:
            solids.append(solid)
        else:
            flipped = _solid(sv, f[:, ::-1])
            (holes if flipped is not None else kept).append(flipped if flipped is not None else f)
    left = []
    if kept:
        left.append(f"{len(kept)} shell{'s' if len(kept) > 1 else ''} ({sum(len(f) for f in kept)} triangles) "
                    "not closed or not separable: kept as they were, not united")
    if not solids:
        return vertices, faces, 0, left
    body = manifold3d.Manifold.batch_boolean(solids, manifold3d.OpType.Add)
    if holes:
        body = body - manifold3d.Manifold.batch_boolean(holes, manifold3d.OpType.Add)
    out = body.simplify(SIMPLIFY_MM).to_mesh64()
    v = np.array(out.vert_properties, dtype=np.float64)[:, :3]
    f = flip_caps(v, np.array(out.tri_verts, dtype=np.int64).reshape(-1, 3))
    for k in kept:                                     # append the refused shells with their own vertices
        used, inverse = np.unique(k, return_inverse=True)
        f = np.concatenate([f, inverse.reshape(-1, 3) + len(v)])
        v = np.concatenate([v, sv[used]])
    return v, f, len(solids) + len(holes), left


def flat_triangles(vertices: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """(m,) bool: triangles without area, by the measure of :func:`~packer.intake.mesh.topology.topology_of`
    (twice the area at most 1e-12 of the square of the largest extent)."""
    t = vertices[faces]
    scale = float(np.ptp(vertices, axis=0).max()) if len(vertices) else 1.0
    return np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=1) <= 1e-12 * max(scale, 1e-300) ** 2


def _flip_one(vertices, faces, edge, t, touched) -> tuple[int, int] | None:
    """Flip the long edge a-b of the flat triangle t = (a, b, c) with its neighbour u = (b, a, d):
    t, u become (c, a, d), (d, b, c), which cover u exactly when c lies on a-b. None: not possible."""
    tri = faces[t].tolist()
    lengths = [np.linalg.norm(vertices[tri[(k + 1) % 3]] - vertices[tri[k]]) for k in range(3)]
    k = int(np.argmax(lengths))
    a, b, c = tri[k], tri[(k + 1) % 3], tri[(k + 2) % 3]
    u = edge.get((b, a))
    if u is None or u in touched:
        return None
    d = [x for x in faces[u].tolist() if x not in (a, b)]
    ab = vertices[b] - vertices[a]
    along = float(np.dot(vertices[c] - vertices[a], ab) / max(float(np.dot(ab, ab)), 1e-300))
    if len(d) != 1 or (c, d[0]) in edge or (d[0], c) in edge or not 0.0 < along < 1.0:
        return None
    d = d[0]
    for e in ((a, b), (b, c), (c, a), (b, a), (a, d), (d, b)):
        edge.pop(e, None)
    faces[t], faces[u] = (c, a, d), (d, b, c)
    edge.update({(c, a): t, (a, d): t, (d, c): t, (d, b): u, (b, c): u, (c, d): u})
    return t, u


def flip_caps(vertices: np.ndarray, faces: np.ndarray, *, passes: int = 8) -> np.ndarray:
    """Faces (m, 3) of a closed mesh with flat triangles turned away by edge flips where a flip
    keeps the surface (the corner lies on the long edge); the same triangles count, same closure."""
    faces = faces.copy()
    edge = {}
    for i, (a, b, c) in enumerate(faces.tolist()):
        edge[(a, b)] = edge[(b, c)] = edge[(c, a)] = i
    for _ in range(passes):
        touched: set[int] = set()
        for t in np.flatnonzero(flat_triangles(vertices, faces)).tolist():
            if t not in touched:
                touched.update(_flip_one(vertices, faces, edge, t, touched) or ())
        if not touched:
            break
    return faces
