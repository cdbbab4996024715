"""The same events, seed and budget give the same replan (packer/replan/README.md, "How the
replan works": every choice reads the work clock, never the wall clock).

A small job is planned once; two copies of its output folder are replanned with the same
events (a failed plate, a printer down, a cancelled order: due times are tight, so the
stable plan is late and the replan goes on to plan every plate not started again: the budget
of 3 s gives that step a share that pays for its plates, and the test checks it ran); the
two plan.json files are compared key by key. plan.json holds no wall-clock or work figure (those go to run.json), so
no key is left out; changes.md and every plate file must match byte for byte too.
"""

import hashlib
import json
import shutil
from pathlib import Path

import numpy as np
import trimesh

from packer.intake.job import load_job
from packer.output.write import write_outputs
from packer.pipeline import PlanSettings, plan_job
from packer.replan.command import replan_command

ROOT = Path(__file__).resolve().parent.parent

JOB = """name: repeat-day
start: 2026-12-07T07:00
plates_folder: {plates}
calendar: {{shift: ["07:00", "19:00"], days: [mon, tue, wed, thu, fri]}}
fleet:
  - {{name: fa, profile: fil-bench-244, materials: [PLA]}}
  - {{name: fb, profile: fil-bench-244, materials: [PLA, PETG]}}
  - {{name: fc, profile: fil-bench-244, materials: [PLA, PETG]}}
orders:
  - {{id: R-1, due: 2026-12-07T09:30, priority: 3, lines: [{{mesh: parts/block.stl, quantity: 8, material: PLA}},
                                                         {{mesh: parts/cube.stl, quantity: 10, material: PLA}}]}}
  - {{id: R-2, due: 2026-12-07T10:30, lines: [{{mesh: parts/slab.stl, quantity: 8, material: PETG}}]}}
  - {{id: R-3, due: 2026-12-07T11:00, priority: 2, lines: [{{mesh: parts/cube.stl, quantity: 12, material: PLA}},
                                                         {{mesh: parts/slab.stl, quantity: 3, material: PLA}}]}}
  - {{id: R-4, due: 2026-12-08T10:00, lines: [{{mesh: parts/block.stl, quantity: 6, material: PETG}}]}}
"""


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _replan(out: Path, plan: dict) -> Path:
    now = plan["start"][:11] + "08:00"
    running = [p for p in plan["plates"] if p["start"][:16] <= now < p["end"][:16]]
    victim = max(running, key=lambda p: (len(p["items"]), p["id"]))
    other = next(p["printer"] for p in running if p["printer"] != victim["printer"])
    since = max(p["free"][:16] for p in running if p["printer"] == other)
    until = f"{since[:11]}{int(since[11:13]) + 3:02d}{since[13:]}"
    assert replan_command([str(out), "--failed", victim["id"], "--now", now,
                           "--down", f"{other}@{since}..{until}", "--cancelled", "R-4",
                           "--seconds", "3", "--seed", "3"]) in (0, 3)
    return out / "v2"


def test_two_replans_of_the_same_case_give_the_same_version(tmp_path):
    (tmp_path / "parts").mkdir()
    for name, size in (("block", (30, 20, 10)), ("cube", (12, 12, 6)), ("slab", (100, 80, 8))):
        trimesh.creation.box(size).apply_translation(np.array(size) / 2).export(tmp_path / "parts" / f"{name}.stl")
    (tmp_path / "job.yaml").write_text(JOB.format(plates=ROOT / "plates"))
    write_outputs(plan_job(load_job(tmp_path / "job.yaml"), settings=PlanSettings(seconds=2, seed=0)),
                  tmp_path / "a")
    shutil.copytree(tmp_path / "a", tmp_path / "b", symlinks=True)
    plan = json.loads((tmp_path / "a" / "plan.json").read_text())
    va, vb = _replan(tmp_path / "a", plan), _replan(tmp_path / "b", plan)
    a = json.loads((va / "plan.json").read_text())
    b = json.loads((vb / "plan.json").read_text())
    assert set(a) == set(b)
    for key in sorted(a):
        assert a[key] == b[key], key
    assert (va / "changes.md").read_text() == (vb / "changes.md").read_text()
    assert sorted(p.name for p in (va / "plates").iterdir()) == sorted(p.name for p in (vb / "plates").iterdir())
    for f in (va / "plates").iterdir():
        assert _sha(f) == _sha(vb / "plates" / f.name), f.name
    # wall-clock and work figures go to run.json only
    assert "replan_s" not in json.dumps(a) and "work_clock_s" not in json.dumps(a)
    run = json.loads((va / "run.json").read_text())
    assert run["work_clock_s"] and run["phases_s"] and a["notes"]["safety_nets"] == []
    # every step ran, the re-plan of every plate not started too (its share pays for its plates)
    assert "plates not started planned again" in run["work_clock_s"], sorted(run["work_clock_s"])
