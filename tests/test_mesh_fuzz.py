"""Property-based fuzzing of mesh intake: random, truncated and perturbed files of every format.

Whatever the bytes, intake returns a part or raises an InputError whose message starts with
the file; never another exception (a traceback for the planner).
"""

from __future__ import annotations

import functools
import tempfile
from pathlib import Path

import trimesh
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from packer.errors import InputError
from packer.intake.parts import Part, load_part

from test_mesh_reference import box_3mf

AMPP = Path(__file__).parent / "data" / "ampp"
FUZZ = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture],
                derandomize=True)


@functools.lru_cache(maxsize=1)
def samples() -> dict[str, bytes]:
    """One valid file per format and encoding (a small part keeps each case fast)."""
    tmp = Path(tempfile.mkdtemp())
    mesh = trimesh.creation.annulus(r_min=4, r_max=10, height=3, sections=12)
    out = {"binary.stl": (AMPP / "meshes" / "4.stl").read_bytes(),
           "ascii.stl": mesh.export(file_type="stl_ascii").encode(),
           "part.obj": mesh.export(file_type="obj").encode(),
           "ascii.ply": mesh.export(file_type="ply", encoding="ascii"),
           "binary.ply": mesh.export(file_type="ply", encoding="binary"),
           "part.3mf": box_3mf(tmp / "seed.3mf", [10, 6, 3], "millimeter").read_bytes()}
    return out


def intake_is_safe(path: Path) -> None:
    try:
        part = load_part(path)
    except InputError as exc:
        assert str(exc).startswith(str(path)), str(exc)
    else:
        assert isinstance(part, Part) and part.volume > 0


@FUZZ
@given(data=st.binary(max_size=400), suffix=st.sampled_from([".stl", ".obj", ".ply", ".3mf"]))
def test_random_bytes(tmp_path, data, suffix):
    path = tmp_path / f"random{suffix}"
    path.write_bytes(data)
    intake_is_safe(path)


@FUZZ
@given(name=st.sampled_from(["binary.stl", "ascii.stl", "part.obj", "ascii.ply", "binary.ply", "part.3mf"]),
       cut=st.floats(0.0, 1.0))
def test_truncated_real_files(tmp_path, name, cut):
    data = samples()[name]
    path = tmp_path / name
    path.write_bytes(data[:int(len(data) * cut)])
    intake_is_safe(path)


@FUZZ
@given(name=st.sampled_from(["binary.stl", "ascii.stl", "part.obj", "ascii.ply", "binary.ply", "part.3mf"]),
       edits=st.lists(st.tuples(st.floats(0.0, 1.0, exclude_max=True), st.integers(0, 255)), min_size=1,
                      max_size=8))
def test_perturbed_real_files(tmp_path, name, edits):
    data = bytearray(samples()[name])
    for at, value in edits:
        data[int(at * len(data))] = value
    path = tmp_path / name
    path.write_bytes(bytes(data))
    intake_is_safe(path)


@FUZZ
@given(name=st.sampled_from(["ascii.stl", "part.obj", "ascii.ply"]),
       token=st.sampled_from([b"nan", b"inf", b"-1", b"99999999999", b"1e308", b"0", b"", b"x", b"-0"]),
       at=st.floats(0.0, 1.0, exclude_max=True))
def test_text_files_with_a_number_replaced(tmp_path, name, token, at):
    words = samples()[name].split(b" ")
    words[int(at * len(words))] = token
    path = tmp_path / name
    path.write_bytes(b" ".join(words))
    intake_is_safe(path)
