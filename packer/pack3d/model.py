"""Plain data carried in and out of the powder-bed packer.

Coordinates of a build: millimetres, origin at the build volume's min corner,
x to the right, y to the back, z up.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import trimesh

__all__ = ["Body", "BuildPlacement", "Build", "BuildsResult"]


@dataclass(frozen=True)
class Body:
    """One copy to pack.

    Parameters
    ----------
    mesh : trimesh.Trimesh
        Closed mesh in mm, in its own (source) frame.
    orientations : str or tuple of (3, 3) float arrays
        ``"any"`` (the 24 axis-aligned rotations), ``"upright"`` (the four
        quarter turns about z), ``"locked"`` (identity only), or an explicit
        tuple of proper rotation matrices.
    """

    mesh: trimesh.Trimesh
    orientations: str | tuple = "any"


@dataclass(frozen=True)
class BuildPlacement:
    """Where one body goes.

    Parameters
    ----------
    index : int
        Index into the bodies list given to the packer.
    transform : (4, 4) float array
        Rotation (no mirror) plus translation, source mesh -> build volume.
    """

    index: int
    transform: np.ndarray = field(repr=False)


@dataclass(frozen=True)
class Build:
    """One filled build volume.

    Parameters
    ----------
    placements : tuple of BuildPlacement
    height : float
        Top of the highest part plus the margin, mm.
    density : float
        Part volume over used volume (volume footprint area x height).
    """

    placements: tuple[BuildPlacement, ...]
    height: float
    density: float


@dataclass(frozen=True)
class BuildsResult:
    """Every build, and the bodies that fit no empty volume (index, reason)."""

    builds: tuple[Build, ...]
    unplaced: tuple[tuple[int, str], ...]
