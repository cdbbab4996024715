"""The bad-input corpus (tests/data/bad/): each file gives its documented exit code and message,
the rest of its job is planned, and nothing is written outside the output folder."""

import io
import json
import os
import shutil
import zipfile
from pathlib import Path

import pytest
import yaml

from packer.cli import main

BAD = Path(__file__).resolve().parent / "data" / "bad"
EXPECTED = yaml.safe_load((BAD / "expected.yaml").read_text(encoding="utf-8"))


def _run(argv, capsys):
    code = main(argv)
    got = capsys.readouterr()
    return code, got.out + got.err


def _files(folder: Path) -> set[str]:
    return {p.relative_to(folder).as_posix() for p in folder.rglob("*")}


def _check_plan(out: Path, code: int) -> None:
    """A written plan accounts for every copy once, and GOOD-1 (2 copies) is planned."""
    plan = json.loads((out / "plan.json").read_text(encoding="utf-8"))
    placed = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"]]
    unplaced = [(u["order"], u["part"], u["copy"]) for u in plan["unplaced"]]
    assert len(set(placed + unplaced)) == len(placed) + len(unplaced)
    assert sorted(k for k in placed if k[0] == "GOOD-1") == [("GOOD-1", "slab", 1), ("GOOD-1", "slab", 2)]
    assert all(u["reason"] for u in plan["unplaced"])
    # exit 3 iff there were problems or unplaced copies
    assert (code == 3) == bool(plan["problems"] or plan["unplaced"])


