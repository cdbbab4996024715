"""Wavefront OBJ reader: ``v`` vertices and ``f`` polygons (split into triangle fans).

Face corners may be ``i``, ``i/t``, ``i/t/n`` or ``i//n``; negative indices count
back from the last vertex read so far. A corner that points at a vertex that does
not exist makes the file unusable, with the line named. Other statements
(normals, texture coordinates, groups, materials) are skipped.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import RawMesh, frozen, unusable

__all__ = ["read_obj"]


def read_obj(path: Path, data: bytes, limits: Limits) -> RawMesh:
    """Read OBJ bytes (UTF-8 or Latin-1 text).

    Raises
    ------
    GeometryError
        A vertex coordinate that is not a number, a face corner that is not an
        index or points past the vertices, a face with fewer than three corners,
        too many triangles.
    """
    text = data.decode("utf-8", errors="replace")
    vertices: list[tuple[float, float, float]] = []
    faces: list[tuple[int, int, int]] = []
    for no, line in enumerate(text.splitlines(), start=1):
        head, _, rest = line.strip().partition(" ")
        if head == "v":
            vertices.append(_vertex(path, no, rest))
        elif head == "f":
            corners = [_corner(path, no, tok, len(vertices)) for tok in rest.split()]
            if len(corners) < 3:
                raise unusable(path, f"line {no}: a face needs at least 3 corners, got {len(corners)}")
            faces.extend((corners[0], corners[k], corners[k + 1]) for k in range(1, len(corners) - 1))
            if len(faces) > limits.triangles:
                raise unusable(path, f"more than {limits.triangles} triangles (Limits.triangles)")
    return RawMesh(path, "OBJ", *frozen(np.array(vertices, dtype=float).reshape(-1, 3),
                                        np.array(faces, dtype=np.int64).reshape(-1, 3)))


def _vertex(path: Path, no: int, rest: str) -> tuple[float, float, float]:
    parts = rest.split()
    try:
        if len(parts) < 3:
            raise ValueError
        return float(parts[0]), float(parts[1]), float(parts[2])
    except ValueError:
        raise unusable(path, f"line {no}: vertex needs three numbers, got '{rest.strip()[:60]}'") from None


def _corner(path: Path, no: int, token: str, known: int) -> int:
    ref = token.split("/")[0]
    try:
        k = int(ref)
    except ValueError:
        raise unusable(path, f"line {no}: face corner '{token[:40]}' is not a vertex index") from None
    index = k - 1 if k > 0 else known + k
    if k == 0 or not 0 <= index < known:
        raise unusable(path, f"line {no}: face refers to vertex {k}, but only {known} vertices are "
                             "defined before it")
    return index
