"""End to end: plan a small job, replan it twice from the command, check the versions on disk.

Checks are independent of packer: file bytes compared with hashlib, plate
files read back with trimesh, footprints rebuilt from the written meshes with
shapely (union of projected triangles) and spaced by shapely's exact distances.
"""

import csv
import hashlib
import json
from pathlib import Path

import numpy as np
import pytest
import shapely
import trimesh
from shapely.geometry import box

from packer.errors import InputError
from packer.intake.job import load_job
from packer.output.write import write_outputs
from packer.pipeline import PlanSettings, plan_job
from packer.replan.command import replan_command

ROOT = Path(__file__).resolve().parent.parent
TOL = 1e-6

JOB = """name: small-day
start: 2026-12-07T07:00
plates_folder: {plates}
calendar: {{shift: ["07:00", "19:00"], days: [mon, tue, wed, thu, fri]}}
fleet:
  - {{name: fa, profile: fil-bench-244, materials: [PLA]}}
  - {{name: fb, profile: fil-bench-244, materials: [PLA, PETG]}}
orders:
  - {{id: S-1, due: 2026-12-07T12:00, priority: 2, lines: [{{mesh: parts/block.stl, quantity: 4, material: PLA}},
                                                         {{mesh: parts/cube.stl, quantity: 6, material: PLA}}]}}
  - {{id: S-2, due: 2026-12-07T17:00, lines: [{{mesh: parts/slab.stl, quantity: 6, material: PETG}}]}}
  - {{id: S-3, due: 2026-12-08T10:00, lines: [{{mesh: parts/cube.stl, quantity: 5, material: PLA}},
                                             {{mesh: parts/slab.stl, quantity: 2, material: PLA}}]}}
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _shadow(mesh):
    tri = mesh.triangles[:, :, :2]
    u, v = tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]
    keep = np.abs(u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]) > 1e-12
    return shapely.union_all(shapely.polygons(tri[keep]))


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    root = tmp_path_factory.mktemp("replan")
    (root / "parts").mkdir()
    for name, size in (("block", (30, 20, 10)), ("cube", (12, 12, 6)), ("slab", (100, 80, 8))):
        trimesh.creation.box(size).apply_translation(np.array(size) / 2).export(root / "parts" / f"{name}.stl")
    (root / "job.yaml").write_text(JOB.format(plates=ROOT / "plates"))
    job = load_job(root / "job.yaml")
    out = root / "out"
    write_outputs(plan_job(job, settings=PlanSettings(seconds=2, seed=0)), out)
    return root, out


def _plan(folder: Path) -> dict:
    return json.loads((folder / "plan.json").read_text())


def _check_version(folder: Path, ordered: set):
    plan = _plan(folder)
    seen = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"]]
    seen += [(u["order"], u["part"], u["copy"]) for u in plan["unplaced"]]
    assert len(seen) == len(set(seen)) and set(seen) == ordered
    for p in plan["plates"]:
        assert p["state"] in ("planned", "printing", "finished", "failed")
        x, y, _ = p["volume"]
        inner = box(p["margin"], p["margin"], x - p["margin"], y - p["margin"])
        shadows = []
        for item in p["items"]:
            mesh = trimesh.load(folder / item["mesh"], force="mesh")
            mesh.apply_transform(np.asarray(item["transform"]))
            assert abs(mesh.bounds[0][2]) < 1e-6            # resting on the plate
            shadows.append(_shadow(mesh))
            assert inner.buffer(TOL).covers(shadows[-1])
        for i in range(len(shadows)):
            for j in range(i + 1, len(shadows)):
                assert shadows[i].distance(shadows[j]) >= p["spacing"] - TOL
        scene = trimesh.load(folder / p["file"])
        assert len(scene.geometry) == len(p["items"])       # one object per copy


def test_failed_plate_replanned_into_v2(planned):
    root, out = planned
    first = _plan(out)
    ordered = {(i["order"], i["part"], i["copy"]) for p in first["plates"] for i in p["items"]}
    v1_sha = _sha(out / "plan.json")
    victim = min(first["plates"], key=lambda p: (p["start"], p["id"]))
    now = victim["start"][:11] + "07:30"
    code = replan_command([str(out), "--failed", victim["id"], "--now", now, "--seconds", "2"])
    assert code == 0
    v2 = out / "v2"
    assert _sha(out / "plan.json") == v1_sha                   # the old plan is never overwritten
    assert (out / "latest").resolve() == v2.resolve()
    plan = _plan(v2)
    _check_version(v2, ordered)
    states = {p["id"]: p["state"] for p in plan["plates"]}
    assert victim["id"] not in states                          # no survivor: kept only as a record
    record = plan["replan"]["failed_plates"][0]
    assert record["id"] == victim["id"] and len(record["lost"]) == len(victim["items"])
    old = {p["id"]: p for p in first["plates"]}
    kept = [p for p in plan["plates"] if p["id"] in old]
    assert kept and all(_sha(v2 / p["file"]) == _sha(out / old[p["id"]]["file"]) for p in kept)
    for p in kept:
        assert [i["transform"] for i in p["items"]] == [i["transform"] for i in old[p["id"]]["items"]]
    assert plan["replan"]["plate_files"]["rewritten_unchanged"] == 0
    back = [i for p in plan["plates"] if p["id"] not in old for i in p["items"]]
    assert {(i["order"], i["part"], i["copy"]) for i in back} == \
        {(i["order"], i["part"], i["copy"]) for i in victim["items"]}
    assert all(i.get("failures") == 1 for i in back)
    changes = (v2 / "changes.md").read_text()
    assert f"plate {victim['id']} failed" in changes and "### Copies moved" in changes
    assert "Changes in version 2" in (v2 / "report.md").read_text()
    # states: every plate with its state and moment; the report names the version and the moment
    assert all(p["state_at"] for p in plan["plates"]) and record["state_at"] == record["end"]
    assert all(p["state_at"] == now + ":00" for p in plan["plates"] if p["state"] == "planned")
    html = (v2 / "report.html").read_text()
    assert "version 2</h1>" in html and "Replanned at" in html
    assert f"{victim['id']}: " in html and f"0 survived, {len(victim['items'])} lost" in html
    assert ">now</text>" in (v2 / "views" / "timeline.svg").read_text()
    assert ">now</text>" not in (out / "views" / "timeline.svg").read_text()
    assert all(p["state"] == "planned" and p["state_at"] == first["start"] for p in first["plates"])


def test_second_replan_cancels_and_takes_a_printer_down(planned):
    root, out = planned
    v2 = _plan(out / "v2")
    v2_sha = _sha(out / "v2" / "plan.json")
    now = v2["replan"]["now"][:11] + "08:00"
    from datetime import datetime, timedelta
    busy = max([datetime.fromisoformat(p["end"]) for p in v2["plates"] if p["printer"] == "fb"
                and (p["state"] != "planned" or p["start"] < now)] + [datetime.fromisoformat(now)])
    down = (busy + timedelta(minutes=30)).isoformat(timespec="minutes")
    up = (busy + timedelta(hours=4)).isoformat(timespec="minutes")
    (root / "ev.yaml").write_text(f"now: {now}\nevents:\n  - {{cancelled: S-3}}\n"
                                  f"  - {{down: fb, from: {down}, until: {up}}}\n")
    assert replan_command([str(out), "--events", str(root / "ev.yaml"), "--seconds", "2"]) in (0, 3)
    v3 = out / "v3"
    assert _sha(out / "v2" / "plan.json") == v2_sha
    assert (out / "latest").resolve() == v3.resolve()
    plan = _plan(v3)
    assert plan["replan"]["cancelled"] == ["S-3"]
    for p in plan["plates"]:
        if p["state"] == "planned":
            assert all(i["order"] != "S-3" for i in p["items"])
            if p["printer"] == "fb":
                assert p["free"] <= down + ":00" or p["start"] >= up + ":00"
    assert all(u["order"] != "S-3" for u in plan["unplaced"])
    cancelled = [o for o in plan["orders"] if o["order"] == "S-3"]   # the order stays, marked
    assert len(cancelled) == 1 and cancelled[0]["cancelled"] is True and cancelled[0]["late_minutes"] == 0
    assert plan["replan"]["cancelled_copies"] == {"S-3": "stock"}     # the job's default
    assert "order S-3 cancelled" in (v3 / "changes.md").read_text()
    old = {p["id"]: p for p in v2["plates"]}
    for p in plan["plates"]:                  # printed plates keep their cancelled copies, marked
        if p["id"] in old and p["state"] != "planned":
            assert [{k: v for k, v in i.items() if k != "cancelled"} for i in p["items"]] == old[p["id"]]["items"]
            assert all(i.get("cancelled") == ("stock" if i["order"] == "S-3" else None) for i in p["items"])
    rows = list(csv.DictReader(open(v3 / "picklist.csv", encoding="utf-8")))
    for r in rows:
        assert r["order_due"], r              # a cancelled order keeps its due time in the pick list
        assert (r["cancelled"] == "cancelled: keep as stock") == (r["order"] == "S-3")
    html = (v3 / "report.html").read_text()
    assert "cancelled" in html


def test_events_checked_against_the_written_plan(planned):
    _, out = planned
    with pytest.raises(InputError, match="--failed P99: no plate P99 in the plan"):
        replan_command([str(out), "--failed", "P99", "--now", "2026-12-07T09:00"])
    with pytest.raises(InputError, match="--down nowhere: no printer nowhere"):
        replan_command([str(out), "--down", "nowhere", "--now", "2026-12-07T09:00"])
    with pytest.raises(InputError, match="before the plan's start"):
        replan_command([str(out), "--now", "2026-12-06T09:00"])


def test_no_plan_no_replan(tmp_path):
    with pytest.raises(InputError, match="no plan.json here"):
        replan_command([str(tmp_path), "--now", "2026-12-07T09:00"])


def test_survivors_stay_on_the_failed_plate_and_a_replaced_plan_is_refused(planned, tmp_path):
    import shutil
    root, _ = planned
    shutil.copytree(root, tmp_path / "copy", symlinks=True, ignore=shutil.ignore_patterns("v[0-9]*", "latest"))
    fresh = tmp_path / "copy" / "out"
    first = _plan(fresh)
    victim = max(first["plates"], key=lambda p: len(p["items"]))
    kept = victim["items"][0]
    name = f"{kept['order']}/{kept['part']}/{kept['copy']}"
    now = victim["start"][:11] + "07:20"
    assert replan_command([str(fresh), "--failed", victim["id"], "--survived", name, "--now", now,
                           "--seconds", "2"]) == 0
    plan = _plan(fresh / "v2")
    ordered = {(i["order"], i["part"], i["copy"]) for p in first["plates"] for i in p["items"]}
    _check_version(fresh / "v2", ordered)
    failed = next(p for p in plan["plates"] if p["id"] == victim["id"])
    assert failed["state"] == "failed" and failed["file"].endswith("-survived.3mf")
    assert [(i["order"], i["part"], i["copy"]) for i in failed["items"]] == [(kept["order"], kept["part"], kept["copy"])]
    assert len(failed["lost"]) == len(victim["items"]) - 1
    html = (fresh / "v2" / "report.html").read_text()
    assert f"1 survived, {len(victim['items']) - 1} lost" in html and "g in the lost copies" in html
    assert "failed at" in html and "Lost when it failed" in html
    with pytest.raises(InputError, match="not on any failed plate"):
        replan_command([str(fresh), "--failed", victim["id"], "--survived", "X-1/none/1", "--now", now])
    (fresh / "plan.json").write_text((fresh / "plan.json").read_text().replace('"job"', '"job" ', 1))
    with pytest.raises(InputError, match="was replaced after v2 was made"):
        replan_command([str(fresh), "--now", now])


def test_added_orders_join_the_plan_with_line_problems_unplaced(planned, tmp_path):
    import shutil
    root, _ = planned
    shutil.copytree(root, tmp_path / "copy", symlinks=True, ignore=shutil.ignore_patterns("v[0-9]*", "latest"))
    out = tmp_path / "copy" / "out"
    (tmp_path / "copy" / "clash.yaml").write_text(
        "orders:\n  - {id: S-1, due: 2026-12-07T18:00, lines: [{mesh: parts/cube.stl, quantity: 1, material: PLA}]}\n")
    with pytest.raises(InputError, match=r"clash.yaml:2: orders\[0\].id: order S-1 is already in the plan"):
        replan_command([str(out), "--added", str(tmp_path / "copy" / "clash.yaml"), "--now", "2026-12-07T08:00"])
    (tmp_path / "copy" / "rush.yaml").write_text(
        "orders:\n  - id: R-9\n    due: 2026-12-07T18:00\n    lines:\n"
        "      - {mesh: parts/cube.stl, quantity: 3, material: PLA}\n"
        "      - {mesh: parts/missing.stl, quantity: 2, material: PLA}\n")
    assert replan_command([str(out), "--added", str(tmp_path / "copy" / "rush.yaml"), "--now",
                           "2026-12-07T08:00", "--seconds", "2"]) == 3
    plan = _plan(out / "v2")
    placed = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"] if i["order"] == "R-9"]
    assert sorted(placed) == [("R-9", "cube", n) for n in (1, 2, 3)]
    missing = [u for u in plan["unplaced"] if u["order"] == "R-9"]
    assert len(missing) == 2 and all("mesh file not found" in u["reason"] for u in missing)
    assert [o["id"] for o in plan["replan"]["added_orders"]] == ["R-9"]
    # the added order is read back from plan.json by the next replan
    assert replan_command([str(out), "--now", "2026-12-07T08:30", "--seconds", "2"]) == 3
    assert "R-9" in {o["order"] for o in _plan(out / "v3")["orders"]}