def test_every_corpus_file_is_listed():
    files = {p.name for p in BAD.glob("*.yaml")} - {"expected.yaml"}
    assert files == set(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_corpus_file(name, tmp_path, capsys, monkeypatch):
    code_wanted, message = EXPECTED[name]
    monkeypatch.chdir(tmp_path)
    job = BAD / name
    named = name.startswith("job-name-")
    out = tmp_path / "plan"
    argv = ["plan", str(job), "--seconds", "1"] + ([] if named else ["-o", str(out)])
    code, text = _run(argv, capsys)
    assert "Traceback" not in text and "internal error" not in text, text
    assert code == code_wanted, text
    assert message in text, text
    if named:
        # the plan is under out/ in a safe folder, and nothing else was made
        (folder,) = (tmp_path / "out").iterdir()
        assert folder.name.startswith(message.split("out/")[1]) and "/" not in folder.name
        assert _files(tmp_path) == {"out", "out/" + folder.name} | {f"out/{folder.name}/{f}" for f in _files(folder)}
        assert not Path("/tmp/evil-packer-out").exists()
        out = folder
    else:
        assert set(os.listdir(tmp_path)) <= {"plan"}
    if code in (0, 3):
        _check_plan(out, code)
    else:
        assert not out.exists()          # refused: nothing written


def _job_with_line(folder: Path, line: str, *, top: str = "") -> Path:
    """A corpus-style job in ``folder`` with GOOD-1 and one more order whose line is ``line``."""
    folder.mkdir(parents=True, exist_ok=True)
    shutil.copy(BAD / "slab.stl", folder / "slab.stl")
    text = (BAD / "unknown-line-key.yaml").read_text(encoding="utf-8")
    text = text.replace("plates_folder: ../../../plates", f"plates_folder: {BAD.parent.parent.parent / 'plates'}")
    text = text.replace("{mesh: slab.stl, quantty: 3, quantity: 3, material: PLA}", line)
    path = folder / "job.yaml"
    path.write_text(top + text, encoding="utf-8")
    return path


def test_link_out_of_the_job_folder_is_refused(tmp_path, capsys):
    outside = tmp_path / "other-customer"
    outside.mkdir()
    shutil.copy(BAD / "slab.stl", outside / "secret.stl")
    job = _job_with_line(tmp_path / "job", "{mesh: link.stl, quantity: 3, material: PLA}")
    (tmp_path / "job" / "link.stl").symlink_to(outside / "secret.stl")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o"), "--seconds", "1"], capsys)
    assert code == 3
    assert "orders[1].lines[0].mesh: mesh path 'link.stl' resolves to" in text and "mesh_roots:" in text
    _check_plan(tmp_path / "o", code)
    # listing the folder under mesh_roots allows it
    job.write_text(f"mesh_roots: [{outside}]\n" + job.read_text(encoding="utf-8"), encoding="utf-8")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o2"), "--seconds", "1"], capsys)
    assert code == 0, text


def test_long_mesh_path_and_large_file(tmp_path, capsys):
    job = _job_with_line(tmp_path / "job", "{mesh: " + "d/" * 1000 + "x.stl, quantity: 3, material: PLA}")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o"), "--seconds", "1"], capsys)
    assert code == 3 and "orders[1].lines[0].mesh: is 2005 characters long, more than the limit of 1024" in text
    big = tmp_path / "big.yaml"
    big.write_text("notes: '" + "x" * 5_100_000 + "'\n", encoding="utf-8")
    code, text = _run(["plan", str(big), "-o", str(tmp_path / "o2")], capsys)
    assert code == 4 and "big.yaml: 5100010 bytes, more than the limit of 5000000 (PACKER_LIMIT_JOB_FILE_BYTES)" in text


def test_limits_are_set_by_the_environment(tmp_path, capsys, monkeypatch):
    job = _job_with_line(tmp_path / "job", "{mesh: slab.stl, quantity: 6, material: PLA}")
    monkeypatch.setenv("PACKER_LIMIT_COPIES_PER_LINE", "5")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o"), "--seconds", "1"], capsys)
    assert code == 3 and "6 copies, more than the limit of 5 per line (PACKER_LIMIT_COPIES_PER_LINE)" in text
    monkeypatch.setenv("PACKER_LIMIT_COPIES_PER_LINE", "lots")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o2"), "--seconds", "1"], capsys)
    assert code == 1 and "PACKER_LIMIT_COPIES_PER_LINE must be a positive whole number, got 'lots'" in text


def _bad_3mf(path: Path) -> None:
    """A 3MF whose triangle points past its vertex list (3 vertices, index 99)."""
    model = ('<?xml version="1.0" encoding="UTF-8"?>\n'
             '<model unit="millimeter" xmlns="http://schemas.microsoft.com/3dmanufacturing/core/2015/02">'
             '<resources><object id="1" type="model"><mesh><vertices>'
             '<vertex x="0" y="0" z="0"/><vertex x="10" y="0" z="0"/><vertex x="0" y="10" z="0"/>'
             '</vertices><triangles><triangle v1="0" v2="1" v3="99"/></triangles></mesh></object>'
             '</resources><build><item objectid="1"/></build></model>')
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as z:
        z.writestr("3D/3dmodel.model", model)
        z.writestr("_rels/.rels", '<?xml version="1.0" encoding="UTF-8"?><Relationships '
                   'xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship '
                   'Target="/3D/3dmodel.model" Id="rel0" Type="http://schemas.microsoft.com/3dmanufacturing/'
                   '2013/01/3dmodel"/></Relationships>')
    path.write_bytes(buf.getvalue())


def test_mesh_that_crashes_the_reader_costs_only_its_line(tmp_path, capsys):
    job = _job_with_line(tmp_path / "job", "{mesh: bad-index.3mf, quantity: 2, material: PLA}")
    _bad_3mf(tmp_path / "job" / "bad-index.3mf")
    code, text = _run(["plan", str(job), "-o", str(tmp_path / "o"), "--seconds", "1"], capsys)
    assert "Traceback" not in text and "internal error" not in text, text
    assert code == 3 and "bad-index.3mf" in text
    _check_plan(tmp_path / "o", code)
    plan = json.loads((tmp_path / "o" / "plan.json").read_text(encoding="utf-8"))
    assert {(u["order"], u["copy"]) for u in plan["unplaced"]} == {("BAD-1", 1), ("BAD-1", 2)}


def test_command_line_misuse_is_exit_2(tmp_path, capsys):
    assert main(["plan"]) == 2                                         # no job file
    assert main(["plan", str(BAD / "hour-25.yaml"), "--seconds", "soon"]) == 2
    assert main(["no-such-command"]) == 2
    capsys.readouterr()


def test_object_names_are_escaped():
    from xml.dom.minidom import parseString
    from packer.output.export import object_name
    name = object_name("A/1%\x07", "p\x00art\ud800", 3)
    # '/' separates order, part and copy, so inside a field it is escaped, like '%' and what XML cannot carry
    assert name == "A%2F1%25%07/p%00art%ED%A0%80/3"
    parseString(f'<o name="{name}"/>')                                  # valid XML 1.0


def test_job_file_that_never_ends_is_cut_at_the_limit(capsys, monkeypatch):
    monkeypatch.setenv("PACKER_LIMIT_JOB_FILE_BYTES", "1000")
    code, text = _run(["plan", "/dev/zero", "-o", "/nonexistent/never-written"], capsys)
    assert code == 4 and "/dev/zero: 1001 bytes, more than the limit of 1000" in text


def test_output_folder_that_cannot_be_written(capsys):
    code, text = _run(["plan", str(BAD / "hour-25.yaml"), "-o", "/proc/packer-cannot-write", "--seconds", "1"], capsys)
    assert code == 1 and "cannot read or write /proc/" in text and "Traceback" not in text
