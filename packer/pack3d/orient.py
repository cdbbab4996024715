"""Allowed rotations of a body: the 24 axis-aligned ones, quarter turns about z, or a given list."""

from __future__ import annotations

import itertools

import numpy as np

from packer.errors import InputError

__all__ = ["axis_rotations", "upright_rotations", "rotations_for"]


def axis_rotations() -> np.ndarray:
    """The 24 proper rotations that map coordinate axes to coordinate axes.

    Returns
    -------
    (24, 3, 3) float array, identity first.
    """
    mats = []
    for perm in itertools.permutations(range(3)):
        for signs in itertools.product((1, -1), repeat=3):
            m = np.zeros((3, 3))
            m[np.arange(3), perm] = signs
            if np.linalg.det(m) > 0:
                mats.append(m)
    mats.sort(key=lambda m: -np.trace(m))  # identity first, then the rest in a fixed order
    return np.array(mats)


def upright_rotations() -> np.ndarray:
    """The four quarter turns about z, (4, 3, 3) float, identity first."""
    out = []
    for k in range(4):
        c, s = np.round(np.cos(k * np.pi / 2)), np.round(np.sin(k * np.pi / 2))
        out.append(np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]]))
    return np.array(out)


def rotations_for(spec) -> np.ndarray:
    """Rotation matrices for a body's ``orientations`` field.

    Parameters
    ----------
    spec : str or sequence of (3, 3) arrays
        ``"any"``, ``"upright"``, ``"locked"`` or explicit rotations.

    Returns
    -------
    (k, 3, 3) float array of proper rotations.

    Raises
    ------
    InputError
        For an unknown name or a matrix that is not a proper rotation.
    """
    if isinstance(spec, str):
        if spec == "any":
            return axis_rotations()
        if spec == "upright":
            return upright_rotations()
        if spec == "locked":
            return np.eye(3)[None]
        raise InputError(f"orientations must be 'any', 'upright', 'locked' or rotation matrices, not {spec!r}")
    mats = np.asarray(spec, dtype=float)
    if mats.ndim != 3 or mats.shape[1:] != (3, 3) or len(mats) == 0:
        raise InputError("orientations must be a non-empty sequence of 3x3 rotation matrices")
    for m in mats:
        if not np.allclose(m @ m.T, np.eye(3), atol=1e-6) or np.linalg.det(m) < 0:
            raise InputError("each orientation must be a proper rotation (orthonormal, no mirror)")
    return mats
