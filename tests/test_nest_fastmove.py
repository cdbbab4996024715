"""The fused strip move (packer/nest/movekernel.py) against the move made of separate queries.

Reference: the one-query-per-orientation choice and the one-query-per-step pattern search of
packer.nest.search.State (the path the plate search keeps), on the same candidate points.
"""

import numpy as np
import pytest
import shapely

from packer.nest.budget import Meter
from packer.nest.fastmove import DIRS, TouchTable
from packer.nest.kit import Kit, Room
from packer.nest.movekernel import move_candidates, strip_move
from packer.nest.search import State
from packer.nest.shapes import Shape


def _state(seed):
    rng = np.random.default_rng(seed)
    shapes = []
    for k in range(10):
        w, h = rng.uniform(4, 12, 2)
        if k % 2:   # an L: two convex parts, so the touching positions come from a non-convex no-fit polygon
            shapes.append(Shape(shapely.Polygon([(0, 0), (w, 0), (w, h / 3), (w / 3, h / 3), (w / 3, h), (0, h)])))
        else:
            shapes.append(Shape(shapely.box(0, 0, w, h)))
    kit = Kit(shapes, clearance=1e-6, meter=Meter())
    room = Room(kit, shapely.box(0, 0, 34, 30))
    start = rng.uniform(0, 18, size=(10, 2))
    orient = [kit.options[i][0] for i in range(10)]
    touch = TouchTable(kit)
    st = State(kit, room, np.arange(10), orient, start, np.zeros(10, dtype=np.int64), 1,
               np.random.default_rng(seed + 1), touch=touch)
    st.weight[:] = rng.uniform(1.0, 3.0, size=st.weight.shape)
    return st


def _candidates(st, i, seed):
    t = st.touch
    opts = t.options[int(st.items[i])]
    while True:
        got = move_candidates(seed, i, opts, st.room.bounds, st.bbox, st.size, st.fpos, st.fori, st.n,
                              st.kit.pair_first, t.flat, t.first, t.count, st.inner.corners, st.inner.ncorners)
        if len(got[3]) == 0:
            return got
        if got[3][0, 0] < 0:   # no-fit polygons of a drawn orientation not stored yet
            for o in got[3][:, 1]:
                st.kit.ensure(np.unique(st.orient), int(o), st.room)
        else:
            t.add(got[3])


def _reference(st, i, pts, starts, chosen):
    """Best point by one cost query per orientation, then the pattern search one query per step."""
    best = None
    for c, o in enumerate(chosen):
        prep = st._prepare(int(o))
        cand = pts[starts[c]:starts[c + 1]]
        val = st._values(i, int(o), 0, cand, prep, best[0] if best else np.inf)
        k = int(np.argmin(val))
        if best is None or val[k] < best[0]:
            best = (float(val[k]), int(o), cand[k].copy(), prep)
    val, o, p, prep = best
    step, floor = 0.1 * st.size[o], 1e-5 * st.size[o]
    while step > floor and val > 0.0:
        cand = p[None, :] + step * DIRS
        v = st._values(i, o, 0, cand, prep, val)
        k = int(np.argmin(v))
        if v[k] < val:
            val, p = float(v[k]), cand[k]
        else:
            step *= 0.5
    return o, p, val


@pytest.mark.parametrize("stored", [True, False])
def test_fused_move_picks_the_same_position_as_separate_queries(stored, monkeypatch):
    if not stored:   # as on kits too large to store every pair up front: pairs are built on first use
        monkeypatch.setattr(Kit, "ensure_all", lambda self, room=None: None)
    hits = 0
    for seed in range(4):
        st = _state(seed)
        for i in st.overlapping()[:4]:
            i = int(i)
            pts, starts, chosen, _, _ = _candidates(st, i, 100 + seed)
            o_ref, p_ref, v_ref = _reference(st, i, pts, starts, chosen)
            kit = st.kit
            hn, hc, _, gs, ge, gb = kit.flat()
            fpos, fori, fbb = st.fpos.copy(), st.fori.copy(), st.fbb.copy()
            o, v, row = strip_move(pts, starts, chosen, i, st.n, st.weight[i], False, DIRS, fpos, fori, fbb, hn,
                                   hc, gs, ge, gb, kit.pair_first, kit.pair_count, st.bbox, st.size,
                                   st.inner.normals, st.inner.offsets, st.tol, st.eps, kit.meter.ops)
            assert o == o_ref
            assert np.array_equal(fpos[i], p_ref)
            assert v == v_ref
            # the returned row is the unweighted overlap of the shape at its new place
            st.fpos[i], st.fori[i], st.orient[i] = p_ref, o_ref, o_ref
            st._set_bbox(i)
            ref_row = st._row(i)
            got = row[: st.n + 1].copy()
            got[st.n] += row[st.n + 1]
            assert np.allclose(got, ref_row, rtol=0, atol=0)
            hits += 1
    assert hits >= 8


def test_candidates_are_inside_the_room_and_repeat_with_the_seed():
    st = _state(3)
    i = int(st.overlapping()[0])
    a = _candidates(st, i, 9)
    b = _candidates(st, i, 9)
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[2], b[2])
    for c, o in enumerate(a[2]):
        seg = a[0][a[1][c]:a[1][c + 1]]
        bb = st.bbox[o]
        lo = st.room.bounds[:2] - bb[:2]
        hi = np.maximum(st.room.bounds[2:] - bb[2:], lo)
        assert np.all(seg >= lo - 1e-12) and np.all(seg <= hi + 1e-12)
        # 64 samples, the shape's own point and touching positions around up to 8 shapes
        assert len(seg) > 65


def test_inner_fit_of_all_orientations_matches_the_room_one_by_one():
    # reference: Room.ifp and Room.ifp_vertices, orientation by orientation
    from packer.nest.fastmove import InnerFit

    st = _state(2)
    for room in (Room(st.kit, shapely.box(0, 0, 34, 30)), Room(st.kit, shapely.box(0, 0, 9.5, 30))):
        inner = InnerFit(room, st.touch)
        for o in range(len(st.kit.orientations)):
            assert np.array_equal(inner.offsets[o], room.ifp(o)[1])
            v = room.ifp_vertices(o)
            assert inner.ncorners[o] == len(v)
            assert np.allclose(inner.corners[o, : len(v)], v, rtol=0, atol=1e-12)
