"""Limits on what a mesh file may ask of the reader (hostile or broken input).

Every limit is checked before the work it guards: the file size before reading,
a 3MF archive's declared sizes and compression ratios before inflating, the XML
element count and nesting depth while parsing, the triangle count before the
arrays are built. A file over a limit is refused with a message that names the
limit. An operator changes a limit with the environment variable
``PACKER_LIMIT_MESH_<NAME>`` of the process that runs packer (for example
``PACKER_LIMIT_MESH_TRIANGLES=20000000``), never from the job file;
:func:`mesh_limits` reads them, :func:`with_limits` changes them in code.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from packer.limits import from_environment

__all__ = ["Limits", "DEFAULT_LIMITS", "with_limits", "mesh_limits", "env_name"]


@dataclass(frozen=True)
class Limits:
    """Upper bounds for one mesh file.

    Attributes
    ----------
    file_bytes
        Size of the file on disk, bytes.
    triangles
        Triangles in the file (after polygons are split into triangles).
    archive_bytes
        Total uncompressed size of a 3MF archive's members, bytes.
    compression_ratio
        Largest uncompressed / compressed size of one 3MF member.
    xml_elements
        Elements in one 3MF model part.
    xml_depth
        Nesting depth of elements in a 3MF model part.
    components_depth
        Nesting of 3MF components (an object made of objects made of objects).
    """

    file_bytes: int = 512 * 2**20
    triangles: int = 5_000_000
    archive_bytes: int = 2 * 2**30
    compression_ratio: float = 200.0
    xml_elements: int = 25_000_000
    xml_depth: int = 64
    components_depth: int = 16


DEFAULT_LIMITS = Limits()


def with_limits(**changes) -> Limits:
    """The default limits with some changed, e.g. ``with_limits(triangles=10_000_000)``."""
    return replace(DEFAULT_LIMITS, **changes)


def env_name(field_name: str) -> str:
    """The environment variable of one mesh limit: ``PACKER_LIMIT_MESH_TRIANGLES``."""
    return f"PACKER_LIMIT_MESH_{field_name.upper()}"


def mesh_limits() -> Limits:
    """The mesh limits in force: the defaults, changed by ``PACKER_LIMIT_MESH_*`` variables.

    Raises
    ------
    InputError
        When a variable is not a positive number.
    """
    return from_environment(DEFAULT_LIMITS, env_name)
