"""A deliberately broken job: clear messages, and a plan for everything that can be planned."""

import json
from pathlib import Path

from packer.cli import main

BROKEN = Path(__file__).parent / "data" / "broken" / "broken-day.yaml"


def test_broken_job_plans_the_rest(tmp_path, capsys):
    out = tmp_path / "plan"
    code = main(["plan", str(BROKEN), "-o", str(out), "--seconds", "5"])
    err = capsys.readouterr().err
    assert code == 3, err  # planned, with problems listed
    assert "broken-day.yaml:14: orders[0].lines[0].colour: unknown key 'colour'" in err
    assert "orders[0].lines[1].quantity: must be at least 1, got -2" in err
    assert "orders[0].lines[2].mesh: mesh file not found" in err
    assert "not-a-mesh.stl" in err

    plan = json.loads((out / "plan.json").read_text())
    placed = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"]]
    reasons = {(u["order"], u["part"], u["copy"]): u["reason"] for u in plan["unplaced"]}
    # the good line is planned in full; the line with an unknown key is refused, not half-read;
    # the open box is planned too: open edges are printable with caution (the defect reported)
    assert sorted(placed) == [("X-1", "clip", n) for n in (1, 2, 3)] + [("X-2", "open-box", n) for n in (1, 2)]
    assert all("colour" in reasons[("X-1", "cable-clip", n)] for n in (1, 2, 3))
    # every other ordered copy is listed with its reason; the negative quantity has no copies
    assert "not found" in reasons[("X-1", "nowhere", 1)] and ("X-1", "nowhere", 2) in reasons
    assert ("X-2", "not-a-mesh", 1) in reasons
    assert "does not fit the plate" in reasons[("X-2", "giant-slab", 1)]
    assert len(placed) + len(reasons) == 3 + 3 + 2 + 2 + 1 + 1
    # the parts table says what is wrong with each mesh, planned or refused
    rows = {Path(r["file"]).name: r for r in plan["parts"]}
    assert rows["open-box.stl"]["status"] == "planned"
    assert [(d["kind"], d["severity"], d["count"]) for d in rows["open-box.stl"]["defects"]] == \
        [("open edges", "caution", 4)]
    assert rows["not-a-mesh.stl"]["status"] == "refused"
    assert "not an STL file" in rows["not-a-mesh.stl"]["defects"][0]["detail"]
    report = (out / "report.md").read_text()
    assert "open-box.stl: caution: open edges: 4 edges used by one triangle only" in report


def test_refuses_to_overwrite_without_force(tmp_path, capsys):
    out = tmp_path / "plan"
    out.mkdir()
    (out / "plan.json").write_text("{}")
    assert main(["plan", str(BROKEN), "-o", str(out)]) == 1
    assert "use --force" in capsys.readouterr().err
