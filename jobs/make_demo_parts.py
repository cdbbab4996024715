"""Regenerate the demo part meshes in ``jobs/parts/`` and the broken test meshes.

The demo is a small workshop's spare-part shelf: brackets, rings, knobs, gears,
clips, small enclosures and panels, all made by :func:`packer.bench.partgen.make_part`.
Most are binary STL; one each is written as OBJ, PLY and 3MF so every format
the intake reads appears in the demo. A few are written in the orientation a
designer would draw them (standing up, on edge) so lay-flat has work to do.

Also writes two deliberately broken meshes for the broken-job test:
``tests/data/broken/open-box.stl`` (a box with one side missing) and
``tests/data/broken/not-a-mesh.stl`` (bytes that are no mesh at all).

Run from anywhere::

    python jobs/make_demo_parts.py
"""

from __future__ import annotations

import io
import math
import re
import sys
import uuid
import zipfile
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
if str(ROOT) not in sys.path:           # runnable from a clone without installing
    sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import trimesh  # noqa: E402

from packer.bench.partgen import make_part  # noqa: E402
from packer.intake.parts import load_part  # noqa: E402


@dataclass(frozen=True)
class DemoPart:
    name: str
    kind: str
    size: float          # largest extent, mm
    seed: int
    suffix: str = ".stl"
    turn: tuple[float, float, float] = (0.0, 0.0, 0.0)   # rotation about x, y, z (degrees) as drawn


DEMO_PARTS: tuple[DemoPart, ...] = (
    DemoPart("shelf-bracket", "bracket", 70.0, 2, turn=(0.0, -90.0, 0.0)),   # drawn standing on its short leg
    DemoPart("hose-ring", "ring", 38.0, 1, ".ply"),
    DemoPart("drawer-knob", "knob", 32.0, 3, ".obj"),
    DemoPart("spur-gear-24", "gear", 50.0, 30, turn=(90.0, 0.0, 0.0)),       # drawn on edge
    DemoPart("cable-clip", "clip", 36.0, 0),
    DemoPart("spring-clip", "clip", 32.0, 1),
    DemoPart("sensor-box", "enclosure", 78.0, 2),
    DemoPart("sensor-lid", "lid", 78.0, 2, ".3mf", turn=(180.0, 0.0, 0.0)),  # drawn lip down, as fitted
    DemoPart("vent-tube", "tube", 105.0, 0),
    DemoPart("filter-sleeve", "tube", 72.0, 1),
    DemoPart("leg-spacer-90", "spacer", 90.0, 39),
    DemoPart("bearing-block", "housing", 60.0, 2),
    DemoPart("cabinet-hinge", "hinge", 55.0, 1),
    DemoPart("coat-hook", "hook", 62.0, 2),
    DemoPart("mount-plate", "plate-with-slots", 92.0, 0),
    DemoPart("panel-cover", "cover", 95.0, 1),
)


def build(part: DemoPart) -> trimesh.Trimesh:
    mesh = make_part(part.kind, size=part.size, seed=part.seed)
    for axis, angle in zip(np.eye(3), part.turn):
        if angle:
            mesh.apply_transform(trimesh.transformations.rotation_matrix(math.radians(angle), axis))
    mesh.apply_translation(-mesh.bounds[0])
    return mesh


def write_demo(folder: Path) -> list[tuple[DemoPart, Path]]:
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for part in DEMO_PARTS:
        mesh = build(part)
        path = folder / f"{part.name}{part.suffix}"
        for old in folder.glob(f"{part.name}.*"):
            old.unlink()
        data = mesh.export(file_type=part.suffix.lstrip("."))
        path.write_bytes(_fixed_zip(data) if part.suffix == ".3mf" else _as_bytes(data))
        written.append((part, path))
    return written


_UUID = re.compile(r"[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}")


def _as_bytes(data) -> bytes:
    return data.encode() if isinstance(data, str) else bytes(data)


def _fixed_zip(data: bytes) -> bytes:
    """Rewrite a zip container (3MF) with fixed timestamps and UUIDs so reruns give identical bytes."""
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    counter = iter(range(1_000_000))
    fixed = lambda _: str(uuid.uuid5(uuid.NAMESPACE_URL, f"packer-demo-part-{next(counter)}"))  # noqa: E731
    with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            content = src.read(info.filename)
            if info.filename.endswith(".model"):
                content = _UUID.sub(fixed, content.decode()).encode()
            dst.writestr(zipfile.ZipInfo(info.filename, date_time=(2026, 1, 1, 0, 0, 0)), content,
                         compress_type=zipfile.ZIP_DEFLATED)
    return out.getvalue()


def write_broken(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    box = trimesh.creation.box(extents=[20.0, 15.0, 10.0])
    box.apply_translation(-box.bounds[0])
    top = np.flatnonzero(box.face_normals[:, 2] > 0.5)        # the two triangles of the top side
    open_box = trimesh.Trimesh(box.vertices, np.delete(box.faces, top, axis=0), process=False)
    open_box.export(folder / "open-box.stl")
    (folder / "not-a-mesh.stl").write_bytes(b"this file is not a mesh\n\x00\x01\x02\xff\xfe")


def main() -> None:
    rows = []
    for part, path in write_demo(HERE / "parts"):
        p = load_part(path)          # every demo part must pass intake
        rows.append((path.name, part.kind, p.mesh.extents, len(p.mesh.faces), path.stat().st_size,
                     p.height, p.footprint.area))
    write_broken(ROOT / "tests" / "data" / "broken")
    print(f"{'file':24s} {'kind':17s} {'extents as printed (mm)':>24s} {'faces':>6s} {'bytes':>7s} "
          f"{'height':>6s} {'footprint':>9s}")
    for name, kind, ext, faces, size, height, area in rows:
        dims = " x ".join(f"{v:5.1f}" for v in ext)
        print(f"{name:24s} {kind:17s} {dims:>24s} {faces:6d} {size:7d} {height:6.1f} {area:9.0f}")
    print(f"{len(rows)} parts, {sum(r[4] for r in rows)} bytes")


if __name__ == "__main__":
    main()
