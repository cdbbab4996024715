"""Pack bodies into as many identical powder builds as needed.

Bodies are taken largest first and put into the first build where the spectral
search (:mod:`packer.pack3d.spectral`) finds a free, separable place; a new
build opens when none does. Every build is then checked with
:func:`packer.pack3d.verify.verify_build`; a body it rejects (in practice: one
trapped by several neighbours together) moves on to a later build. When time is
left, the packing is run again with other score weights and orders, and the
best result is kept: fewest builds, then lowest total height, then densest.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from packer.errors import GeometryError, InputError
from packer.pack3d.model import Body, Build, BuildPlacement, BuildsResult
from packer.pack3d.orient import rotations_for
from packer.pack3d.shapes import Shape, body_samples, sample_tolerance, shapes_of
from packer.pack3d.spectral import GridBuild, ScoreWeights, Slot
from packer.pack3d.verify import build_problems
from packer.pack3d.voxel import grid_pitch, spacing_offsets

__all__ = ["pack_builds"]

log = logging.getLogger("packer.pack3d")

# Score weights, measured on the 160-part benchmark (one packing each, density of the build):
# top + 0.1 bottom 31.1 %, lowest top alone 30.4 %, the same with corner 0.05 29.5 %,
# top + half bottom 29.0 %, top + bottom 26.7 %, floor-saving 23.9 % (README.md).
_TOP = ScoreWeights(1.0, 0.1, 0.002)
_FLOOR = ScoreWeights(0.25, 1.0, 0.002, 1.0)  # fits more parts per build: tried only when builds are full
_HALF = ScoreWeights(1.0, 0.5, 0.002)
# (weights, shuffled order) in the order they are tried
_VARIANTS = ((_TOP, False), (_FLOOR, False), (_TOP, True), (_HALF, False), (_TOP, True), (_FLOOR, True),
             (_TOP, True), (_HALF, True), (_TOP, True), (_TOP, True), (_TOP, True), (_TOP, True))


def _check_inputs(bodies, volume, spacing, margin, seconds) -> np.ndarray:
    vol = np.asarray(volume, dtype=float)
    if vol.shape != (3,) or not np.all(np.isfinite(vol)) or (vol <= 0).any():
        raise InputError(f"volume must be three positive lengths in mm, not {volume!r}")
    if not spacing >= 0:
        raise InputError(f"spacing must be at least 0 mm, not {spacing!r}")
    if not margin >= 0:
        raise InputError(f"margin must be at least 0 mm, not {margin!r}")
    if (vol - 2 * margin <= 0).any():
        raise InputError(f"margin {margin} mm leaves no room in a {vol.tolist()} mm volume")
    if not seconds > 0:
        raise InputError(f"seconds must be positive, not {seconds!r}")
    for i, b in enumerate(bodies):
        if not isinstance(b, Body):
            raise InputError(f"bodies[{i}] is not a Body")
        # touching or overlapping shells and seams narrower than a cell are fine: the cells
        # cover the surface and fill what it encloses (intake hands open parts in as their hull)
        if len(b.mesh.faces) == 0:
            raise GeometryError(f"bodies[{i}]: mesh has no triangles")
        if b.mesh.volume <= 0:
            raise GeometryError(f"bodies[{i}]: mesh has no positive volume (inverted faces?)")
    return vol


def _too_big_reason(body: Body, rotations: np.ndarray, inner: np.ndarray, pitch: float) -> str:
    ext = np.array([np.ptp(body.mesh.vertices @ r.T, axis=0) for r in rotations])
    if not (ext <= inner + 1e-9).all(axis=1).any():
        return (f"larger than the volume inside the margin ({' x '.join(f'{v:g}' for v in inner)} mm) "
                "in every allowed orientation")
    return f"fits the volume inside the margin by less than one packing cell ({pitch:.3g} mm)"


def _centring_shift(moves, bodies, vol) -> np.ndarray:
    """(3,) shift that puts the parts' x-y bounding box in the middle of the volume (z: 0).

    Operators centre a build in the chamber; the packing fills from one corner. A box
    that lay inside the margins still does when centred, and one shift for every part
    keeps the gaps, so the exact check that follows sees the same distances.
    """
    lo, hi = np.full(2, np.inf), np.full(2, -np.inf)
    for index, t in moves:
        v = np.asarray(bodies[index].mesh.vertices, dtype=float) @ t[:2, :3].T + t[:2, 3]
        lo, hi = np.minimum(lo, v.min(axis=0)), np.maximum(hi, v.max(axis=0))
    shift = np.zeros(3)
    if moves:
        shift[:2] = (np.asarray(vol[:2], dtype=float) - lo - hi) / 2
    return shift


def _to_build(slots: list[Slot], bodies, *, vol, margin, pitch) -> Build:
    placements, top, part_volume, moves = [], 0.0, 0.0, []
    for s in sorted(slots, key=lambda s: s.index):
        t = np.eye(4)
        t[:3, :3] = s.shape.rotation
        t[:3, 3] = margin + pitch * s.offset + s.shape.shift
        moves.append((s.index, t))
        top = max(top, margin + pitch * s.offset[2] + s.shape.top)
        part_volume += float(bodies[s.index].mesh.volume)
    shift = _centring_shift(moves, bodies, vol)
    for index, t in moves:
        t[:3, 3] += shift
        t.setflags(write=False)
        placements.append(BuildPlacement(index=index, transform=t))
    height = top + margin
    return Build(placements=tuple(placements), height=float(height),
                 density=float(part_volume / (vol[0] * vol[1] * height)))


def _greedy(order, shapes, dims, structure, weights, deadline) -> list[GridBuild]:
    builds: list[GridBuild] = []
    for i in order:
        opts = shapes[i]
        if time.monotonic() > deadline:  # out of time: the flattest rotation only
            opts = opts[:1]
        for g in builds:
            if g.try_place(i, opts):
                break
        else:
            g = GridBuild(dims, structure, weights)
            if g.try_place(i, opts) is None:  # cannot happen for a shape that fits the grid
                raise GeometryError(f"body {i} fits the grid but no place was found in an empty build")
            builds.append(g)
    return builds


def _settle(builds: list[GridBuild], bodies, shapes, dims, structure, weights, deadline, *, vol, spacing,
            margin, pitch) -> list[Build]:
    """Verify every build exactly; move rejected bodies to later builds until all pass."""
    done: list[Build] = []
    k = 0
    while k < len(builds):
        g = builds[k]
        build = _to_build(g.slots, bodies, vol=vol, margin=margin, pitch=pitch)
        problems = build_problems(bodies, build.placements, volume=tuple(vol), spacing=spacing,
                                  margin=margin, pitch=pitch)
        if problems:
            # drop the later-placed body of each pair, or the trapped body
            slot_of = {s.index: n for n, s in enumerate(g.slots)}
            pairs = [ks for ks, msg in problems if len(ks) > 1 or "interlocked" not in msg]
            trapped = [ks[0] for ks, msg in problems if len(ks) == 1 and "interlocked" in msg]
            drop = {max(slot_of[build.placements[k].index] for k in ks) for ks in pairs}
            if trapped:
                drop.add(max(slot_of[build.placements[k].index] for k in trapped))
            if not drop or len(drop) == len(g.slots):
                raise GeometryError(f"packed build failed its exact check: {[m for _, m in problems[:3]]}")
            builds[k] = g.rebuilt_without(drop)
            moved = [g.slots[n].index for n in sorted(drop)]
            later = _greedy(moved, shapes, dims, structure, weights, deadline)
            builds.extend(later)
            continue
        done.append(build)
        k += 1
    return done


def pack_builds(bodies: Sequence[Body], *, volume: tuple[float, float, float], spacing: float,
                margin: float, seconds: float, seed: int = 0, variants: int | None = None,
                pitch: float | None = None) -> BuildsResult:
    """Pack bodies into identical powder-bed volumes.

    Minimises the number of builds, then their heights, then maximises density.
    Every build returned has passed :func:`verify_build` (spacing by exact mesh
    distances, containment, no interlocking).

    Parameters
    ----------
    bodies : sequence of Body
    volume : (3,) float, mm
        Build volume extents x, y, z.
    spacing : float, mm
        Minimum distance between parts.
    margin : float, mm
        Minimum distance to floor, walls and top.
    seconds : float
        Time budget (the first packing always completes; later variants only run while time is left).
    seed : int
        Orders of the extra variants.
    variants : int, optional
        Run at most this many packings (score weights and orders) whatever the
        time, so that the same seed gives the same result; by default variants
        run while time is left (at most 12).
    pitch : float, mm, optional
        Voxel cell size; by default the spacing divided by the smallest whole
        number that keeps the grid under about two million cells.

    Returns
    -------
    BuildsResult

    Raises
    ------
    InputError, GeometryError
        For invalid volumes or options, or meshes that are not closed solids.
    """
    start = time.monotonic()
    vol = _check_inputs(bodies, volume, spacing, margin, seconds)
    inner = vol - 2 * margin
    if pitch is None:
        pitch = grid_pitch(inner, spacing)
    elif not pitch > 0 or np.prod(inner / pitch) > 5e7:
        raise InputError(f"pitch must be positive and leave at most 5e7 cells, not {pitch!r}")
    grid = _Grid(vol=vol, inner=inner, pitch=pitch, spacing=spacing, margin=margin,
                 dims=tuple(int(v) for v in np.floor(inner / pitch + 1e-9)),
                 structure=spacing_offsets(pitch=pitch, spacing=spacing))
    shapes, unplaced = _body_shapes(bodies, grid)
    deadline = start + seconds if variants is None else float("inf")
    best = _best_packing(bodies, shapes, grid, seed=seed, variants=variants, deadline=deadline)
    return BuildsResult(builds=tuple(best or ()), unplaced=tuple(sorted(unplaced)))


@dataclass(frozen=True)
class _Grid:
    """The voxel grid of one build volume: extents, the room inside the margins, cells."""

    vol: np.ndarray             # (3,) build volume, mm
    inner: np.ndarray           # (3,) room inside the margins, mm
    pitch: float                # cell size, mm
    spacing: float
    margin: float
    dims: tuple[int, int, int]  # cells of the room
    structure: np.ndarray       # spacing offsets (see packer.pack3d.voxel.spacing_offsets)


def _body_shapes(bodies: Sequence[Body], grid: _Grid) -> tuple[dict[int, list[Shape]], list[tuple[int, str]]]:
    """Voxel shapes of each body in its allowed orientations that fit the room (flattest first),
    and the bodies none of whose orientations fits, with the reason."""
    tol = sample_tolerance(grid.pitch)
    shapes: dict[int, list[Shape]] = {}
    cache: dict = {}
    unplaced: list[tuple[int, str]] = []
    for i, b in enumerate(bodies):
        spec = b.orientations
        key = (id(b.mesh), spec if isinstance(spec, str) else np.asarray(spec, dtype=float).tobytes())
        if key not in cache:
            rots = rotations_for(spec)
            found = shapes_of(b.mesh, body_samples(b.mesh, tol=tol), rots, pitch=grid.pitch)
            fit = [s for s in found if all(a <= d for a, d in zip(s.kernel.shape, grid.dims))]
            fit.sort(key=lambda s: (s.kernel.shape[2], s.cells))
            cache[key] = (fit, rots)
        fit, rots = cache[key]
        if fit:
            shapes[i] = fit
        else:
            unplaced.append((i, _too_big_reason(b, rots, grid.inner, grid.pitch)))
    return shapes, unplaced


def _best_packing(bodies, shapes, grid: _Grid, *, seed: int, variants: int | None, deadline: float):
    """Run the packing variants (:data:`_VARIANTS`) while allowed; the best builds found
    (fewest builds, then lowest total height, then densest), or None without bodies to pack."""
    rng = np.random.default_rng(seed)
    base = sorted(shapes, key=lambda i: (-min(s.cells for s in shapes[i]), i))
    best, best_key, first_run = None, None, 0.0
    runs = 0
    for v, (weights, shuffled) in enumerate(_VARIANTS):
        if variants is not None and runs >= variants:
            break
        now = time.monotonic()
        if variants is None and best is not None and now + 1.2 * first_run > deadline:
            break
        if weights.footprint > 0 and best is not None and best_key[0] <= 1:
            continue  # one build already: saving floor only costs height
        order = list(base)
        if shuffled:  # neighbours of similar size change places
            order = sorted(order, key=lambda i: (-min(s.cells for s in shapes[i]) * rng.uniform(0.85, 1.15), i))
        t0 = time.monotonic()
        grids = _greedy(order, shapes, grid.dims, grid.structure, weights, deadline)
        builds = _settle(grids, bodies, shapes, grid.dims, grid.structure, weights, deadline, vol=grid.vol,
                         spacing=grid.spacing, margin=grid.margin, pitch=grid.pitch)
        runs += 1
        if best is None:
            first_run = time.monotonic() - t0
        key = (len(builds), round(sum(b.height for b in builds), 6), -sum(b.density for b in builds))
        log.info("variant %d (%s, %s order): %d builds, heights %s mm, %.1f s", v, weights,
                 "shuffled" if shuffled else "largest-first", len(builds),
                 "/".join(f"{b.height:.1f}" for b in builds), time.monotonic() - t0)
        if best_key is None or key < best_key:
            best, best_key = builds, key
    return best
