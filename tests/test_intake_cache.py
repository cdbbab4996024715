"""The parts cache: a part read back equals the part examined; stale and corrupt entries are ignored.

Reference: the intake itself (``load_part`` on the same file, examined afresh), compared
array by array and value by value; and a cube's volume (edge cubed, CRC Standard
Mathematical Tables) for a part whose file changed under the cache.
"""

from __future__ import annotations

import shutil
from dataclasses import fields, is_dataclass
from pathlib import Path

import numpy as np
import shapely
import trimesh

from packer.intake.cache import load_part_keyed, store_parts
from packer.intake.parts import load_part

ROOT = Path(__file__).resolve().parent.parent
PARTS = ROOT / "jobs" / "parts"


def _same(a, b, where: str) -> None:
    if isinstance(a, np.ndarray):
        assert a.dtype == b.dtype and np.array_equal(a, b), where
    elif isinstance(a, trimesh.Trimesh):
        for name in ("vertices", "faces", "face_normals", "bounds"):
            _same(np.asarray(getattr(a, name)), np.asarray(getattr(b, name)), f"{where}.{name}")
        assert a.area == b.area, where
    elif isinstance(a, shapely.Geometry):
        assert shapely.to_wkb(a) == shapely.to_wkb(b), where
    elif is_dataclass(a):
        assert type(a) is type(b), where
        for f in fields(a):
            if f.name != "cache_key":
                _same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}")
    elif isinstance(a, tuple):
        assert len(a) == len(b), where
        for k, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{where}[{k}]")
    else:
        assert a == b, (where, a, b)


def test_read_back_equals_examined(tmp_path):
    cache = tmp_path / "cache"
    for name, kw in (("cabinet-hinge.stl", {}), ("drawer-knob.obj", {"lock_orientation": True}),
                     ("cable-clip.stl", {"repair": True})):
        first = load_part_keyed(PARTS / name, cache=cache, **kw)
        assert first.cache_key and store_parts(cache, [first]) == 1
        again = load_part_keyed(PARTS / name, cache=cache, **kw)
        assert again is not first and again.cache_key == first.cache_key
        _same(load_part(PARTS / name, **kw), again, name)
        assert not again.mesh.vertices.flags.writeable and not again.to_print.flags.writeable


def test_settings_and_content_change_the_key(tmp_path):
    cache = tmp_path / "cache"
    mesh = tmp_path / "box.stl"
    trimesh.creation.box(extents=(10, 10, 10)).export(mesh)
    part = load_part_keyed(mesh, cache=cache)
    store_parts(cache, [part])
    assert load_part_keyed(mesh, cache=cache, units="cm").cache_key != part.cache_key
    assert load_part_keyed(mesh, cache=cache, lock_orientation=True).cache_key != part.cache_key
    trimesh.creation.box(extents=(20, 20, 20)).export(mesh)      # the file changed: the entry is stale
    changed = load_part_keyed(mesh, cache=cache)
    assert changed.cache_key != part.cache_key
    assert abs(changed.volume - 20.0 ** 3) < 1e-6                # the new cube, examined afresh


def test_corrupt_entry_is_ignored(tmp_path):
    cache = tmp_path / "cache"
    src = tmp_path / "hinge.stl"
    shutil.copy(PARTS / "cabinet-hinge.stl", src)
    part = load_part_keyed(src, cache=cache)
    store_parts(cache, [part])
    entry = cache / f"{part.cache_key}.npz"
    for junk in (b"", b"PK\x03\x04 not a zip", entry.read_bytes()[: len(entry.read_bytes()) // 2]):
        entry.write_bytes(junk)
        got = load_part_keyed(src, cache=cache)
        _same(load_part(src), got, "after a corrupt entry")
    # an entry under another part's name (copied in by hand) does not match its key
    other = load_part_keyed(PARTS / "coat-hook.stl", cache=cache)
    store_parts(cache, [other])
    shutil.copy(cache / f"{other.cache_key}.npz", entry)
    _same(load_part(src), load_part_keyed(src, cache=cache), "after a swapped entry")
