"""STL reader (binary and ASCII) that tells the truth about the file.

A binary STL is an 80-byte header, a little-endian uint32 triangle count and 50
bytes per triangle (normal, three corners as float32, a 2-byte attribute). Its
header may begin with the word "solid" like an ASCII file; the size decides:
a file of exactly ``84 + 50 * count`` bytes is binary whatever its header says.
Corners are merged by exact coordinate equality so shells share vertices.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import RawMesh, frozen, unusable

__all__ = ["read_stl"]

_BINARY = np.dtype([("normal", "<f4", 3), ("corners", "<f4", (3, 3)), ("attr", "<u2")])
_VERTEX = re.compile(rb"^\s*vertex\s+(\S+)\s+(\S+)\s+(\S+)", re.M)
_FACET = re.compile(rb"^\s*facet\b", re.M)


def read_stl(path: Path, data: bytes, limits: Limits) -> RawMesh:
    """Read STL bytes; binary or ASCII is decided by the size and the content.

    Raises
    ------
    GeometryError
        Truncated binary file, an ASCII facet without three corners, a number
        that does not parse, too many triangles.
    """
    if len(data) >= 84:
        count = int(np.frombuffer(data, "<u4", 1, 80)[0])
        if len(data) == 84 + 50 * count:
            return _binary(path, data, count, limits, notes=())
    if data.lstrip()[:5].lower() == b"solid" and _FACET.search(data[:4096] if len(data) > 4096 else data):
        return _ascii(path, data, limits)
    if len(data) < 84:
        raise unusable(path, f"not an STL file: {len(data)} bytes, shorter than the 84-byte binary header "
                             "and not ASCII STL text")
    return _binary_mismatch(path, data, count, limits)


def _binary_mismatch(path: Path, data: bytes, count: int, limits: Limits) -> RawMesh:
    """A binary file whose size is not 84 + 50 * count."""
    whole = (len(data) - 84) // 50
    if count > whole:
        raise unusable(path, f"truncated binary STL: the header promises {count} triangles, "
                             f"the file holds {whole} complete ones ({len(data)} bytes)")
    extra = len(data) - 84 - 50 * count
    if count == 0 and whole > 0 and (len(data) - 84) % 50 == 0:
        note = f"{path}: binary STL header says 0 triangles but the file holds {whole}; read {whole}"
        return _binary(path, data, whole, limits, notes=(note,))
    note = (f"{path}: binary STL has {extra} bytes after the {count} triangles its header promises "
            f"(ignored)")
    return _binary(path, data, count, limits, notes=(note,))


def _binary(path: Path, data: bytes, count: int, limits: Limits, *, notes) -> RawMesh:
    if count > limits.triangles:
        raise unusable(path, f"{count} triangles is over the limit of {limits.triangles} (Limits.triangles)")
    rec = np.frombuffer(data, _BINARY, count, 84)
    corners = rec["corners"].astype(np.float64).reshape(-1, 3)
    return _merged(path, "STL (binary)", corners, notes)


def _ascii(path: Path, data: bytes, limits: Limits) -> RawMesh:
    facets = len(_FACET.findall(data))
    found = _VERTEX.findall(data)
    if facets > limits.triangles:
        raise unusable(path, f"{facets} triangles is over the limit of {limits.triangles} (Limits.triangles)")
    if len(found) != 3 * facets:
        raise unusable(path, f"ASCII STL with {facets} facets but {len(found)} vertex lines "
                             f"(each facet needs 3): truncated or not triangles "
                             f"(near line {_line_of_last_facet(data)})")
    try:
        corners = np.array(found, dtype=np.float64)
    except ValueError:
        bad = next(i for i, row in enumerate(found) if not _floats(row))
        raise unusable(path, f"ASCII STL line {_line_of_vertex(data, bad)}: a vertex coordinate is not a number")
    notes = ()
    if not re.search(rb"endsolid", data[-4096:]):
        notes = (f"{path}: ASCII STL does not end with 'endsolid' (the last facet is complete)",)
    return _merged(path, "STL (ASCII)", corners.reshape(-1, 3), notes)


def _floats(row) -> bool:
    try:
        [float(x) for x in row]
        return True
    except ValueError:
        return False


def _line_of_vertex(data: bytes, index: int) -> int:
    m = list(_VERTEX.finditer(data))[index]
    return data.count(b"\n", 0, m.start()) + 1


def _line_of_last_facet(data: bytes) -> int:
    starts = [m.start() for m in _FACET.finditer(data)]
    return data.count(b"\n", 0, starts[-1]) + 1 if starts else 1


def _merged(path: Path, fmt: str, corners: np.ndarray, notes) -> RawMesh:
    """Triangles from corner triples (3m, 3), corners merged by exact equality."""
    if len(corners) == 0:
        return RawMesh(path, fmt, *frozen(np.zeros((0, 3)), np.zeros((0, 3))), notes=tuple(notes))
    vertices, inverse = np.unique(corners, axis=0, return_inverse=True)
    return RawMesh(path, fmt, *frozen(vertices, inverse.reshape(-1, 3)), notes=tuple(notes))
