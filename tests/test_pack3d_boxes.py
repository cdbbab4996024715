"""Container loading (packer.pack3d.boxes): validity against an independent check, and bounds."""

import json
from pathlib import Path

import numpy as np
import pytest

from packer.errors import InputError
from packer.pack3d.boxes import BoxPlacement, BoxType, loading_problems, pack_boxes
from packer.bench.packcmd import load_box_instance, pack_command

DATA = Path(__file__).parent / "data" / "pack3d"


def independent_problems(container, types, placements):
    """Overlap, containment, rotation and quantity check written for the test (not the packer's)."""
    by_id = {t.id: t for t in types}
    count = {}
    out = []
    boxes = []
    for p in placements:
        t = by_id[p.box]
        count[p.box] = count.get(p.box, 0) + 1
        if sorted(p.dims) != sorted(t.dims):
            out.append("not a rotation")
        # the vertical extent must be a side allowed to stand vertical
        if not any(t.upright[i] and t.dims[i] == p.dims[2] for i in range(3)):
            out.append("forbidden vertical side")
        lo = np.array(p.corner)
        hi = lo + np.array(p.dims)
        if lo.min() < 0 or np.any(hi > np.array(container)):
            out.append("outside")
        boxes.append((lo, hi))
    for k, n in count.items():
        if n > by_id[k].quantity:
            out.append("too many")
    for i in range(len(boxes)):
        for j in range(i):
            a, b = boxes[i], boxes[j]
            if all(min(a[1][k], b[1][k]) > max(a[0][k], b[0][k]) for k in range(3)):
                out.append(f"overlap {i} {j}")
    return out


def test_br1_1_loading_is_valid_and_below_the_cargo_bound():
    # Bischoff & Ratcliff (1995) BR1 problem 1 (tests/data/pack3d/README.md)
    name, container, types = load_box_instance(DATA / "BR1_1.json")
    loading = pack_boxes(container, types, seconds=0.0, seed=0, restarts=30)
    assert independent_problems(container, types, loading.placements) == []
    assert loading_problems(container, types, loading.placements) == []
    packed = sum(int(np.prod(p.dims)) for p in loading.placements)
    assert packed == loading.packed_volume
    cargo = sum(t.quantity * int(np.prod(t.dims)) for t in types)
    # the cargo/container ratio (98.83 % for BR1_1) bounds any loading from above
    assert loading.utilisation <= min(1.0, cargo / np.prod(container)) + 1e-12
    # a floor for 30 restarts of this packer (published heuristics reach about 95 % on BR1, from memory)
    assert loading.utilisation > 0.88


def test_exact_fit_is_found():
    # eight 1x2x3 bricks fill a 2x4x6 container exactly (volume bound: 48 = 8 * 6)
    t = BoxType("brick", (1, 2, 3), 8)
    loading = pack_boxes((2, 4, 6), [t], seconds=0.0)
    assert loading.utilisation == pytest.approx(1.0)
    assert independent_problems((2, 4, 6), [t], loading.placements) == []


def test_vertical_flags_are_honoured():
    # a 1x1x5 rod that may not stand on its end cannot enter a container 1 wide and 5 tall only
    t = BoxType("rod", (1, 1, 5), 1, upright=(True, True, False))
    assert pack_boxes((1, 1, 5), [t], seconds=0.0).placements == ()
    t2 = BoxType("rod", (1, 1, 5), 1, upright=(False, False, True))
    assert len(pack_boxes((1, 1, 5), [t2], seconds=0.0).placements) == 1


def test_checker_flags_overlap_and_rotation():
    t = BoxType("a", (2, 2, 1), 3, upright=(False, False, True))
    bad = (BoxPlacement("a", (0, 0, 0), (2, 2, 1)), BoxPlacement("a", (1, 1, 0), (2, 2, 1)),
           BoxPlacement("a", (0, 0, 3), (2, 1, 2)))
    problems = loading_problems((4, 4, 4), [t], bad)
    assert any("overlap" in p for p in problems)
    assert any("allowed rotation" in p for p in problems)


def test_same_seed_same_loading():
    _, container, types = load_box_instance(DATA / "BR1_1.json")
    a = pack_boxes(container, types, seconds=0.0, seed=3, restarts=3)
    b = pack_boxes(container, types, seconds=0.0, seed=3, restarts=3)
    assert a.placements == b.placements


def test_pack_command_writes_checked_result(tmp_path):
    out = tmp_path / "r.json"
    assert pack_command([str(DATA / "BR1_1.json"), "--seconds", "0", "-o", str(out)]) == 0
    res = json.loads(out.read_text())
    _, container, types = load_box_instance(DATA / "BR1_1.json")
    pl = [BoxPlacement(str(p["box"]), (p["x"], p["y"], p["z"]), tuple(p["dims"])) for p in res["placements"]]
    assert independent_problems(container, types, pl) == []


def test_bad_instance_is_an_input_error(tmp_path):
    f = tmp_path / "x.json"
    f.write_text('{"container": [1, 2]}')
    with pytest.raises(InputError, match="not a box instance"):
        load_box_instance(f)
    with pytest.raises(InputError, match="container must be"):
        pack_boxes((0, 1, 1), [], seconds=0.0)
