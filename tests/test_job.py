"""Job and plate-profile loading: every problem named with file, line and key."""

from pathlib import Path
from textwrap import dedent

import pytest

from packer.errors import InputError
from packer.intake.job import load_job
from packer.intake.footprint import plate_polygon
from packer.intake.profile import load_profile

ROOT = Path(__file__).resolve().parent.parent
PLATES = ROOT / "plates"

PROFILE = dedent("""\
    name: test-fil
    technology: filament
    build_volume: [200, 150, 180]
    spacing: 5
    margin: 3
    materials:
      PLA: {density: 1.24}
    """)


def _job(tmp_path: Path, text: str, *, mesh: bool = True) -> Path:
    (tmp_path / "plates").mkdir(exist_ok=True)
    (tmp_path / "plates" / "test-fil.yaml").write_text(PROFILE)
    (tmp_path / "jobs").mkdir(exist_ok=True)
    if mesh:
        (tmp_path / "jobs" / "cube.stl").write_text("solid empty\nendsolid empty\n")
    path = tmp_path / "jobs" / "day.yaml"
    path.write_text(dedent(text))
    return path


GOOD = dedent("""\
    name: day
    start: 2026-12-02T07:00
    fleet:
      - {name: a, profile: test-fil}
    orders:
      - id: A-1
        due: 2026-12-02T17:00
        lines:
          - {mesh: cube.stl, quantity: 3, material: PLA}
    """)


def test_good_job_loads(tmp_path):
    job = load_job(_job(tmp_path, GOOD))
    assert job.name == "day"
    assert job.orders[0].lines[0].quantity == 3
    assert job.orders[0].lines[0].rotations == (0.0, 90.0, 180.0, 270.0)
    assert job.fleet[0].profile.name == "test-fil"
    assert job.problems == ()


def test_every_problem_reported_with_line_and_key(tmp_path):
    text = GOOD.replace("quantity: 3", "quantity: -2").replace("name: day\n", "name: day\ncolour: red\n")
    text += ("  - id: A-2\n    due: 2026-12-02T17:00\n    lines:\n"
             "      - {mesh: missing.stl, quantity: 1, material: PLA}\n"
             "      - {mesh: cube.stl, quantity: 1, material: PLA}\n")
    job = load_job(_job(tmp_path, text))
    messages = [str(p) for p in job.problems]
    assert any(m.startswith(f"{tmp_path / 'jobs' / 'day.yaml'}:2: colour: unknown key") for m in messages), messages
    assert any("orders[0].lines[0].quantity: must be at least 1, got -2" in m for m in messages), messages
    assert any("orders[1].lines[0].mesh: mesh file not found" in m for m in messages), messages
    # the line with the missing mesh is kept so its copies can be listed as unplaced
    missing = job.orders[-1].lines[0]
    assert missing.problem and "not found" in missing.problem
    assert job.orders[-1].lines[1].problem is None


def test_duplicate_order_ids(tmp_path):
    text = GOOD + ("  - id: A-1\n    due: 2026-12-03T17:00\n    lines:\n"
                   "      - {mesh: cube.stl, quantity: 1, material: PLA}\n")
    text += ("  - id: B-1\n    due: 2026-12-03T17:00\n    lines:\n"
             "      - {mesh: cube.stl, quantity: 1, material: PLA}\n")
    job = load_job(_job(tmp_path, text))
    assert any("orders[1].id: order id 'A-1' is used by 2 orders" in str(p) for p in job.problems)
    # both orders that share the id stay in the job, refused, with distinct labels
    refused = [o for o in job.orders if o.problem]
    assert [o.id for o in refused] == ["A-1 (orders[0])", "A-1 (orders[1])"]
    assert all(ln.problem for o in refused for ln in o.lines)


def test_unknown_profile_and_no_usable_printer(tmp_path):
    with pytest.raises(InputError, match=r"fleet\[0\]\.profile: unknown profile 'nope'.*\n.*no usable printer"):
        load_job(_job(tmp_path, GOOD.replace("profile: test-fil", "profile: nope")))


def test_unknown_material_sends_line_out(tmp_path):
    text = GOOD.replace("material: PLA}", "material: ABS}\n      - {mesh: cube.stl, part: b, quantity: 1, material: PLA}")
    job = load_job(_job(tmp_path, text))
    assert any("no printer in the fleet runs material 'ABS'" in str(p) for p in job.problems)
    assert job.orders[0].lines[0].problem and not job.orders[0].lines[1].problem
    with pytest.raises(InputError, match="nothing to plan"):
        load_job(_job(tmp_path, GOOD.replace("material: PLA", "material: ABS")))


def test_bad_yaml_names_file_and_line(tmp_path):
    with pytest.raises(InputError, match=r"day\.yaml:\d+: not valid YAML"):
        load_job(_job(tmp_path, "orders: [\n  - id: x\n  fleet: ]\n"))


def test_missing_job_file(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.yaml: file not found"):
        load_job(tmp_path / "nothere.yaml")


def test_wrong_types_and_bad_dates(tmp_path):
    text = GOOD.replace("due: 2026-12-02T17:00", "due: tomorrow").replace("quantity: 3", "quantity: three")
    with pytest.raises(InputError) as err:
        load_job(_job(tmp_path, text))
    assert "orders[0].due: must be a date and time like 2026-12-02T07:00, got 'tomorrow'" in str(err.value)
    assert "nothing to plan" in str(err.value)


def test_calendar_and_rotations(tmp_path):
    text = GOOD.replace("fleet:", "calendar: {shift: ['06:30', '18:00'], days: [mon, tue]}\nfleet:")
    text = text.replace("material: PLA}", "material: PLA, rotations: [0, 45, 405]}")
    job = load_job(_job(tmp_path, text))
    assert job.calendar.days == (0, 1)
    assert job.calendar.shift_start.hour == 6 and job.calendar.shift_start.minute == 30
    assert job.orders[0].lines[0].rotations == (0.0, 45.0)


@pytest.mark.parametrize("path", sorted(PLATES.glob("*.yaml")), ids=lambda p: p.stem)
def test_shipped_profiles_load(path):
    profile = load_profile(path)
    assert profile.name == path.stem
    region = plate_polygon(profile).buffer(-profile.margin, join_style="mitre")
    x, y, _ = profile.build_volume
    assert 0 < region.area < x * y


def test_profile_problems_listed(tmp_path):
    bad = PROFILE.replace("technology: filament", "technology: laser").replace("spacing: 5", "spacing: -1")
    path = tmp_path / "bad.yaml"
    path.write_text(bad + "time_model: {warp: 3}\n")
    with pytest.raises(InputError) as err:
        load_profile(path)
    text = str(err.value)
    assert "bad.yaml:2: technology: must be one of: filament, resin, powder; got 'laser'" in text
    assert "spacing: must be at least 0, got -1" in text
