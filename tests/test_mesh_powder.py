"""Imperfect meshes in a powder build: packed, spaced and checked for interlocking like any part."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import trimesh

from packer.cli import main
from packer.intake.parts import load_mesh

BROKEN = Path(__file__).parent / "data" / "broken"
PLATES = Path(__file__).resolve().parent.parent / "plates"


def test_open_overlapping_and_non_manifold_parts_pack_in_a_powder_build(tmp_path):
    cross = trimesh.util.concatenate([trimesh.creation.box(extents=[40, 10, 10]),
                                      trimesh.creation.box(extents=[10, 40, 10])])
    (tmp_path / "cross.stl").write_bytes(cross.export(file_type="stl"))
    verts = np.array([[0, 0, 0], [0, 0, 10], [10, 0, 0], [0, 10, 0], [-10, 0, 0], [0, -10, 0]], dtype=float)
    # two tetrahedra sharing the edge 0-1: an edge of four triangles
    tets = [[0, 1, 2], [0, 3, 1], [0, 2, 3], [1, 3, 2], [0, 1, 4], [0, 5, 1], [0, 4, 5], [1, 5, 4]]
    (tmp_path / "tets.stl").write_bytes(trimesh.Trimesh(verts, tets, process=False).export(file_type="stl"))
    (tmp_path / "open-box.stl").write_bytes((BROKEN / "open-box.stl").read_bytes())
    (tmp_path / "day.yaml").write_text(f"""name: powder-day
start: 2026-12-07T07:00
plates_folder: {PLATES}
fleet:
  - {{name: cell-a, profile: powder-cell-331}}
orders:
  - id: P-1
    due: 2026-12-08T17:00
    lines:
      - {{mesh: open-box.stl, quantity: 3, material: PA12}}
      - {{mesh: cross.stl, quantity: 2, material: PA12}}
      - {{mesh: tets.stl, quantity: 2, material: PA12}}
""")
    out = tmp_path / "out"
    main(["plan", str(tmp_path / "day.yaml"), "-o", str(out), "--seconds", "5"])
    plan = json.loads((out / "plan.json").read_text())
    assert plan["unplaced"] == []
    items = [(p, i) for p in plan["plates"] for i in p["items"]]
    assert len(items) == 7 and all(p["technology"] == "powder" for p, _ in items)
    # the customer's own triangles, placed, keep the spacing in 3D (python-fcl distances)
    placed = []
    for plate, item in items:
        mesh = load_mesh(out / item["mesh"])
        mesh.apply_transform(np.asarray(item["transform"]))
        placed.append((plate["id"], plate["spacing"], mesh))
    for k, (pid, spacing, mesh) in enumerate(placed):
        others = trimesh.collision.CollisionManager()
        for j, (qid, _, other) in enumerate(placed):
            if j != k and qid == pid:
                others.add_object(str(j), other)
        if others._objs:
            assert others.min_distance_single(mesh) >= spacing - 1e-6


def test_interlocking_is_still_caught_for_open_badly_wound_links():
    from packer.pack3d import Body, BuildPlacement, verify_build
    link = trimesh.creation.torus(22, 4, major_sections=48, minor_sections=16)
    faces = link.faces[1:].copy()                  # a seam: one triangle missing (open edges)
    faces[::7] = faces[::7, ::-1]                  # and every seventh triangle wound the wrong way
    bad = trimesh.Trimesh(link.vertices, faces, process=False)
    quarter = np.array([[1.0, 0, 0, 62], [0, 0, -1, 40], [0, 1, 0, 40], [0, 0, 0, 1]])
    placements = [BuildPlacement(0, np.array([[1.0, 0, 0, 40], [0, 1, 0, 40], [0, 0, 1, 40], [0, 0, 0, 1]])),
                  BuildPlacement(1, quarter)]     # the second link through the first one's hole
    problems = verify_build([Body(bad), Body(bad)], placements, volume=(120.0, 80.0, 80.0), spacing=3.0,
                            margin=2.0)
    assert len(problems) == 2 and all("interlocked" in p for p in problems)
