"""3D packing of parts into powder-bed build volumes.

Public entry points: :func:`pack_builds` (fill as few builds as needed) and
:func:`verify_build` (exact spacing, containment and interlocking checks).
See ``README.md`` in this folder for the method and measured results.
"""

from packer.pack3d.builds import pack_builds
from packer.pack3d.model import Body, Build, BuildPlacement, BuildsResult
from packer.pack3d.verify import verify_build

__all__ = ["Body", "Build", "BuildPlacement", "BuildsResult", "pack_builds", "verify_build"]
