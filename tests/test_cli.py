"""The packer command as a user meets it: help with examples, quiet and JSON modes, handover files."""

import json
import zipfile
from pathlib import Path

import pytest

from packer import clihelp
from packer.cli import main

ROOT = Path(__file__).resolve().parent.parent
COMMANDS = [["plan"], ["replan"], ["nest"], ["pack"], ["bench", "nest"], ["bench", "pack"], ["bench", "fleet"],
            ["bench", "day"], ["bench", "replan"], ["bench", "plates"]]


def test_top_level_and_bench_help_exit_zero_with_examples(capsys):
    assert main(["--help"]) == 0
    assert "examples:" in capsys.readouterr().out
    assert main(["bench", "--help"]) == 0
    assert "examples:" in capsys.readouterr().out
    assert main(["bench"]) == 2
    assert main([]) == 2


@pytest.mark.parametrize("command", COMMANDS, ids=" ".join)
def test_every_command_help_has_examples_and_every_option_help(command, capsys):
    assert main(command + ["--help"]) == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "usage: packer " + " ".join(command) in text
    parser = clihelp.PARSERS["packer " + " ".join(command)]
    for action in parser._actions:
        assert action.help, f"packer {' '.join(command)}: {action.option_strings or action.dest} has no help"


def _tiny_job(tmp_path: Path) -> Path:
    job = tmp_path / "tiny.yaml"
    job.write_text(f"""name: tiny
start: 2026-12-07T07:00
mesh_roots: [{ROOT / 'jobs' / 'parts'}]
fleet:
  - {{name: bench-a, profile: fil-bench-244}}
orders:
  - id: T-1
    due: 2026-12-07T17:00
    lines:
      - {{mesh: {ROOT / 'jobs' / 'parts' / 'cable-clip.stl'}, quantity: 3, material: PLA}}
""")
    return job


def test_plan_quiet_json_stl_zip(tmp_path, capsys):
    job, out = _tiny_job(tmp_path), tmp_path / "out"
    code = main(["plan", str(job), "-o", str(out), "--seconds", "2", "--quiet", "--json", "--stl", "--zip",
                 "--plates", str(ROOT / "plates")])
    captured = capsys.readouterr()
    assert code == 0
    summary = json.loads(captured.out)                  # standard output is the JSON object alone
    assert summary["copies"] == {"ordered": 3, "placed": 3, "not_placed": 0} and summary["exit_code"] == 0
    assert captured.err == ""                           # quiet: no stage lines, no progress
    assert sorted(p.name for p in (out / "plates").glob("*.stl")) == [f"P0{k + 1}.stl"
                                                                      for k in range(summary["plates"])]
    with zipfile.ZipFile(out / "tiny-handover.zip") as z:
        names = set(z.namelist())
    assert {"tiny/plan.json", "tiny/report.html", "tiny/operator-sheets.html", "tiny/operator-sheets.csv",
            "tiny/picklist.csv", "tiny/plates/P01.3mf"} <= names
    # a plan without --zip removes the older zip, which would no longer match
    assert main(["plan", str(job), "-o", str(out), "--seconds", "2", "--quiet", "--force",
                 "--plates", str(ROOT / "plates")]) == 0
    assert not (out / "tiny-handover.zip").exists()
