"""Lower bounds checked against the Martello-Toth check cases and small hand cases."""

import itertools

import pytest
from shapely.geometry import box

from packer.errors import SizeError
from packer.fleet.bounds import (area_bound, bound_region_area_mm2, inflated_area_mm2, l1_bound, l2_bound, makespan_bound, volume_bound)


@pytest.mark.parametrize("weights, l1, l2", [
    # Source: Martello & Toth, Discrete Applied Mathematics 28 (1990) 59-70 (REFERENCES.md check cases)
    ((6, 6, 6, 6), 3, 4),
    ((9, 8, 2, 2, 5, 4), 3, 4),
])
def test_martello_toth_check_cases(weights, l1, l2):
    assert l1_bound(weights, 10) == l1
    assert l2_bound(weights, 10) == l2


def _optimum(weights, capacity):
    """Fewest bins by brute force (first fit over all orders), for tiny instances."""
    best = len(weights)
    for order in itertools.permutations(weights):
        bins = []
        for w in order:
            for i, load in enumerate(bins):
                if load + w <= capacity:
                    bins[i] += w
                    break
            else:
                bins.append(w)
        best = min(best, len(bins))
    return best


@pytest.mark.parametrize("weights", [(7, 3, 3, 3, 4), (5, 5, 5, 1, 1, 9), (2, 2, 2, 2, 2, 6, 7),
                                     (4, 4, 4, 3, 3, 3), (8, 1, 1, 6, 4)])
def test_bounds_never_exceed_the_optimum(weights):
    # a lower bound must hold on every instance; the optimum is found by brute force
    opt = _optimum(weights, 10)
    assert l1_bound(weights, 10) <= l2_bound(weights, 10) <= opt


def test_l1_float_noise_and_errors():
    assert l1_bound([0.1] * 10, 1.0) == 1          # 0.1 * 10 = 0.9999999999999999
    assert l1_bound([], 10) == 0 and l2_bound([], 10) == 0
    with pytest.raises(SizeError, match="in \\[0, capacity\\]"):
        l2_bound([11], 10)
    with pytest.raises(SizeError, match="capacity must be positive"):
        l1_bound([1], 0)


def test_area_bound_with_spacing_and_margin():
    # Martello & Vigo 1998 L0 with spacing s = 4, margin m = 5 on a 100 x 100 plate:
    # region shrunk by m is 90 x 90; grown by s/2 = 2 -> 94 x 94 = 8836 mm2 (plate shrunk by m - s/2).
    region = box(5, 5, 95, 95)
    assert bound_region_area_mm2(region, 4.0) == pytest.approx(94 * 94)
    # a 20 x 20 square grown by 2 (round corners): 24*24 - 4*4 + pi*2^2 = 572.566 (Steiner formula)
    a = inflated_area_mm2(box(0, 0, 20, 20), 4.0)
    assert a == pytest.approx(24 * 24 - 16 + 3.14159265 * 4, rel=1e-3)
    # 16 such squares fit on a 94 x 94 plate in area terms (16 * 572.6 = 9161 > 8836): 2 plates
    assert area_bound([a] * 16, 94 * 94) == 2
    assert area_bound([a] * 15, 94 * 94) == 1
    # two footprints each over half the plate cannot share it (L2 part of the bound)
    assert area_bound([5000, 5000], 8836) == 2


def test_volume_bound():
    # Martello, Pisinger & Vigo 2000 L0: 10 parts of 8000 mm3 in a 40000 mm3 volume -> 2
    assert volume_bound([8000.0] * 10, 40000.0) == 2
    assert volume_bound([8000.0] * 11, 40000.0) == 3


def test_makespan_bound():
    # 3 machines ready at 0: work 10, 10, 10, 30 -> load 60/3 = 20, longest 30 -> 30
    assert makespan_bound(60, [0, 0, 0], longest_s=30) == 30
    # load bound: 9 jobs of 10 on 3 machines -> 30
    assert makespan_bound(90, [0, 0, 0], longest_s=10) == 30
    # a machine ready only at 1000 cannot help: the bound uses the two early ones (90 / 2 = 45)
    assert makespan_bound(90, [0, 0, 1000], longest_s=10) == 45
    # one machine ready at 5: 5 + 90
    assert makespan_bound(90, [5]) == 95
    # work in plates (constructed, hand-computed): 90 s counted with one plate of 10 s; two
    # machines that both take part run two plates, (90 + 10) / 2 = 50; one alone needs 90
    assert makespan_bound(90, [0, 0], plate_s=10, plates_counted=1) == 50
    assert makespan_bound(90, [0, 0], plate_s=10, plates_counted=2) == 45
    # the second machine ready at 100 does not help: (100 + 100) / 2 > 90
    assert makespan_bound(90, [0, 100], plate_s=10, plates_counted=1) == 90
    with pytest.raises(SizeError, match="at least one machine"):
        makespan_bound(1, [])
