"""Mesh readers that tell the truth, hostile 3MF files, limits, units keys and strict lines."""

from __future__ import annotations

import io
import json
import zipfile
from pathlib import Path

import numpy as np
import pytest
import trimesh

from packer.cli import main
from packer.errors import GeometryError, InputError
from packer.intake.mesh.limits import with_limits
from packer.intake.mesh.read import read_mesh
from packer.intake.parts import load_part

from test_mesh_reference import box_3mf

BROKEN = Path(__file__).parent / "data" / "broken"


def kinds(part) -> dict[str, int]:
    return {d.kind: d.count for d in part.exam.defects}


def box_stl(extents=(20, 10, 5)) -> bytes:
    return trimesh.creation.box(extents=extents).export(file_type="stl")


# --- STL -------------------------------------------------------------------------------

def test_binary_stl_with_a_solid_header_is_read_as_binary(tmp_path):
    data = bytearray(box_stl())
    data[:80] = b"solid trap".ljust(80, b" ")                 # binary layout: 84 + 50 * count bytes
    (tmp_path / "trap.stl").write_bytes(bytes(data))
    raw = read_mesh(tmp_path / "trap.stl")
    assert raw.format == "STL (binary)" and len(raw.faces) == 12


def test_binary_stl_count_that_disagrees_is_reported_or_refused(tmp_path):
    data = box_stl()
    (tmp_path / "extra.stl").write_bytes(data + b"\0" * 7)
    part = load_part(tmp_path / "extra.stl")
    assert "file content" in kinds(part)
    assert "7 bytes after the 12 triangles its header promises" in part.exam.defects[0].detail
    (tmp_path / "short.stl").write_bytes(data[:-60])
    with pytest.raises(GeometryError, match=r"short\.stl: truncated binary STL: the header promises 12 "
                                            r"triangles, the file holds 10 complete ones"):
        read_mesh(tmp_path / "short.stl")


def test_ascii_stl_with_a_missing_vertex_is_refused_with_the_line(tmp_path):
    text = trimesh.creation.box().export(file_type="stl_ascii")
    lines = text.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.strip().startswith("vertex"))
    (tmp_path / "cut.stl").write_text("\n".join(lines[:k] + lines[k + 1:]))
    with pytest.raises(GeometryError, match=r"cut\.stl: ASCII STL with 12 facets but 35 vertex lines"):
        read_mesh(tmp_path / "cut.stl")


# --- OBJ and PLY ------------------------------------------------------------------------

def test_obj_face_pointing_past_its_vertices_is_refused_with_the_line(tmp_path):
    (tmp_path / "bad.obj").write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\nf 1 2 9\n")
    with pytest.raises(GeometryError, match=r"bad\.obj: line 5: face refers to vertex 9, but only 3 vertices"):
        read_mesh(tmp_path / "bad.obj")


def test_obj_negative_indices_and_polygons(tmp_path):
    (tmp_path / "quad.obj").write_text("v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\nf -4/1 -3/2 -2/3 -1/4\n")
    raw = read_mesh(tmp_path / "quad.obj")
    assert raw.faces.tolist() == [[0, 1, 2], [0, 2, 3]]


def ply_ascii(faces_promised: int, faces: list[list[int]]) -> str:
    verts = trimesh.creation.box().vertices
    head = ["ply", "format ascii 1.0", f"element vertex {len(verts)}", "property float x", "property float y",
            "property float z", f"element face {faces_promised}", "property list uchar int vertex_indices",
            "end_header"]
    return "\n".join(head + [f"{x} {y} {z}" for x, y, z in verts] + [f"3 {a} {b} {c}" for a, b, c in faces]) + "\n"


def test_ply_header_promising_more_faces_than_it_holds_is_refused(tmp_path):
    faces = trimesh.creation.box().faces.tolist()
    (tmp_path / "short.ply").write_text(ply_ascii(14, faces))
    with pytest.raises(GeometryError, match=r"short\.ply: truncated PLY: the header promises 14 'face' "
                                            r"elements, the file holds 12"):
        read_mesh(tmp_path / "short.ply")
    (tmp_path / "long.ply").write_text(ply_ascii(11, faces))
    assert "1 lines after the elements its header declares" in read_mesh(tmp_path / "long.ply").notes[0]


