"""A parts cache: a part examined once is read back, not examined again.

A replan reads its plan's meshes again; examining, laying flat and casting the
footprint of each costs far more than reading the result back. Each entry is one
``.npz`` file (``numpy.load`` with ``allow_pickle=False``: plain arrays and a JSON
header, nothing that runs code) named by :func:`entry_key`: a SHA-256 over the
mesh file's bytes, its path and every intake setting that changes the part (name,
orientation lock, units, repair, reader limits) and :data:`FORMAT`. A changed file
or setting gives another key, so a stale entry is never found; an entry that cannot
be read or does not match its key (a corrupt file) is ignored and the mesh is
examined again.

The cache lives inside the plan's own output folder (``OUTDIR/cache/parts``),
written with the first plan; nothing is kept anywhere else.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import fields, is_dataclass, replace
from pathlib import Path
from typing import Iterable

import numpy as np
import shapely
import trimesh

from packer.intake.mesh.examine import Examination
from packer.intake.mesh.repair import MeshCounts, Repair
from packer.intake.mesh.topology import Topology
from packer.intake.mesh.triage import Defect
from packer.intake.mesh.volume import Volume
from packer.intake.parts import Part, load_part

__all__ = ["FORMAT", "CACHE_DIR", "entry_key", "load_part_keyed", "store_parts"]

#: Bump when the intake changes what a part holds or how it is measured: old entries then miss.
FORMAT = "packer-parts-1"
#: Where the cache lives inside a plan's output folder.
CACHE_DIR = Path("cache") / "parts"

_CLASSES = {c.__name__: c for c in (Examination, Topology, Volume, Defect, Repair, MeshCounts)}


def _digest(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def entry_key(path: Path, digest: str, *, name, lock_orientation, units, limits, repair) -> str:
    """The entry name of a part: the file's content and path and every intake setting."""
    settings = json.dumps({"format": FORMAT, "path": str(Path(path)), "sha256": digest, "name": name,
                           "lock": bool(lock_orientation), "units": units, "repair": bool(repair),
                           "limits": repr(limits)}, sort_keys=True)
    return hashlib.sha256(settings.encode("utf-8", "surrogatepass")).hexdigest()


def load_part_keyed(path, *, cache: Path | None = None, name=None, lock_orientation=False, units=None,
                    limits=None, repair=False) -> Part:
    """:func:`~packer.intake.parts.load_part`, read from ``cache`` when it holds the part.

    The part returned carries its entry key (``Part.cache_key``) when the file's bytes
    were the same before and after it was examined (else ``""``: not stored)."""
    path = Path(path)
    kw = dict(name=name, lock_orientation=lock_orientation, units=units, limits=limits, repair=repair)
    try:
        before = _digest(path)
    except OSError:
        return load_part(path, **kw)            # the loader names the problem
    key = entry_key(path, before, **kw)
    if cache is not None:
        got = _read_entry(Path(cache) / f"{key}.npz", key)
        if got is not None:
            return got
    part = load_part(path, **kw)
    try:
        same = _digest(path) == before
    except OSError:
        same = False
    return replace(part, cache_key=key) if same else part


def store_parts(cache: Path, parts: Iterable[Part]) -> int:
    """Write an entry for each part with a key not yet in ``cache``; returns how many were written."""
    cache = Path(cache)
    n = 0
    for part in parts:
        if not part.cache_key or (cache / f"{part.cache_key}.npz").is_file():
            continue
        cache.mkdir(parents=True, exist_ok=True)
        arrays: list = []
        head = {"key": part.cache_key, "part": _encode(part, arrays, top=True)}
        tmp = cache / f".{part.cache_key}.{os.getpid()}.tmp"
        with open(tmp, "wb") as f:
            np.savez(f, head=np.frombuffer(json.dumps(head).encode("utf-8"), dtype=np.uint8),
                     **{f"a{k}": a for k, a in enumerate(arrays)})
        os.replace(tmp, cache / f"{part.cache_key}.npz")
        n += 1
    return n


def _encode(value, arrays: list, top: bool = False):
    if isinstance(value, np.ndarray):
        arrays.append(value)
        return {"array": len(arrays) - 1}
    if isinstance(value, Path):
        return {"path": str(value)}
    if isinstance(value, trimesh.Trimesh):
        return {"mesh": [_encode(np.asarray(value.vertices), arrays), _encode(np.asarray(value.faces), arrays)]}
    if isinstance(value, shapely.Geometry):
        return {"wkb": _encode(np.frombuffer(shapely.to_wkb(value), dtype=np.uint8), arrays)}
    if is_dataclass(value):
        name = "Part" if top else type(value).__name__
        if not top and name not in _CLASSES:
            raise TypeError(f"the parts cache cannot store {name}")
        return {"dataclass": name, "fields": {f.name: _encode(getattr(value, f.name), arrays)
                                               for f in fields(value) if f.name != "cache_key"}}
    if isinstance(value, tuple):
        return {"tuple": [_encode(v, arrays) for v in value]}
    if value is None or isinstance(value, (bool, int, float, str)):
        return {"value": value}
    if isinstance(value, (np.integer, np.floating, np.bool_)):
        return {"value": value.item()}
    raise TypeError(f"the parts cache cannot store {type(value).__name__}")


def _decode(node: dict, arrays):
    if "dataclass" in node:
        cls = Part if node["dataclass"] == "Part" else _CLASSES[node["dataclass"]]
        return cls(**{k: _decode(x, arrays) for k, x in node["fields"].items()})
    (kind, v), = node.items()
    if kind == "array":
        a = np.array(arrays[f"a{int(v)}"])
        a.setflags(write=False)
        return a
    if kind == "path":
        return Path(v)
    if kind == "mesh":
        mesh = trimesh.Trimesh(vertices=np.array(arrays[f"a{int(v[0]['array'])}"]),
                               faces=np.array(arrays[f"a{int(v[1]['array'])}"]), process=False)
        for array in (mesh.vertices, mesh.faces):
            array.flags.writeable = False
        return mesh
    if kind == "wkb":
        return shapely.from_wkb(arrays[f"a{int(v['array'])}"].tobytes())
    if kind == "tuple":
        return tuple(_decode(x, arrays) for x in v)
    if kind == "value":
        return v
    raise ValueError(f"unknown entry node {kind}")


def _read_entry(file: Path, key: str) -> Part | None:
    """The part stored in ``file``, or None when it is missing, unreadable or not the part of ``key``."""
    if not file.is_file():
        return None
    try:
        with np.load(file, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
        head = json.loads(arrays.pop("head").tobytes().decode("utf-8"))
        if head.get("key") != key:
            return None
        part = _decode(head["part"], arrays)
        if not isinstance(part, Part) or not isinstance(part.footprint, shapely.Polygon):
            return None
        return replace(part, cache_key=key)
    except Exception:  # noqa: BLE001 - whatever is wrong with an entry, it is ignored and the mesh examined again
        return None
