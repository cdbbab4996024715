"""Procedural parts: every kind is a closed solid of the asked size, the same for the same seed."""

from __future__ import annotations

import numpy as np
import pytest

from packer.bench.meshcheck import check_mesh
from packer.bench.partgen import PART_KINDS, make_part
from packer.errors import InputError
from packer.intake.mesh.shadow import footprint_of

SEEDS = (0, 1, 2)


def test_the_promised_kinds_exist():
    assert len(PART_KINDS) == len(set(PART_KINDS)) >= 14
    assert {"bracket", "ring", "knob", "gear", "clip", "enclosure", "lid", "tube", "housing", "hinge",
            "spacer", "hook", "plate-with-slots", "cover"} <= set(PART_KINDS)


@pytest.mark.parametrize("kind", PART_KINDS)
@pytest.mark.parametrize("size", [12.0, 85.0])
def test_every_kind_is_a_closed_single_body_of_the_asked_size(kind, size):
    for seed in SEEDS:
        mesh = make_part(kind, size=size, seed=seed)
        check = check_mesh(mesh)
        assert check.problems == (), (kind, seed)
        assert check.watertight and check.winding_consistent and check.volume > 0
        assert check.bodies == 1 and check.genus is not None
        assert max(mesh.extents) == pytest.approx(size, rel=1e-12)
        assert np.allclose(mesh.bounds[0], 0.0, atol=1e-9)
        assert len(mesh.faces) <= 4000, (kind, seed, len(mesh.faces))   # modest meshes for fast tests


@pytest.mark.parametrize("kind", PART_KINDS)
def test_same_seed_same_mesh_other_seeds_vary(kind):
    a = make_part(kind, size=50.0, seed=7)
    b = make_part(kind, size=50.0, seed=7)
    assert np.array_equal(a.vertices, b.vertices) and np.array_equal(a.faces, b.faces)
    volumes = {round(make_part(kind, size=50.0, seed=s).volume, 6) for s in SEEDS}
    assert len(volumes) >= 2


def test_gear_footprint_has_the_bore_and_its_teeth():
    mesh = make_part("gear", size=60.0, seed=30)
    fp = footprint_of(mesh)
    assert len(fp.interiors) >= 1                     # the bore goes through
    assert fp.area < np.pi * 30.0 ** 2                # teeth and bore cut into the tip circle


def test_a_washer_and_a_slotted_plate_have_holes_through():
    assert check_mesh(make_part("ring", size=40.0, seed=1)).genus == 1
    plate = make_part("plate-with-slots", size=90.0, seed=0)
    assert check_mesh(plate).genus == len(footprint_of(plate).interiors) >= 4


def test_bad_kind_and_size_are_refused():
    with pytest.raises(InputError, match=r"unknown part kind 'sprocket'; known kinds: bracket, ring"):
        make_part("sprocket", size=10.0, seed=0)
    with pytest.raises(InputError, match="part size must be a positive number of mm"):
        make_part("ring", size=0.0, seed=0)