def test_ply_face_pointing_at_a_missing_vertex_is_refused_with_the_face(tmp_path):
    faces = trimesh.creation.box().faces.tolist()
    faces[5] = [0, 1, 42]
    (tmp_path / "bad.ply").write_text(ply_ascii(12, faces))
    with pytest.raises(GeometryError, match=r"bad\.ply: PLY face 5 refers to vertex 42, but the file has 8"):
        read_mesh(tmp_path / "bad.ply")


def test_binary_ply_reads_like_ascii(tmp_path):
    mesh = trimesh.creation.box(extents=[3, 4, 5])
    (tmp_path / "b.ply").write_bytes(mesh.export(file_type="ply", encoding="binary"))
    part = load_part(tmp_path / "b.ply")
    assert part.volume == pytest.approx(60.0) and part.exam.defects == ()


# --- hostile 3MF ------------------------------------------------------------------------

def rewrite_model(path: Path, change) -> Path:
    with zipfile.ZipFile(path) as zf:
        files = {n: zf.read(n) for n in zf.namelist()}
    files["3D/3dmodel.model"] = change(files["3D/3dmodel.model"])
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as zf:
        for n, data in files.items():
            zf.writestr(n, data)
    path.write_bytes(buf.getvalue())
    return path


def test_3mf_with_an_entity_or_dtd_is_refused(tmp_path):
    path = box_3mf(tmp_path / "xxe.3mf", [10, 10, 10], None)
    rewrite_model(path, lambda m: m.replace(b'<?xml version="1.0" encoding="UTF-8"?>',
                                            b'<?xml version="1.0"?><!DOCTYPE model [<!ENTITY x SYSTEM '
                                            b'"file:///etc/passwd">]>'))
    with pytest.raises(GeometryError, match=r"xxe\.3mf: 3MF part 3D/3dmodel\.model declares a DTD or an entity"):
        read_mesh(path)


def test_3mf_triangle_index_past_the_vertex_list_is_refused(tmp_path):
    path = box_3mf(tmp_path / "idx.3mf", [10, 10, 10], None)
    rewrite_model(path, lambda m: m.replace(b'<triangle v1="', b'<triangle v1="99', 1))
    with pytest.raises(GeometryError, match=r"idx\.3mf: object 1: triangle 0 refers to vertex 99\d*, but the "
                                            r"object has 8 vertices"):
        read_mesh(path)


def test_3mf_compression_bomb_is_refused_before_inflating(tmp_path):
    path = box_3mf(tmp_path / "bomb.3mf", [10, 10, 10], None)
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("Metadata/padding.bin", b"\0" * 20_000_000)      # deflates about 1000 times
    with pytest.raises(GeometryError, match=r"bomb\.3mf: 3MF member Metadata/padding\.bin inflates \d+ times"):
        read_mesh(path)
    with pytest.raises(GeometryError, match=r"3MF package inflates to \d+ bytes, over the limit of 1000000"):
        read_mesh(path, limits=with_limits(archive_bytes=1_000_000, compression_ratio=1e9))


def test_3mf_element_count_and_depth_limits(tmp_path):
    path = box_3mf(tmp_path / "box.3mf", [10, 10, 10], None)
    with pytest.raises(GeometryError, match=r"more than 10 XML elements \(Limits\.xml_elements\)"):
        read_mesh(path, limits=with_limits(xml_elements=10))
    with pytest.raises(GeometryError, match=r"elements nested deeper than 3 \(Limits\.xml_depth\)"):
        read_mesh(path, limits=with_limits(xml_depth=3))


def test_file_size_and_triangle_limits(tmp_path):
    (tmp_path / "box.stl").write_bytes(box_stl())
    with pytest.raises(GeometryError, match=r"box\.stl: file is 684 bytes, over the limit of 100"):
        read_mesh(tmp_path / "box.stl", limits=with_limits(file_bytes=100))
    with pytest.raises(GeometryError, match=r"box\.stl: 12 triangles is over the limit of 10"):
        read_mesh(tmp_path / "box.stl", limits=with_limits(triangles=10))


# --- units key for files without units ----------------------------------------------------

