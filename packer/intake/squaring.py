"""Orientation squared to the plate: a laid-flat part turned so its shadow's box is axis-aligned.

Lay-flat chooses the face a part rests on; the turn about z that comes with it
is arbitrary, so a long part can sit at a few degrees off the plate edges, and
the allowed turns (quarter turns by default) keep it crooked. This module turns
the resting pose about z so that the shadow's minimum-area bounding rectangle
has its sides along x and y before any allowed turn is applied. A plain data
module: numpy and shapely only, used by part intake (:mod:`packer.intake.parts`).
"""

from __future__ import annotations

import math

import numpy as np
import shapely

__all__ = ["SQUARING_GAIN", "squaring_turn", "square_to_plate"]

#: a turn is made only when it shrinks the axis-aligned bounding box by more than
#: this share of its area, so round parts (a 32-gon gains 0.96 %) and parts already
#: square stay as modelled (our own threshold; a bar 10 x 1 off by 0.5 degrees gains 8 %)
SQUARING_GAIN = 0.02


def squaring_turn(points_xy: np.ndarray) -> float:
    """Turn about z (radians, within +-pi/4) that squares the points' minimum-area rectangle to the axes.

    The minimum-area bounding rectangle of a point set is that of its convex
    hull and has one side on a hull edge (Freeman and Shapira, 1975); shapely's
    ``oriented_envelope`` finds it. Turning the points by the returned angle
    about the origin puts that rectangle's sides along x and y, so quarter turns
    of the result stay axis-aligned.

    Parameters
    ----------
    points_xy : (n, 2) float, mm
        Points whose convex hull is the shadow (for a mesh: its vertices' x, y).

    Returns
    -------
    float
        Angle in radians, counter-clockwise; 0.0 when the turn would not shrink
        the axis-aligned box by more than ``SQUARING_GAIN`` of its area.
    """
    pts = np.asarray(points_xy, dtype=float)
    hull = shapely.MultiPoint(pts).convex_hull
    if hull.geom_type != "Polygon" or hull.area <= 0:
        return 0.0
    rect = shapely.oriented_envelope(hull)
    span = np.ptp(pts, axis=0)
    if rect.area >= span[0] * span[1] * (1.0 - SQUARING_GAIN):
        return 0.0
    c = np.asarray(rect.exterior.coords)
    edge = c[1] - c[0]
    angle = math.atan2(edge[1], edge[0])
    angle = (angle + math.pi / 4) % (math.pi / 2) - math.pi / 4      # the side nearest the x axis
    return -angle


def square_to_plate(to_print: np.ndarray, vertices: np.ndarray) -> np.ndarray:
    """``to_print`` followed by the turn of :func:`squaring_turn` and a shift to the origin.

    Parameters
    ----------
    to_print : (4, 4) float
        Rigid motion from the mesh to its printing pose (z up, resting on z = 0).
    vertices : (n, 3) float, mm
        The mesh's vertices in its own frame.

    Returns
    -------
    (4, 4) float
        Rigid motion with the same resting face, whose shadow's minimum-area
        rectangle is aligned with x and y and whose bounds minimum is at the
        origin; ``to_print`` itself when no turn is needed.
    """
    v = np.asarray(vertices, dtype=float)
    moved = v @ to_print[:3, :3].T + to_print[:3, 3]
    theta = squaring_turn(moved[:, :2])
    if theta == 0.0:
        return to_print
    c, s = math.cos(theta), math.sin(theta)
    turn = np.eye(4)
    turn[:2, :2] = [[c, -s], [s, c]]
    out = turn @ np.asarray(to_print, dtype=float)
    out[:3, 3] -= (v @ out[:3, :3].T + out[:3, 3]).min(axis=0)
    return out
