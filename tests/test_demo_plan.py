"""End to end: plan the demo job and check the written plan with exact geometry.

The checks here are independent of packer's own verification: footprints are
rebuilt from the source meshes with shapely (union of projected triangles),
distances are shapely's exact polygon distances, 3D distances come from the
FCL library through trimesh, and plate files are read back with trimesh.
"""

from pathlib import Path

import numpy as np
import shapely
import trimesh
from shapely.geometry import box


ROOT = Path(__file__).resolve().parent.parent
TOL = 1e-6


def _shadow(mesh: trimesh.Trimesh):
    tri = mesh.triangles[:, :, :2]
    u, v = tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]
    keep = np.abs(u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]) > 1e-12
    return shapely.union_all(shapely.polygons(tri[keep]))


def test_every_copy_once(demo):
    job, plan, _ = demo
    ordered = {(o.id, line.part, n) for o in job.orders for line in o.lines for n in range(1, line.quantity + 1)}
    seen = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"]]
    seen += [(u["order"], u["part"], u["copy"]) for u in plan["unplaced"]]
    assert len(seen) == len(set(seen)) and set(seen) == ordered
    assert not plan["unplaced"], plan["unplaced"]  # the demo fits its fleet
    assert {p["technology"] for p in plan["plates"]} == {"filament", "resin", "powder"}


def test_spacing_and_containment_exact(demo):
    _, plan, out = demo
    for plate in plan["plates"]:
        x, y, z = plate["volume"]
        s, m = plate["spacing"], plate["margin"]
        meshes = []
        for item in plate["items"]:
            mesh = trimesh.load(out / item["mesh"], force="mesh")
            t = np.array(item["transform"])
            assert np.linalg.det(t[:3, :3]) > 0  # never mirrored
            mesh.apply_transform(t)
            meshes.append(mesh)
            lo, hi = mesh.bounds
            if plate["technology"] == "powder":
                assert np.all(lo >= m - TOL) and np.all(hi <= np.array([x, y, z]) - m + TOL)
            else:
                assert abs(lo[2]) < 1e-6 and hi[2] <= z + TOL  # resting on the plate
        if plate["technology"] == "powder":
            manager = trimesh.collision.CollisionManager()
            for k, mesh in enumerate(meshes):
                manager.add_object(str(k), mesh)
            for k, mesh in enumerate(meshes):
                manager.remove_object(str(k))
                assert manager.min_distance_single(mesh) >= s - TOL
                manager.add_object(str(k), mesh)
            continue
        inner = box(m, m, x - m, y - m).buffer(TOL, join_style="mitre")
        shadows = [_shadow(mesh) for mesh in meshes]
        for shadow in shadows:
            assert inner.covers(shadow)
        for i in range(len(shadows)):
            for j in range(i + 1, len(shadows)):
                assert shadows[i].distance(shadows[j]) >= s - TOL, (plate["id"], i, j)


def test_plate_files_hold_one_object_per_copy(demo):
    _, plan, out = demo
    for plate in plan["plates"]:
        scene = trimesh.load(out / plate["file"])
        names = sorted(scene.geometry)
        want = sorted(f"{i['order']}/{i['part']}/{i['copy']}" for i in plate["items"])
        assert names == want


def test_report_and_picklist_written(demo):
    _, plan, out = demo
    html = (out / "report.html").read_text()
    assert "Safety" in html and "<svg" in html
    rows = (out / "picklist.csv").read_text().strip().splitlines()
    assert len(rows) == 1 + sum(len(p["items"]) for p in plan["plates"])


def test_outputs_name_no_folder_of_this_machine(demo):
    # Reruns from another folder must give the same bytes, so no written file may carry
    # the absolute path of the checkout or of the output folder (relative paths such as
    # plan.json's "../../jobs/..." are the contract and allowed).
    import re

    _, _, out = demo
    absolute = re.compile("|".join(rf"(?<![.\w]){re.escape(str(p))}" for p in (ROOT, out)))
    for path in sorted(out.rglob("*")):
        if path.is_file() and path.suffix in {".json", ".md", ".html", ".csv"}:
            assert not absolute.search(path.read_text(encoding="utf-8")), path.name
