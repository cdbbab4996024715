"""Equal disks on round and square plates at the best-known packing density (`packer bench plates`)."""

import pytest

from packer.nest import fit_on_plate
from packer.nest.verify import verify_layout
from packer.bench.plates import CIRCLE_RATIO, disk_case, square_ratio


@pytest.mark.parametrize("plate,n", [("circle", 5), ("circle", 7), ("circle", 13), ("circle", 19),
                                     ("square", 6), ("square", 10), ("square", 16)])
def test_best_known_packing_is_reached(plate, n):
    # ratios: circle 5 = 1 + sqrt(2 (1 + 1/sqrt 5)), 7 = 3, 13 = 1 + 1/sin(pi/10), 19 = 1 + sqrt 2 + sqrt 6
    # (Kravitz 1967; Graham 1968); square 6: m = sqrt(13)/6 (Graham), 10: m = 0.421279543 (from
    # memory of Specht's table of circles in a square), 16: a 4 x 4 grid, m = 1/3
    shapes, container, d = disk_case(plate, n)
    got = fit_on_plate(shapes, container, seconds=3.0, seed=0)
    assert got is not None and len(got) == n
    assert verify_layout(shapes, got, container) == []


def test_ratios_match_their_closed_forms():
    # 7 circles in a circle: a hexagon around one, R = 3 r; 9 in a square: a 3 x 3 grid, side = 6 r
    assert CIRCLE_RATIO[7] == pytest.approx(3.0) and square_ratio(9) == pytest.approx(6.0)
    # a denser packing than the best known cannot exist for the proved cases: 8 disks never fit
    # where 7 just do (R = 3 r is optimal for 7 and 8 needs 3.3048 r, Pirl 1969 - from memory)
    shapes, container, _ = disk_case("circle", 7)
    assert fit_on_plate(shapes + shapes[:1], container, seconds=0.2, seed=0) is None
