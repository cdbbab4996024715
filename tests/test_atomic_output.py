"""Outputs are confined, atomic and byte-identical on a rerun.

The kill test writes a plan, then replaces it (``--force``) in a child process
that is killed (SIGKILL, no clean-up) at several moments: before writing, after
the first plate file, while the reports are written and just before the final
rename. After each kill the folder must hold the complete old plan, byte for
byte; a run that is not killed leaves the complete new plan.
"""

import contextlib
import json
import os
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import pytest

import packer.output.write as output
from packer.cli import main
from packer.intake.job import load_job
from packer.output.write import StagedFolder, folder_name, write_outputs
from packer.pipeline import PlanSettings, plan_job

BAD = Path(__file__).resolve().parent / "data" / "bad"


def _job(tmp_path: Path, name: str, extra: str = "") -> Path:
    """A small job: slabs in PLA and PETG on two printers (two plates at least)."""
    folder = tmp_path / "jobs"
    folder.mkdir(exist_ok=True)
    shutil.copy(BAD / "slab.stl", folder / "slab.stl")
    text = (f"name: {name}\nstart: 2026-12-07T07:00\nplates_folder: {BAD.parent.parent.parent / 'plates'}\n"
            "fleet:\n  - {name: bench-a, profile: fil-bench-244, materials: [PLA]}\n"
            "  - {name: bench-b, profile: fil-bench-244, materials: [PETG]}\n"
            "orders:\n  - id: A-1\n    due: 2026-12-07T17:00\n    lines:\n"
            "      - {mesh: slab.stl, quantity: 3, material: PLA}\n"
            "      - {mesh: slab.stl, part: c2, quantity: 2, material: PETG}\n" + extra)
    path = folder / f"{name}.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _outcome(path: Path, seed: int = 0):
    return plan_job(load_job(path), settings=PlanSettings(seconds=1, seed=seed))


MOMENTS = {
    "before writing": ("_write_all", 0),
    "after the first plate file": ("write_plate_file", 1),
    "during the reports": ("write_reports", 0),
    "before the final rename": ("_exchange", 0),
}


def _killed_write(outcome, out: Path, hook: str, after: int) -> int:
    """Replace the plan in ``out`` in a forked child killed at ``hook`` (after ``after`` calls)."""
    pid = os.fork()
    if pid == 0:                                    # the child: never returns
        try:
            real, calls = getattr(output, hook), [0]

            def killer(*a, **k):
                if calls[0] >= after:
                    os.kill(os.getpid(), signal.SIGKILL)
                calls[0] += 1
                return real(*a, **k)
            setattr(output, hook, killer)
            write_outputs(outcome, out, replace=True)
        finally:
            os._exit(0)
    _, status = os.waitpid(pid, 0)
    return status


def test_kill_at_any_moment_leaves_the_old_plan_or_the_new(tmp_path):
    old = _outcome(_job(tmp_path, "day"))
    new = _outcome(_job(tmp_path, "day2", "  - id: B-1\n    due: 2026-12-07T18:00\n    lines:\n"
                                          "      - {mesh: slab.stl, part: b, quantity: 4, material: PLA}\n"))
    out = tmp_path / "out" / "day"
    write_outputs(old, out)
    (out / "operator-notes.txt").write_text("not packer's\n", encoding="utf-8")
    before = _snapshot(out)
    assert "manifest.json" in before and "plates/P01.3mf" in before
    for moment, (hook, after) in MOMENTS.items():
        status = _killed_write(new, out, hook, after)
        assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL, moment
        assert _snapshot(out) == before, f"killed {moment}: the old plan is not intact"
    write_outputs(new, out, replace=True)
    after = _snapshot(out)
    plan = json.loads(after["plan.json"])
    assert {i["order"] for p in plan["plates"] for i in p["items"]} == {"A-1", "B-1"}
    # only what packer wrote was replaced; the operator's file moved over; no leftovers beside
    assert after["operator-notes.txt"] == b"not packer's\n"
    assert set(json.loads(after["manifest.json"])["files"]) == set(after) - {"manifest.json", "operator-notes.txt"}
    assert sorted(p.name for p in out.parent.iterdir()) == ["day"]


