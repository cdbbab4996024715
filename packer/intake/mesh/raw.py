"""What a mesh reader hands on: the file's own triangles, its unit, and what it noticed."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from packer.errors import GeometryError

__all__ = ["RawMesh", "unusable", "frozen"]


@dataclass(frozen=True, eq=False)
class RawMesh:
    """The triangles of one mesh file exactly as written (placements of a 3MF build applied).

    Attributes
    ----------
    path
        The file.
    format
        ``"STL (binary)"``, ``"STL (ASCII)"``, ``"OBJ"``, ``"PLY (ascii)"``, ... or ``"3MF"``.
    vertices
        (n, 3) float64, read-only, in the file's unit.
    faces
        (m, 3) int64, read-only, indices into ``vertices`` (all valid).
    unit
        The unit the file declares (3MF ``unit``, e.g. ``"inch"``), None when the
        format has none.
    notes
        What the reader noticed but could live with (a header count that disagrees
        with the content, bytes after the last triangle), each naming the file.
    """

    path: Path
    format: str
    vertices: np.ndarray
    faces: np.ndarray
    unit: str | None = None
    notes: tuple[str, ...] = field(default=())


def unusable(path: Path, message: str) -> GeometryError:
    """The error for a file no part can be made of: names the file first."""
    return GeometryError(f"{path}: {message}")


def frozen(vertices, faces) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (n, 3) float64 and faces (m, 3) int64 as read-only contiguous arrays."""
    v = np.ascontiguousarray(np.asarray(vertices, dtype=np.float64).reshape(-1, 3))
    f = np.ascontiguousarray(np.asarray(faces, dtype=np.int64).reshape(-1, 3))
    v.setflags(write=False)
    f.setflags(write=False)
    return v, f
