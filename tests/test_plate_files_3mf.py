"""Plate files read by lib3mf, the 3MF Consortium's reference implementation, in strict mode.

Strict mode turns every deviation from the 3MF Core Specification into an
error; the checks here are the specification's: unit millimetre, one build
item per copy, object names, and our metadata under its own namespace
(Core Specification 1.3, chapter 4.4: names outside the well-known list carry
a namespace).
"""

from pathlib import Path

import lib3mf
import numpy as np
import trimesh

from packer.output.export import write_plate_file
from packer.output.plan import PlacedCopy, PlatePlan
from packer.output.threemf import PACKER_NS

WRAPPER = lib3mf.get_wrapper()


def _read_strict(path: Path):
    model = WRAPPER.CreateModel()
    reader = model.QueryReader("3mf")
    reader.SetStrictModeActive(True)
    reader.ReadFromFile(str(path))           # raises on any error in strict mode
    warnings = [reader.GetWarning(i) for i in range(reader.GetWarningCount())]
    names, items = [], 0
    build = model.GetBuildItems()
    while build.MoveNext():
        items += 1
        names.append(build.GetCurrent().GetObjectResource().GetName())
    group = model.GetMetaDataGroup()
    meta = {}
    for i in range(group.GetMetaDataCount()):
        m = group.GetMetaData(i)
        meta[(m.GetNameSpace(), m.GetName())] = m.GetValue()
    return model, warnings, names, items, meta


def test_every_demo_plate_file_opens_strict_with_its_metadata(demo):
    _, plan, out = demo
    for plate in plan["plates"]:
        model, warnings, names, items, meta = _read_strict(out / plate["file"])
        assert warnings == []
        assert model.GetUnit() == lib3mf.ModelUnit.MilliMeter
        assert items == len(plate["items"])
        assert sorted(names) == sorted(f"{i['order']}/{i['part']}/{i['copy']}" for i in plate["items"])
        assert meta[(PACKER_NS, "printer")] == plate["printer"]
        assert meta[(PACKER_NS, "material")] == plate["material"]
        assert meta[(PACKER_NS, "plate")] == plate["id"]
        assert meta[(PACKER_NS, "plan_version")] == "1"


def test_awkward_names_and_versions_survive_strict_reading(tmp_path):
    mesh_path = tmp_path / "cube.stl"
    trimesh.creation.box((10, 10, 10)).export(mesh_path)
    move = np.eye(4)
    move[:3, 3] = [20, 20, 5]
    copy = PlacedCopy('R&D <"7">', "cube", 1, mesh_path, move, "PLA", 1000.0, 1.2)
    plate = PlatePlan(id="P07", printer="bench & co", profile="fil-bench-244", technology="filament",
                      material="PLA", volume=(244, 198, 205), spacing=6, margin=4, items=(copy,),
                      start=None, end=None, free=None, height_mm=10, utilization=0.01, print_s=60, mass_g=1.2)
    path = write_plate_file(plate, tmp_path / "P07.3mf", lambda p: trimesh.load(p, force="mesh"), version=3)
    model, warnings, names, items, meta = _read_strict(path)
    assert warnings == [] and items == 1 and names == ['R&D <"7">/cube/1']
    assert meta[(PACKER_NS, "printer")] == "bench & co" and meta[(PACKER_NS, "plan_version")] == "3"
    # the mesh is where the plan puts it: lib3mf's vertices, bounds of the 10 mm cube
    obj = model.GetMeshObjects()
    assert obj.MoveNext()
    pts = np.array([[v.Coordinates[k] for k in range(3)] for v in obj.GetCurrentMeshObject().GetVertices()])
    assert np.allclose(pts.min(axis=0), [15, 15, 0], atol=1e-4) and np.allclose(pts.max(axis=0), [25, 25, 10], atol=1e-4)


def test_same_plate_same_bytes(tmp_path):
    mesh_path = tmp_path / "cube.stl"
    trimesh.creation.box((10, 10, 10)).export(mesh_path)
    copy = PlacedCopy("A", "cube", 1, mesh_path, np.eye(4), "PLA", 1000.0, 1.2)
    plate = PlatePlan(id="P01", printer="a", profile="p", technology="filament", material="PLA",
                      volume=(100, 100, 100), spacing=6, margin=4, items=(copy,), start=None, end=None, free=None,
                      height_mm=10, utilization=0.01, print_s=60, mass_g=1.2)
    load = lambda p: trimesh.load(p, force="mesh")  # noqa: E731
    a = write_plate_file(plate, tmp_path / "a.3mf", load).read_bytes()
    b = write_plate_file(plate, tmp_path / "b.3mf", load).read_bytes()
    assert a == b


def test_plate_as_one_stl_holds_every_copy(tmp_path):
    mesh_path = tmp_path / "cube.stl"
    trimesh.creation.box((10, 10, 10)).export(mesh_path)
    items = []
    for n, x in enumerate((20, 50), start=1):
        move = np.eye(4)
        move[:3, 3] = [x, 20, 5]
        items.append(PlacedCopy("A", "cube", n, mesh_path, move, "PLA", 1000.0, 1.2))
    plate = PlatePlan(id="P01", printer="a", profile="p", technology="filament", material="PLA",
                      volume=(100, 100, 100), spacing=6, margin=4, items=tuple(items), start=None, end=None,
                      free=None, height_mm=10, utilization=0.02, print_s=60, mass_g=2.4)
    path = write_plate_file(plate, tmp_path / "P01.stl", lambda p: trimesh.load(p, force="mesh"))
    mesh = trimesh.load(path, force="mesh")       # read back by trimesh's STL reader
    assert len(mesh.faces) == 2 * 12              # a box is 12 triangles
    assert np.allclose(mesh.bounds, [[15, 15, 0], [55, 25, 10]])
