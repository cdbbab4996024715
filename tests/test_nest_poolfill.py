"""Filling one plate from a pool of candidates (packer.nest.poolfill.fill_plate)."""

import shapely
import pytest

from packer.errors import InputError
from packer.nest import Container, Shape, verify_layout
from packer.nest.poolfill import fill_plate


def square(side):
    return shapely.box(0.0, 0.0, side, side)


def test_squares_fill_the_plate_to_its_area_bound():
    # 30 squares of 10 on a 40 x 40 plate, shapes touching (clearance 0): the area bound
    # (plate area / square area = 16, elementary) is reached by the 4 x 4 grid, so the
    # fill must place exactly 16, the 5 required ones among them.
    shapes = [Shape(square(10)) for _ in range(30)]
    plate = fill_plate(shapes, Container.rectangle(40, 40), must=5, seconds=1.0, clearance=0.0)
    assert plate is not None and len(plate) == 16
    assert {0, 1, 2, 3, 4} <= {p.index for p in plate}
    assert verify_layout(shapes, plate, Container.rectangle(40, 40)) == []


def test_small_candidates_fill_the_room_a_large_one_leaves():
    # required: one 30 x 30 square; candidates: a second 30 x 30 (cannot fit beside it) and
    # eight 10 x 10 squares. The L-shaped rest of a 40 x 40 plate (area 700) holds exactly
    # 7 of the small ones (4 along one side, 3 along the other); a longest-prefix rule would
    # stop at the second large square and place none of them.
    shapes = [Shape(square(30)), Shape(square(30))] + [Shape(square(10)) for _ in range(8)]
    plate = fill_plate(shapes, Container.rectangle(40, 40), must=1, seconds=1.0, clearance=0.0)
    kept = {p.index for p in plate}
    assert 0 in kept and 1 not in kept
    assert len(kept) == 8
    assert verify_layout(shapes, plate, Container.rectangle(40, 40)) == []


def test_required_shapes_that_cannot_share_a_plate_give_none():
    shapes = [Shape(square(30)), Shape(square(30)), Shape(square(5))]
    assert fill_plate(shapes, Container.rectangle(40, 40), must=2, seconds=0.5) is None


def test_spacing_grown_shapes_keep_clear_and_use_only_allowed_turns():
    # L-shaped parts allowed at 0 and 180 degrees only; every kept layout is checked exactly
    ell = shapely.Polygon([(0, 0), (20, 0), (20, 6), (6, 6), (6, 14), (0, 14)])
    shapes = [Shape(ell, rotations=(0.0, 180.0)) for _ in range(40)]
    box = Container.rectangle(80, 60)
    plate = fill_plate(shapes, box, must=3, seconds=1.0)
    assert plate is not None and len(plate) >= 3
    assert all(p.rotation in (0.0, 180.0) and not p.mirror for p in plate)
    assert verify_layout(shapes, plate, box) == []


def test_must_outside_the_candidates_is_refused():
    with pytest.raises(InputError):
        fill_plate([Shape(square(5))], Container.rectangle(10, 10), must=2, seconds=0.1)


def test_insertion_moves_placed_shapes_to_make_room():
    # Four squares of side 48 fit a 100 x 100 plate (two by two; elementary geometry). Three
    # placed as below leave no 48 x 48 free square anywhere (the gaps beside the top one are
    # 26 wide), so no fill that keeps them where they are can add the fourth; the insertion
    # must move them and add it, with an exactly verified layout.
    import numpy as np

    from packer.nest.budget import Budget
    from packer.nest.construct import Layout
    from packer.nest.kit import Kit, Room
    from packer.nest.plates import to_placements
    from packer.nest.poolfill import _insert

    shapes = [Shape(square(48), rotations=(0.0,)) for _ in range(4)]
    plate = Container.rectangle(100, 100)
    kit = Kit(shapes, clearance=1e-6)
    room = Room.of(kit, plate)
    start = Layout(room)
    for i, at in enumerate([(0.0, 0.0), (52.0, 0.0), (26.0, 52.0)]):
        start.add(i, kit.options[i][0], np.array(at))
    assert verify_layout(shapes, to_placements(kit, start), plate) == []
    grown = _insert(kit, room, start, [3], Budget(5.0, kit.meter), np.random.default_rng(0))
    placed = to_placements(kit, grown)
    assert sorted(p.index for p in placed) == [0, 1, 2, 3]
    assert verify_layout(shapes, placed, plate) == []
