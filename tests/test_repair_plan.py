"""Repair on request through a whole plan: what the plate files carry with and without
``repair: true``, the repaired meshes in the plan's folder, and the key's validation.

Real parts from tests/data/ampp (AM-Production-Planning-Instances, source in its README)."""

from __future__ import annotations

import json
import shutil
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import numpy as np
import pytest

from packer.intake.job import load_job
from packer.intake.mesh.read import read_mesh
from packer.intake.mesh.repair import closed_as_indexed
from packer.output.write import write_outputs
from packer.pipeline import PlanSettings, plan_job

ROOT = Path(__file__).resolve().parent.parent
AMPP = Path(__file__).parent / "data" / "ampp"
NS = {"m": "http://schemas.microsoft.com/3dmanufacturing/core/2015/02"}


def job_file(folder: Path, *, job_repair: str = "", lines=None) -> Path:
    (folder / "parts").mkdir(parents=True, exist_ok=True)
    for n in ("4", "42", "55", "56"):
        shutil.copy(AMPP / "meshes" / f"{n}.stl", folder / "parts" / f"{n}.stl")
    lines = lines or ["{mesh: parts/42.stl, quantity: 2, material: PLA}",
                      "{mesh: parts/56.stl, quantity: 1, material: PLA}",
                      "{mesh: parts/55.stl, quantity: 1, material: PLA}",
                      "{mesh: parts/4.stl, quantity: 1, material: PLA, repair: false}"]
    text = (f"name: repair-test\nstart: 2026-12-07T07:00\nplates_folder: {ROOT / 'plates'}\n{job_repair}"
            "fleet:\n  - {name: bench-a, profile: fil-bench-244}\n"
            "orders:\n  - id: R-1\n    due: 2026-12-09T13:00\n    lines:\n" +
            "".join(f"      - {ln}\n" for ln in lines))
    path = folder / "job.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def planned(folder: Path, **kw) -> tuple[dict, Path]:
    job = load_job(job_file(folder, **kw))
    out = folder / "out"
    write_outputs(plan_job(job, settings=PlanSettings(seconds=2, seed=0)), out)
    return json.loads((out / "plan.json").read_text()), out


def plate_objects(path: Path) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Each object of a plate file (3MF core specification): name -> (vertices, triangles)."""
    with zipfile.ZipFile(path) as z:
        model = ET.fromstring(z.read("3D/3dmodel.model"))
    out = {}
    for obj in model.iter(f"{{{NS['m']}}}object"):
        v = np.array([[float(e.get(k)) for k in "xyz"] for e in obj.iter(f"{{{NS['m']}}}vertex")])
        t = np.array([[int(e.get(k)) for k in ("v1", "v2", "v3")] for e in obj.iter(f"{{{NS['m']}}}triangle")])
        out[obj.get("name")] = (v, t)
    return out


def back_to_source(item: dict, objects) -> tuple[np.ndarray, np.ndarray]:
    """A copy's triangles in the plate file, moved back by the inverse of its transform."""
    v, t = objects[f"{item['order']}/{item['part']}/{item['copy']}"]
    inv = np.linalg.inv(np.asarray(item["transform"], dtype=float))
    return v @ inv[:3, :3].T + inv[:3, 3], t


def test_without_repair_the_plate_file_carries_the_customers_own_triangles(tmp_path):
    plan, out = planned(tmp_path, lines=["{mesh: parts/42.stl, quantity: 2, material: PLA}",
                                         "{mesh: parts/55.stl, quantity: 1, material: PLA}"])
    assert not (out / "meshes").exists()
    checked = 0
    for plate in plan["plates"]:
        objects = plate_objects(out / plate["file"])
        for item in plate["items"]:
            src = read_mesh((out / item["mesh"]).resolve())           # the file as written, nothing merged
            v, t = back_to_source(item, objects)
            assert np.array_equal(t, src.faces)                       # the same triangles, in the same order
            # the same corners, to the 5 decimals (1e-5 mm) a plate file carries
            assert np.abs(v - src.vertices).max() < 2e-5
            checked += 1
    assert checked == 3


