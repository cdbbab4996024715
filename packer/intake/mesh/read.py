"""Read any mesh file packer accepts, within limits, into a :class:`RawMesh`."""

from __future__ import annotations

from pathlib import Path

from packer.errors import GeometryError, InputError
from packer.intake.mesh.limits import Limits, mesh_limits
from packer.intake.mesh.obj import read_obj
from packer.intake.mesh.ply import read_ply
from packer.intake.mesh.raw import RawMesh, unusable
from packer.intake.mesh.stl import read_stl
from packer.intake.mesh.threemf import read_3mf

__all__ = ["MESH_FORMATS", "read_mesh"]

MESH_FORMATS = {".stl": "STL", ".obj": "OBJ", ".ply": "PLY", ".3mf": "3MF"}
_READERS = {".stl": read_stl, ".obj": read_obj, ".ply": read_ply, ".3mf": read_3mf}


def read_mesh(path: str | Path, *, limits: Limits | None = None) -> RawMesh:
    """Read a mesh file: STL (binary or ASCII), OBJ, PLY or 3MF, by its suffix.

    Parameters
    ----------
    path
        The file.
    limits
        File size, triangle count and 3MF archive and XML limits; default: the
        limits in force (:func:`~packer.intake.mesh.limits.mesh_limits`).

    Returns
    -------
    RawMesh
        The file's triangles in its own unit (3MF placements applied).

    Raises
    ------
    InputError
        Missing file or a suffix packer does not read.
    GeometryError
        The file cannot be read as its format or is over a limit; the message
        starts with the file and says what is wrong.
    """
    path = Path(path)
    limits = limits if limits is not None else mesh_limits()
    suffix = path.suffix.lower()
    if suffix not in _READERS:
        raise InputError(f"{path}: '{path.suffix}' is not a mesh format packer reads "
                         f"(known: {', '.join(MESH_FORMATS)})")
    if not path.is_file():
        raise InputError(f"{path}: mesh file not found")
    size = path.stat().st_size
    if size > limits.file_bytes:
        raise unusable(path, f"file is {size} bytes, over the limit of {limits.file_bytes} (Limits.file_bytes)")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise unusable(path, f"cannot read the file ({exc.strerror or exc})") from None
    if not data:
        raise unusable(path, "the file is empty")
    try:
        return _READERS[suffix](path, data, limits)
    except GeometryError:
        raise
    except (ValueError, TypeError, IndexError, KeyError, OverflowError, MemoryError, UnicodeError) as exc:
        # a reader's own checks should have caught it; still name the file, never a traceback
        raise unusable(path, f"cannot read as {MESH_FORMATS[suffix]}: the file is damaged "
                             f"({type(exc).__name__}: {str(exc)[:120]})") from None