def test_rerun_is_byte_identical(tmp_path):
    """Same job, seed and budget: the same plan.json, plate files and reports, byte for byte, also from
    another process whose string hashing differs (so set and dict order cannot leak into the files)."""
    path = _job(tmp_path, "day", "  - id: B-1\n    due: 2026-12-07T12:00\n    lines:\n"
                                 "      - {mesh: slab.stl, part: r, quantity: 2, material: grey-resin}\n"
                                 "  - id: C-1\n    due: 2026-12-07T15:00\n    lines:\n"
                                 "      - {mesh: slab.stl, part: s, quantity: 1, material: PLA}\n")
    path.write_text(path.read_text(encoding="utf-8").replace(
        "fleet:\n", "fleet:\n  - {name: vat, profile: resin-vat-176}\n"), encoding="utf-8")
    a, b = tmp_path / "a" / "out", tmp_path / "b" / "out"
    write_outputs(_outcome(path), a)
    seed = "1" if os.environ.get("PYTHONHASHSEED") != "1" else "2"
    env = dict(os.environ, PYTHONHASHSEED=seed, PYTHONPATH=str(BAD.parent.parent.parent))
    subprocess.run([sys.executable, "-m", "packer", "plan", str(path), "-o", str(b), "--seconds", "1", "--quiet"],
                   check=True, env=env, cwd=tmp_path)
    sa, sb = _snapshot(a), _snapshot(b)
    assert sa.keys() == sb.keys()
    differ = [k for k in sa if sa[k] != sb[k] and k != "run.json"]
    assert differ == [], differ
    assert "plates/P01.3mf" in sa and "report.html" in sa and "picklist.csv" in sa and "plates/P03.3mf" in sa
    assert b"wall_s" not in sa["plan.json"] and b"planning_s" in sa["run.json"]


def test_output_folder_from_job_name_is_never_a_path(tmp_path, capsys, monkeypatch):
    assert folder_name("brindle-lane-day") == "brindle-lane-day"
    for hostile in ("../../etc", "/tmp/x", "a/b", ".hidden", "..", "", "x\x00y", "é"):
        name = folder_name(hostile)
        assert "/" not in name and not name.startswith(".") and name not in ("", "..")
    assert folder_name("a/b") != folder_name("a-b")      # changed names carry a digest
    monkeypatch.chdir(tmp_path)
    job = _job(tmp_path, "day").read_text(encoding="utf-8").replace("name: day", "name: ../../escaped")
    (tmp_path / "jobs" / "evil.yaml").write_text(job, encoding="utf-8")
    assert main(["plan", str(tmp_path / "jobs" / "evil.yaml"), "--seconds", "1"]) == 0
    assert [p.name for p in (tmp_path / "out").iterdir()] == [folder_name("../../escaped")]
    assert not (tmp_path.parent.parent / "escaped").exists()


def test_refuses_foreign_folders_and_links(tmp_path):
    foreign = tmp_path / "home"
    foreign.mkdir()
    (foreign / "thesis.txt").write_text("mine")
    with pytest.raises(Exception, match="holds files packer did not write"):
        StagedFolder(foreign, replace=True)
    link = tmp_path / "link"
    link.symlink_to(foreign)
    with pytest.raises(Exception, match="not a folder"):
        StagedFolder(link, replace=True)
    assert (foreign / "thesis.txt").read_text() == "mine"


def test_force_replaces_old_replans_but_not_foreign_files(tmp_path):
    out = tmp_path / "out"
    write_outputs(_outcome(_job(tmp_path, "day")), out)
    staged = StagedFolder(out / "v2")                     # a replanned version, as replan writes it
    (staged.work / "plan.json").write_text("{}")
    staged.commit()
    os.symlink("v2", out / "latest")
    (out / "plates" / "mine.txt").write_text("operator's")
    write_outputs(_outcome(_job(tmp_path, "day")), out, replace=True)
    assert not (out / "v2").exists() and not (out / "latest").exists()
    assert (out / "plan.json").is_file()
    # a foreign file inside a folder packer wrote moves to the same place in the new plan
    assert (out / "plates" / "mine.txt").read_text() == "operator's"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["jobs", "out"]


def test_killed_replan_leaves_no_half_version(tmp_path):
    """A replan killed while it writes its reports leaves no v2 (the staging folder is hidden beside it);
    the next replan clears the leftover and writes v2 complete."""
    import packer.replan.write as replan_write
    from packer.replan.command import replan_command
    out = tmp_path / "out"
    write_outputs(_outcome(_job(tmp_path, "day")), out)
    before = _snapshot(out)
    argv = [str(out), "--failed", "P01", "--now", "2026-12-07T10:00", "--seconds", "1"]
    pid = os.fork()
    if pid == 0:
        try:
            real = replan_write.write_reports

            def killer(*a, **k):
                os.kill(os.getpid(), signal.SIGKILL)
                return real(*a, **k)
            replan_write.write_reports = killer
            with open(os.devnull, "w") as sink, contextlib.redirect_stdout(sink), contextlib.redirect_stderr(sink):
                replan_command(argv)
        finally:
            os._exit(0)
    _, status = os.waitpid(pid, 0)
    assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
    visible = {k: v for k, v in _snapshot(out).items() if not k.startswith(".")}
    assert visible == before and not (out / "v2").exists()
    assert replan_command(argv) in (0, 3)
    assert (out / "v2" / "plan.json").is_file() and (out / "v2" / "manifest.json").is_file()
    assert not any(p.name.startswith(".v2") for p in out.iterdir())