def test_units_key_scales_and_an_implausible_size_names_the_likely_unit(tmp_path):
    (tmp_path / "bar.stl").write_bytes(box_stl((2, 1, 0.5)))
    plain = load_part(tmp_path / "bar.stl")
    assert sorted(plain.mesh.extents) == pytest.approx([0.5, 1, 2])      # never rescaled silently
    warning = next(d for d in plain.exam.defects if d.kind == "implausible size")
    assert "read as inch it would be 50.8 mm" in warning.detail and "set units: inch" in warning.detail
    inch = load_part(tmp_path / "bar.stl", units="inch")
    assert sorted(inch.mesh.extents) == pytest.approx([12.7, 25.4, 50.8])
    assert inch.volume == pytest.approx(2 * 1 * 0.5 * 25.4 ** 3)
    assert "implausible size" not in kinds(inch)
    (tmp_path / "tiny.stl").write_bytes(box_stl((0.2, 0.1, 0.05)))
    metres = next(d for d in load_part(tmp_path / "tiny.stl").exam.defects if d.kind == "implausible size")
    assert "set units: m" in metres.detail


def job_text(extra_line: str = "", extra_top: str = "") -> str:
    return f"""name: units-day
start: 2026-12-07T07:00
plates_folder: {Path(__file__).resolve().parent.parent / 'plates'}
{extra_top}
fleet:
  - {{name: bench-a, profile: fil-bench-244}}
orders:
  - id: U-1
    due: 2026-12-07T17:00
    lines:
      - {{mesh: bar.stl, quantity: 2, material: PLA{extra_line}}}
      - {{mesh: open-box.stl, quantity: 1, material: PLA}}
"""


def plan_of(tmp_path, text: str) -> dict:
    (tmp_path / "bar.stl").write_bytes(box_stl((2, 1, 0.5)))
    (tmp_path / "open-box.stl").write_bytes((BROKEN / "open-box.stl").read_bytes())
    (tmp_path / "day.yaml").write_text(text)
    main(["plan", str(tmp_path / "day.yaml"), "-o", str(tmp_path / "out"), "--seconds", "2", "--force"])
    return json.loads((tmp_path / "out" / "plan.json").read_text())


def test_units_key_in_a_job_puts_a_uniform_scale_in_the_transform(tmp_path):
    plan = plan_of(tmp_path, job_text(", units: inch"))
    items = [i for p in plan["plates"] for i in p["items"] if i["part"] == "bar"]
    assert len(items) == 2
    r = np.asarray(items[0]["transform"])[:3, :3]
    assert np.linalg.det(r) == pytest.approx(25.4 ** 3, rel=1e-6)
    row = next(r for r in plan["parts"] if r["file"].endswith("bar.stl"))
    assert (row["unit"], row["unit_source"]) == ("inch", "units key")


def test_strict_meshes_refuse_caution_class_defects_line_or_job(tmp_path):
    plan = plan_of(tmp_path, job_text(extra_top="meshes: strict"))
    reasons = {(u["part"], u["copy"]): u["reason"] for u in plan["unplaced"]}
    assert "meshes: strict refuses" in reasons[("open-box", 1)] and "open edges (4)" in reasons[("open-box", 1)]
    # the bar has an implausible size (a caution) and is refused too; nothing is lost
    assert ("bar", 1) in reasons and ("bar", 2) in reasons
    loose = plan_of(tmp_path, job_text())
    assert not loose["unplaced"]


def test_inspect_prints_the_parts_table_as_json(tmp_path, capsys):
    (tmp_path / "bar.stl").write_bytes(box_stl((20, 10, 5)))
    code = main(["inspect", str(tmp_path / "bar.stl"), str(BROKEN / "open-box.stl"),
                 str(BROKEN / "not-a-mesh.stl"), "--json"])
    rows = json.loads(capsys.readouterr().out)
    assert code == 3                                    # a file was refused
    assert [r["status"] for r in rows] == ["planned", "planned", "refused"]
    assert rows[0]["volume_mm3"] == pytest.approx(1000.0) and rows[0]["volume_method"] == "divergence"
    assert rows[0]["size_laid_flat_mm"] == [20.0, 10.0, 5.0] and "fil-bench-244" in rows[0]["fits"]
    assert rows[1]["defects"][0]["kind"] == "open edges"


def test_mesh_limits_come_from_the_environment(tmp_path, monkeypatch):
    (tmp_path / "box.stl").write_bytes(box_stl())
    monkeypatch.setenv("PACKER_LIMIT_MESH_TRIANGLES", "11")
    with pytest.raises(GeometryError, match=r"box\.stl: 12 triangles is over the limit of 11"):
        load_part(tmp_path / "box.stl")
    monkeypatch.setenv("PACKER_LIMIT_MESH_TRIANGLES", "lots")
    with pytest.raises(InputError, match="PACKER_LIMIT_MESH_TRIANGLES must be a positive number, got 'lots'"):
        load_part(tmp_path / "box.stl")
