"""PLY reader (ascii, binary little and big endian): the ``vertex`` and ``face`` elements.

The header declares each element's count and properties; the body must hold
exactly that. Less than the header promises is a truncated file (unusable,
with the element named); bytes or lines after the last element are noted.
Faces pointing at vertices that do not exist make the file unusable, with the
face named. Polygons are split into triangle fans.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import RawMesh, frozen, unusable

__all__ = ["read_ply"]

_TYPES = {"char": "i1", "int8": "i1", "uchar": "u1", "uint8": "u1", "short": "i2", "int16": "i2",
          "ushort": "u2", "uint16": "u2", "int": "i4", "int32": "i4", "uint": "u4", "uint32": "u4",
          "float": "f4", "float32": "f4", "double": "f8", "float64": "f8"}


def read_ply(path: Path, data: bytes, limits: Limits) -> RawMesh:
    """Read PLY bytes.

    Raises
    ------
    GeometryError
        A bad header, a body shorter than the header promises, a face pointing
        past the vertices, no ``vertex`` element or no x, y, z.
    """
    fmt, elements, start = _header(path, data)
    if fmt == "ascii":
        values, notes = _ascii_body(path, data[start:], elements)
    else:
        values, notes = _binary_body(path, data[start:], elements, "<" if fmt.endswith("little_endian") else ">")
    names = [e[0] for e in elements]
    if "vertex" not in names:
        raise unusable(path, "PLY has no 'vertex' element")
    vert = values["vertex"]
    missing = [a for a in "xyz" if a not in vert]
    if missing:
        raise unusable(path, f"PLY 'vertex' element has no property {', '.join(missing)}")
    vertices = np.stack([np.asarray(vert[a], dtype=float) for a in "xyz"], axis=1)
    polys = []
    if "face" in values:
        face = values["face"]
        key = next((k for k in ("vertex_indices", "vertex_index") if k in face), None)
        if key is None:
            raise unusable(path, "PLY 'face' element has no list property vertex_indices")
        polys = face[key]
    faces = _triangles(path, polys, len(vertices), limits)
    return RawMesh(path, f"PLY ({fmt.replace('_', ' ')})", *frozen(vertices, faces), notes=tuple(notes))


def _header(path: Path, data: bytes):
    end = data.find(b"end_header")
    if not data.startswith(b"ply") or end < 0:
        raise unusable(path, "not a PLY file: it must start with 'ply' and have an 'end_header' line")
    nl = data.find(b"\n", end)
    start = len(data) if nl < 0 else nl + 1
    fmt, elements = None, []
    for no, raw in enumerate(data[:end].decode("ascii", errors="replace").splitlines(), start=1):
        words = raw.split()
        if not words or words[0] in ("ply", "comment", "obj_info"):
            continue
        if words[0] == "format" and len(words) >= 2:
            fmt = words[1]
        elif words[0] == "element" and len(words) == 3 and words[2].isdigit():
            elements.append((words[1], int(words[2]), []))
        elif words[0] == "property" and elements:
            prop = _property(path, no, words)
            elements[-1][2].append(prop)
        else:
            raise unusable(path, f"PLY header line {no}: cannot read '{raw.strip()[:60]}'")
    if fmt not in ("ascii", "binary_little_endian", "binary_big_endian"):
        raise unusable(path, f"PLY format '{fmt}' is not ascii, binary_little_endian or binary_big_endian")
    return fmt, elements, start


def _property(path: Path, no: int, words: list[str]):
    if len(words) == 5 and words[1] == "list" and words[2] in _TYPES and words[3] in _TYPES:
        return (words[4], _TYPES[words[2]], _TYPES[words[3]])
    if len(words) == 3 and words[1] in _TYPES:
        return (words[2], _TYPES[words[1]], None)
    raise unusable(path, f"PLY header line {no}: unknown property '{' '.join(words[1:])[:60]}'")


def _ascii_body(path: Path, body: bytes, elements):
    lines = [ln for ln in body.decode("ascii", errors="replace").splitlines() if ln.strip()]
    at, values = 0, {}
    for name, count, props in elements:
        if len(lines) - at < count:
            raise unusable(path, f"truncated PLY: the header promises {count} '{name}' elements, "
                                 f"the file holds {len(lines) - at}")
        cols = {p[0]: [] for p in props}
        for k in range(count):
            words = lines[at + k].split()
            try:
                _ascii_row(words, props, cols)
            except (ValueError, IndexError):
                raise unusable(path, f"PLY '{name}' element {k}: cannot read '{lines[at + k][:60]}'") from None
        values[name] = cols
        at += count
    notes = [f"{path}: PLY has {len(lines) - at} lines after the elements its header declares (ignored)"] \
        if at < len(lines) else []
    return values, notes


def _ascii_row(words, props, cols) -> None:
    i = 0
    for name, typ, item in props:
        if item is None:
            cols[name].append(float(words[i]))
            i += 1
        else:
            n = int(words[i])
            cols[name].append([int(w) for w in words[i + 1:i + 1 + n]])
            if len(cols[name][-1]) != n:
                raise ValueError
            i += 1 + n
    if i != len(words):
        raise ValueError


def _binary_body(path: Path, body: bytes, elements, order: str):
    at, values = 0, {}
    for name, count, props in elements:
        if all(p[2] is None for p in props):
            dt = np.dtype([(p[0], order + p[1]) for p in props])
            if len(body) - at < dt.itemsize * count:
                raise unusable(path, f"truncated PLY: the header promises {count} '{name}' elements, "
                                     f"the file holds {(len(body) - at) // max(dt.itemsize, 1)}")
            rec = np.frombuffer(body, dt, count, at)
            values[name] = {p[0]: rec[p[0]] for p in props}
            at += dt.itemsize * count
        elif (fast := _uniform_triangles(body, at, count, props, order)) is not None:
            values[name], at = fast
        else:
            values[name], at = _binary_lists(path, body, at, name, count, props, order)
    notes = [f"{path}: PLY has {len(body) - at} bytes after the elements its header declares (ignored)"] \
        if at < len(body) else []
    return values, notes


def _uniform_triangles(body: bytes, at: int, count: int, props, order: str):
    """Fast path: one list property whose every entry has 3 items (most triangle files)."""
    if len(props) != 1 or props[0][2] is None:
        return None
    pname, typ, item = props[0]
    dt = np.dtype([("n", order + typ), ("i", order + item, 3)])
    if len(body) - at < dt.itemsize * count:
        return None
    rec = np.frombuffer(body, dt, count, at)
    if not (rec["n"] == 3).all():
        return None
    return {pname: rec["i"].astype(np.int64)}, at + dt.itemsize * count


def _binary_lists(path: Path, body: bytes, at: int, name: str, count: int, props, order: str):
    cols = {p[0]: [] for p in props}
    for k in range(count):
        for pname, typ, item in props:
            dt = np.dtype(order + typ)
            if at + dt.itemsize > len(body):
                raise unusable(path, f"truncated PLY: '{name}' element {k} of {count} is incomplete")
            n = np.frombuffer(body, dt, 1, at)[0]
            at += dt.itemsize
            if item is None:
                cols[pname].append(n)
                continue
            it = np.dtype(order + item)
            n = int(n)
            if n < 0 or at + it.itemsize * n > len(body):
                raise unusable(path, f"truncated PLY: '{name}' element {k} of {count} is incomplete")
            cols[pname].append(np.frombuffer(body, it, n, at).astype(np.int64))
            at += it.itemsize * n
    return cols, at


def _triangles(path: Path, polys, n_vertices: int, limits: Limits) -> np.ndarray:
    if isinstance(polys, np.ndarray) and polys.ndim == 2 and polys.shape[1] == 3:
        bad = np.flatnonzero(((polys < 0) | (polys >= n_vertices)).any(axis=1))
        if len(bad):
            k = int(bad[0])
            i = int(next(i for i in polys[k] if not 0 <= i < n_vertices))
            raise unusable(path, f"PLY face {k} refers to vertex {i}, but the file has "
                                 f"{n_vertices} vertices (0 to {n_vertices - 1})")
        if len(polys) > limits.triangles:
            raise unusable(path, f"more than {limits.triangles} triangles (Limits.triangles)")
        return polys
    tris = []
    for k, poly in enumerate(polys):
        poly = [int(i) for i in poly]
        if len(poly) < 3:
            raise unusable(path, f"PLY face {k} has {len(poly)} corners; a face needs at least 3")
        bad = [i for i in poly if not 0 <= i < n_vertices]
        if bad:
            raise unusable(path, f"PLY face {k} refers to vertex {bad[0]}, but the file has "
                                 f"{n_vertices} vertices (0 to {n_vertices - 1})")
        tris.extend((poly[0], poly[j], poly[j + 1]) for j in range(1, len(poly) - 1))
        if len(tris) > limits.triangles:
            raise unusable(path, f"more than {limits.triangles} triangles (Limits.triangles)")
    return np.array(tris, dtype=np.int64).reshape(-1, 3)
