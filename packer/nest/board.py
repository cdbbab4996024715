"""Vectorised ray casts of one moving shape against fixed ones (the bottom-left slides).

:func:`gather` stacks the no-fit groups of the moving orientation around the
placed shapes in world coordinates; :func:`slide` finds, for all groups at
once, where a ray from a feasible point first enters one of them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from packer.nest.budget import Meter
from packer.nest.kit import Kit, Room

__all__ = ["Gathered", "gather", "slide"]


@dataclass(frozen=True)
class Gathered:
    """No-fit groups of one moving orientation against placed shapes and obstacles.

    normals (t, 2), offsets (t,), vertices (t, 2) in world coordinates of the
    moving shape's reference point; starts (g,) first halfplane of each group;
    owner (g,) index of the fixed shape a group belongs to (``n_fixed`` for
    container obstacles).
    """

    normals: np.ndarray
    offsets: np.ndarray
    vertices: np.ndarray
    starts: np.ndarray
    owner: np.ndarray


def gather(kit: Kit, room: Room, fixed_o, fixed_pos, moving: int, *, obstacles: bool = True) -> Gathered:
    """Stack the no-fit groups of ``moving`` against fixed shapes at ``fixed_pos`` (n, 2)."""
    groups = [kit.nfp(int(fo), moving) for fo in fixed_o]
    owners = list(range(len(groups)))
    pos = [np.asarray(p, dtype=float) for p in fixed_pos]
    if obstacles and room is not None and room.obstacle_parts:
        ob = room.obstacles(moving)
        if len(ob.offsets):
            groups.append(ob)
            owners.append(len(fixed_o))
            pos.append(np.zeros(2))
    kit.meter.charge("slide")
    kit.meter.charge("lookup", len(groups))
    groups_ok = [(g, o, p) for g, o, p in zip(groups, owners, pos) if len(g.offsets)]
    if not groups_ok:
        z = np.zeros((0, 2))
        zi = np.zeros(0, dtype=np.int64)
        return Gathered(z, np.zeros(0), z, zi, zi)
    t_sizes = np.array([len(g.offsets) for g, _, _ in groups_ok])
    kit.meter.charge("slide_half", int(t_sizes.sum()))
    g_sizes = np.array([len(g.starts) for g, _, _ in groups_ok])
    normals = np.concatenate([g.normals for g, _, _ in groups_ok])
    shift = np.repeat(np.array([p for _, _, p in groups_ok]), t_sizes, axis=0)
    offsets = np.concatenate([g.offsets for g, _, _ in groups_ok]) + np.einsum("ij,ij->i", normals, shift)
    vertices = np.concatenate([g.vertices for g, _, _ in groups_ok]) + shift
    base = np.concatenate([[0], np.cumsum(t_sizes)[:-1]])
    starts = np.concatenate([g.starts + b for (g, _, _), b in zip(groups_ok, base)])
    owner = np.repeat(np.array([o for _, o, _ in groups_ok]), g_sizes)
    return Gathered(normals, offsets, vertices, starts, owner)


def slide(g: Gathered, room_m: np.ndarray, room_e: np.ndarray, p: np.ndarray, d: np.ndarray,
          tol: float, meter: Meter) -> float:
    """How far a feasible point ``p`` can move along unit direction ``d`` (ray cast).

    A group blocks the ray from the parameter where the ray becomes deeper than
    ``tol`` inside it; the container's inner-fit halfplanes ``room_m @ x <= room_e``
    bound it too.
    """
    meter.charge("slide")
    meter.charge("slide_half", len(g.offsets))
    t = np.inf
    md = room_m @ d
    pos = md > 1e-15
    if np.any(pos):
        t = float(np.min((room_e[pos] - room_m[pos] @ p) / md[pos]))
    if len(g.starts):
        a = g.normals @ d
        b = g.offsets - tol - g.normals @ p
        with np.errstate(divide="ignore", invalid="ignore"):
            r = b / a
        hi_k = np.where(a > 1e-15, r, np.where(np.abs(a) <= 1e-15, np.where(b > 0, np.inf, -np.inf), np.inf))
        lo_k = np.where(a < -1e-15, r, -np.inf)
        hi = np.minimum.reduceat(hi_k, g.starts)
        lo = np.maximum.reduceat(lo_k, g.starts)
        enter = (lo < hi) & (hi > 1e-12)
        if np.any(enter):
            # land where the ray touches the group (depth 0), not where it is tol deep
            with np.errstate(divide="ignore", invalid="ignore"):
                r0 = (g.offsets - g.normals @ p) / a
            lo0 = np.maximum.reduceat(np.where(a < -1e-15, r0, -np.inf), g.starts)
            t = min(t, float(np.min(np.maximum(lo0[enter], 0.0))))
    return max(t, 0.0)
