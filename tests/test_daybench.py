"""The day benchmark's job writer and a tiny generated day planned end to end.

The written plan.json is checked here independently of the planner: each
placed mesh is moved by its transform and its footprint (the exact union of
its projected triangles) measured with shapely; powder bodies by the exact
mesh distance of python-fcl (through trimesh's collision manager).
"""

import itertools
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import shapely
import trimesh

from packer.bench.day import PLATES_MIX, run_day, write_day_job
from packer.bench.daygen import day_spec
from packer.intake.job import load_job
from packer.intake.profile import load_profile

REPO = Path(__file__).resolve().parents[1]
TOL = 1e-3   # mm


@pytest.fixture(scope="module")
def tiny_day(tmp_path_factory):
    folder = tmp_path_factory.mktemp("day")
    row = run_day(folder, copies=16, printers=3, seconds=6.0, seed=39, verify=False)
    return folder, row


def test_written_job_loads_without_problems(tmp_path):
    day = write_day_job(tmp_path, copies=40, printers=5, seed=1)
    job = load_job(day.path)
    assert job.problems == ()
    spec = day_spec(copies=40, printers=5, seed=1, mix=PLATES_MIX)
    assert spec == day.spec and day.copies == 40
    assert sum(line.quantity for o in job.orders for line in o.lines) == 40
    assert {p.profile.technology for p in job.fleet} == {"filament", "resin", "powder"}
    assert {o.id: o.due for o in job.orders} == {o.id: o.due for o in spec.orders}
    for o in job.orders:
        for line in o.lines:
            assert line.mesh.is_file() and line.problem is None


def _footprint(mesh: trimesh.Trimesh) -> shapely.Geometry:
    tris = [shapely.Polygon(t[:, :2]) for t in mesh.triangles]
    return shapely.union_all([t for t in tris if t.area > 1e-12])


def _placed(plan_dir: Path, item) -> trimesh.Trimesh:
    mesh = trimesh.load(plan_dir / item["mesh"], force="mesh")
    mesh.apply_transform(np.asarray(item["transform"], dtype=float))
    return mesh


def test_tiny_day_end_to_end_plan_holds(tiny_day):
    folder, row = tiny_day
    plan_dir = folder / "out"
    plan = json.loads((plan_dir / "plan.json").read_text())
    job = load_job(folder / "job" / "day.yaml")
    # every ordered copy once, on a plate or unplaced with a reason
    want = Counter({(o.id, line.part): line.quantity for o in job.orders for line in o.lines})
    got = Counter((i["order"], i["part"]) for p in plan["plates"] for i in p["items"])
    got += Counter((u["order"], u["part"]) for u in plan["unplaced"] if u["reason"])
    assert got == want
    assert row["copies"] == 16 and row["plates"] == len(plan["plates"]) > 0
    assert {p["technology"] for p in plan["plates"]} == {"filament", "resin", "powder"}
    assert any(len(p["items"]) > 1 for p in plan["plates"])
    profiles = {p.name: p.profile for p in job.fleet}
    for plate in plan["plates"]:
        prof = profiles[plate["printer"]]
        s, m = plate["spacing"], plate["margin"]
        x, y, z = plate["volume"]
        meshes = [_placed(plan_dir, i) for i in plate["items"]]
        for mesh in meshes:
            lo, hi = mesh.bounds
            assert lo[2] >= -TOL and hi[2] <= z + TOL
            if plate["technology"] == "filament":
                assert abs(lo[2]) <= TOL          # resting on the plate
        if plate["technology"] == "powder":
            for mesh in meshes:
                lo, hi = mesh.bounds
                assert (lo >= m - TOL).all() and (hi <= np.array([x, y, z]) - m + TOL).all()
            cm = trimesh.collision.CollisionManager()
            for k, mesh in enumerate(meshes):
                cm.add_object(str(k), mesh)
            if len(meshes) > 1:
                assert cm.min_distance_internal() >= s - TOL
            continue
        feet = [_footprint(mesh) for mesh in meshes]
        loaded = load_profile(REPO / "plates" / f"{prof.name}.yaml")
        for f in feet:
            if loaded.plate_shape == "circle":
                # inside the circle shrunk by the margin: every vertex within R - m of the centre
                pts = shapely.get_coordinates(f)
                r = np.hypot(pts[:, 0] - x / 2, pts[:, 1] - y / 2).max()
                assert r <= min(x, y) / 2 - m + TOL
            else:
                assert shapely.box(m, m, x - m, y - m).buffer(TOL, join_style="mitre").covers(f)
            for zone in loaded.keep_out:
                x0, y0, x1, y1 = zone
                assert f.distance(shapely.box(x0, y0, x1, y1)) >= m - TOL
        for a, b in itertools.combinations(feet, 2):
            assert a.distance(b) >= s - TOL      # spacing between footprints, exact


def test_tiny_day_row_holds_its_bounds(tiny_day):
    # the row's figures stand beside lower bounds: never below them
    _, row = tiny_day
    assert row["late_orders"] >= row["surely_late"] >= 0
    assert row["lateness_h"] >= row["lateness_bound_h"] - 1e-6
    assert row["finish_h"] >= row["finish_bound_h"] > 0


def test_scale_names_its_sizes(capsys):
    from packer.bench.day import SCALE, bench_command
    assert SCALE == ((1000, 12), (2000, 12), (5000, 30), (10000, 60))    # issue 19, item 4
    assert bench_command(["--scale", "300", "--no-verify"]) == 2
    assert "--scale takes 1000, 2000, 5000, 10000, not 300" in capsys.readouterr().err


def test_whylate_reads_the_written_plan(tiny_day, capsys):
    # the diagnosis reads only plan.json and its job file: late orders, load, planner, load bounds
    from packer.bench.whylate import main
    folder, row = tiny_day
    assert main([str(folder / "out" / "plan.json")]) == 0
    text = capsys.readouterr().out
    assert f"late orders: {row['late_orders']} of" in text
    assert "due-aware load bounds:" in text and "work clock per phase" in text