def test_repair_true_puts_closed_repaired_meshes_into_the_plan_and_its_plate_files(tmp_path):
    plan, out = planned(tmp_path, job_repair="repair: true\n")
    items = [(p, it) for p in plan["plates"] for it in p["items"]]
    assert sorted((it["part"], it["copy"]) for _, it in items) + \
        sorted((u["part"], u["copy"]) for u in plan["unplaced"]) == \
        [("4", 1), ("42", 1), ("42", 2), ("55", 1), ("56", 1)]               # every copy once
    rows = {Path(r["file"]).name: r for r in plan["parts"]}
    assert "repair" not in rows["4.stl"] and rows["4.stl"]["status"] == "planned"
    manifest = json.loads((out / "manifest.json").read_text())["files"]
    for plate in plan["plates"]:
        objects = plate_objects(out / plate["file"])
        for item in plate["items"]:
            if item["part"] == "4":                                   # repair: false on its line
                assert item["mesh"].endswith("parts/4.stl")
                continue
            assert item["mesh"] == f"meshes/{item['part']}-repaired.3mf" and item["mesh"] in manifest
            fixed = read_mesh(out / item["mesh"])
            v, t = back_to_source(item, objects)
            assert np.array_equal(t, fixed.faces) and np.abs(v - fixed.vertices).max() < 2e-5
            row = rows[f"{item['part']}.stl"]
            assert row["status"] == "planned, repaired" and row["repair"]["file"] == item["mesh"]
            assert closed_as_indexed(fixed.faces) == row["repair"]["closed"]
    assert rows["42.stl"]["repair"]["closed"] and rows["56.stl"]["repair"]["closed"]
    assert not rows["55.stl"]["repair"]["closed"] and rows["55.stl"]["repair"]["left"]
    # measured again: the divergence theorem on the written mesh gives the volume the table reports
    fixed = read_mesh(out / "meshes" / "56-repaired.3mf")
    t = fixed.vertices[fixed.faces]
    six = np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum()
    assert six / 6 == pytest.approx(rows["56.stl"]["repair"]["after"]["volume_mm3"], rel=1e-6)
    assert rows["42.stl"]["repair"]["before"]["crowded_edges"] == 32
    report = (out / "report.md").read_text()
    assert "parts/42.stl: repaired (meshes/42-repaired.3mf, closed and consistently wound)" in report


def test_a_line_overrides_the_job_and_both_can_ask_for_repair(tmp_path):
    job = load_job(job_file(tmp_path, lines=["{mesh: parts/42.stl, quantity: 1, material: PLA, repair: true}",
                                             "{mesh: parts/56.stl, quantity: 1, material: PLA}"]))
    assert [ln.repair for ln in job.orders[0].lines] == [True, False]
    job = load_job(job_file(tmp_path, job_repair="repair: true\n",
                            lines=["{mesh: parts/42.stl, quantity: 1, material: PLA, repair: false}",
                                   "{mesh: parts/56.stl, quantity: 1, material: PLA}"]))
    assert [ln.repair for ln in job.orders[0].lines] == [False, True]


def test_a_repair_value_that_is_not_true_or_false_names_the_file_and_key(tmp_path):
    job = load_job(job_file(tmp_path, job_repair="repair: maybe\n",
                            lines=["{mesh: parts/42.stl, quantity: 1, material: PLA, repair: yes please}",
                                   "{mesh: parts/56.stl, quantity: 1, material: PLA}"]))
    shown = [str(p) for p in job.problems]
    assert any(s.startswith(f"{tmp_path / 'job.yaml'}:4: repair: must be true or false, got 'maybe'") for s in shown)
    assert any(s.startswith(f"{tmp_path / 'job.yaml'}:") and
               "orders[0].lines[0].repair: must be true or false, got 'yes please'" in s for s in shown)
    first, second = job.orders[0].lines
    assert first.problem and "repair" in first.problem
    assert second.problem is None and second.repair is False                 # the rest is still planned


def test_a_replanned_version_carries_the_repaired_meshes_in_its_own_folder(tmp_path):
    from packer.replan.command import replan_command
    plan, out = planned(tmp_path, job_repair="repair: true\n",
                        lines=["{mesh: parts/42.stl, quantity: 2, material: PLA}",
                               "{mesh: parts/56.stl, quantity: 1, material: PLA}"])
    victim = min(plan["plates"], key=lambda p: (p["start"], p["id"]))
    assert replan_command([str(out), "--failed", victim["id"], "--now", victim["start"][:11] + "07:30",
                           "--seconds", "2"]) == 0
    v2 = json.loads((out / "v2" / "plan.json").read_text())
    items = [it for p in v2["plates"] for it in p["items"]]
    assert items and all(it["mesh"] in ("meshes/42-repaired.3mf", "meshes/56-repaired.3mf") for it in items)
    for p in v2["plates"]:
        objects = plate_objects(out / "v2" / p["file"])
        for item in p["items"]:
            fixed = read_mesh(out / "v2" / item["mesh"])                 # in v2's own folder
            v, t = back_to_source(item, objects)
            assert np.array_equal(t, fixed.faces) and np.abs(v - fixed.vertices).max() < 2e-5
