"""Plate files and reports from a small hand-made plan."""

from datetime import datetime, timedelta
from html import escape
from pathlib import Path

import numpy as np
import trimesh

from packer.output.export import write_plate_file
from packer.intake.job import Calendar
from packer.output.plan import OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy, plan_to_dict
from packer.output.report import SAFETY, write_reports


def _plan(tmp_path: Path) -> tuple[Plan, Path]:
    mesh_path = tmp_path / "block.stl"
    trimesh.creation.box((20, 10, 5)).export(mesh_path)
    # the box is centred on its origin: lift it onto the plate and move it
    items = []
    for n, (x, y, turn) in enumerate([(20, 20, 0), (60, 20, 90)], start=1):
        t = trimesh.transformations.rotation_matrix(np.radians(turn), [0, 0, 1])
        t[:3, 3] = [x, y, 2.5]
        items.append(PlacedCopy("A-1", "block", n, mesh_path, t, "PLA", 1000.0, 1.2))
    start = datetime(2026, 12, 7, 7, 0)
    plate = PlatePlan(id="P01", printer="bench-a", profile="fil-bench-244", technology="filament",
                      material="PLA", volume=(244, 198, 205), spacing=6, margin=4, items=tuple(items),
                      start=start, end=start + timedelta(hours=2), free=start + timedelta(hours=2, minutes=5),
                      height_mm=5, utilization=0.0076, print_s=7200, mass_g=2.4, file="plates/P01.3mf")
    orders = (OrderStatus("A-1", start + timedelta(hours=1), 1, 3, 2, plate.end),)
    plan = Plan(job="t", job_file=str(tmp_path / "t.yaml"), start=start, plates=(plate,),
                unplaced=(UnplacedCopy("A-1", "block", 3, "larger than every plate"),), orders=orders)
    return plan, mesh_path


def test_plate_file_has_one_named_object_per_copy(tmp_path):
    plan, mesh_path = _plan(tmp_path)
    plate = plan.plates[0]
    (tmp_path / "plates").mkdir()
    out = write_plate_file(plate, tmp_path / plate.file, lambda p: trimesh.load(p, force="mesh"))
    # read back with trimesh's own 3MF reader (a general-purpose reference library)
    scene = trimesh.load(out)
    assert sorted(scene.geometry) == ["A-1/block/1", "A-1/block/2"]
    bounds = sorted(np.round(g.bounds, 6).tolist() for g in scene.dump())
    assert bounds == [[[10, 15, 0], [30, 25, 5]], [[55, 10, 0], [65, 30, 5]]]


def test_plan_json_paths_are_relative_and_copies_listed(tmp_path):
    plan, _ = _plan(tmp_path)
    data = plan_to_dict(plan, tmp_path / "out")
    item = data["plates"][0]["items"][0]
    assert item["mesh"] == "../block.stl"
    assert len(data["plates"][0]["items"]) + len(data["unplaced"]) == 3
    assert data["orders"][0]["late_minutes"] == 60.0


def test_reports_carry_safety_late_orders_and_picklist(tmp_path):
    plan, _ = _plan(tmp_path)
    views = {"P01": [("top view", "<svg xmlns='http://www.w3.org/2000/svg'></svg>")]}
    files = write_reports(plan, tmp_path, views=views, printers=["bench-a"], calendar=Calendar())
    html = files["html"].read_text()
    assert escape(SAFETY[0]) in html and "class='bad'" in html and "larger than every plate" in html
    md = files["md"].read_text()
    assert "## Safety" in md and "| A-1 |" in md
    rows = files["picklist"].read_text().strip().splitlines()
    assert rows[0].startswith("plate,printer") and len(rows) == 3
