"""Plate files: one 3MF per plate, one object per copy, at the plan's position.

Each object is named ``order/part/copy`` so an operator's software lists the
copies by who ordered them. Meshes are written in plate coordinates (the
transform is applied to the vertices), in millimetres.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

import numpy as np
import trimesh

from packer.plan import PlatePlan

__all__ = ["object_name", "plate_scene", "write_plate_file"]


def object_name(order: str, part: str, copy: int) -> str:
    return f"{order}/{part}/{copy}"


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


def write_plate_file(plate: PlatePlan, path: Path, mesh_of: Callable[[Path], trimesh.Trimesh]) -> Path:
    """Write the plate as 3MF (``.3mf``) or, on request, one STL (``.stl``)."""
    scene = plate_scene(plate, mesh_of)
    path = Path(path)
    if path.suffix.lower() == ".stl":
        data = trimesh.util.concatenate(list(scene.dump())).export(file_type="stl")
    else:
        data = trimesh.exchange.threemf.export_3MF(scene)
    path.write_bytes(data)
    return path
