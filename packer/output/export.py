"""Plate files: one 3MF per plate, one object per copy, at the plan's position.

Each object is named ``order/part/copy`` so an operator's software lists the
copies by who ordered them; ``/``, ``%`` and characters XML 1.0 cannot carry
are written as ``%XX`` (UTF-8 bytes), so every name is valid XML and names the
copy unambiguously. Meshes are written in plate coordinates (the
transform is applied to the vertices), in millimetres. The model carries the
plate's id, printer, profile, technology, material and plan version as
metadata (:mod:`packer.output.threemf`). A plate can also be written as one STL.
"""

from __future__ import annotations

import unicodedata
from pathlib import Path
from typing import Callable

import numpy as np
import trimesh

from packer import __version__
from packer.output.plan import PlatePlan
from packer.output.threemf import MeshObject, package_3mf

__all__ = ["object_name", "plate_scene", "plate_metadata", "write_plate_file"]


def _escape(text: str) -> str:
    """``text`` with ``%``, ``/`` and characters XML 1.0 cannot carry as ``%XX`` UTF-8 escapes."""
    out = []
    for c in text:
        if c in "%/" or unicodedata.category(c) in ("Cc", "Cs") or c in "\ufffe\uffff":
            out.append("".join(f"%{b:02X}" for b in c.encode("utf-8", "surrogatepass")))
        else:
            out.append(c)
    return "".join(out)


def object_name(order: str, part: str, copy: int) -> str:
    return f"{_escape(order)}/{_escape(part)}/{copy}"


def plate_scene(plate: PlatePlan, mesh_of: Callable[[Path], trimesh.Trimesh]) -> trimesh.Scene:
    """A scene with one mesh per copy, in plate coordinates.

    Parameters
    ----------
    mesh_of
        Returns the source mesh (mm) for a mesh path; it is copied, not changed.
    """
    scene = trimesh.Scene()
    for c in plate.items:
        mesh = mesh_of(c.mesh).copy()
        mesh.apply_transform(np.asarray(c.transform, dtype=float))
        name = object_name(c.order, c.part, c.copy)
        scene.add_geometry(mesh, node_name=name, geom_name=name)
    return scene


def plate_metadata(plate: PlatePlan, *, version: int = 1) -> dict[str, str]:
    """The plate file's metadata: well-known ``Title`` and ``Application``, the rest ``packer:``-prefixed."""
    return {"Title": f"plate {plate.id}", "Application": f"packer {__version__}", "plate": plate.id,
            "printer": plate.printer, "profile": plate.profile, "technology": plate.technology,
            "material": plate.material, "plan_version": str(version), "copies": str(len(plate.items))}


def write_plate_file(plate: PlatePlan, path: Path, mesh_of: Callable[[Path], trimesh.Trimesh], *,
                     version: int = 1) -> Path:
    """Write the plate as 3MF (``.3mf``) or, on request, one STL (``.stl``).

    ``version`` is the plan version the plate belongs to (1 for a first plan,
    N for ``vN/`` of a replan), written into the 3MF metadata.
    """
    scene = plate_scene(plate, mesh_of)
    path = Path(path)
    if path.suffix.lower() == ".stl":
        data = trimesh.util.concatenate(list(scene.dump())).export(file_type="stl")
    else:
        objects = [MeshObject(k + 1, name, scene.geometry[name].vertices, scene.geometry[name].faces)
                   for k, name in enumerate(scene.geometry)]
        data = package_3mf(objects, plate_metadata(plate, version=version))
    path.write_bytes(data)
    return path
