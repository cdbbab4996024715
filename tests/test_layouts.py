"""The layout service: each printer goes to the implementation of its profile, and every answer
carries a verified layout and the deterministic work it cost."""

from datetime import datetime

import numpy as np
import pytest
import trimesh

from packer.errors import PackerError
from packer.fleet.records import CopyRef
from packer.intake.job import Printer, Rules
from packer.intake.parts import load_part
from packer.layouts import LayoutPart, Layouts
from packer.layouts.flat import FIT_CALL_S, FIT_COPY_S, FlatLayouts
from packer.layouts.powder import POWDER_BODY_S, POWDER_PAIR_S, PowderLayouts
from test_fleet_support import profile

DUE = datetime(2026, 3, 3, 17, 0)


@pytest.fixture(scope="module")
def cube(tmp_path_factory):
    """A 20 mm cube: footprint 400 mm^2, volume 8000 mm^3 (plain geometry)."""
    path = tmp_path_factory.mktemp("cube") / "cube.stl"
    trimesh.creation.box((20.0, 20.0, 20.0)).export(path)
    return load_part(path, name="cube")


def _service(cube):
    kinds = [LayoutPart(cube, (0.0, 90.0), False)]
    flat, powder = FlatLayouts(kinds, Rules(), seed=0), PowderLayouts(kinds, Rules(), seed=0)
    return Layouts([flat, powder]), flat, powder


def _printer(tech, material, volume=(200.0, 200.0, 200.0)):
    return Printer(name=f"{tech}-1", profile=profile(tech, volume=volume), available_from=DUE,
                   materials=(material,))


def _refs(n, material):
    return [CopyRef("O1", "cube", k + 1, 0, material, DUE, 1) for k in range(n)]


def test_each_printer_goes_to_the_implementation_of_its_profile(cube):
    layouts, flat, powder = _service(cube)
    fil, res, pow_ = _printer("filament", "PLA"), _printer("resin", "resin-grey"), _printer("powder", "PA12")
    assert layouts.engine(fil) is flat and layouts.engine(res) is flat and layouts.engine(pow_) is powder
    assert not layouts.traits(fil).packs_volume and layouts.traits(fil).pool_fill
    assert layouts.traits(pow_).packs_volume and not layouts.traits(pow_).pool_fill
    with pytest.raises(PackerError, match="no layout engine"):
        Layouts([powder]).traits(fil)


def test_a_flat_layout_is_verified_and_its_work_is_deterministic(cube):
    layouts, _, _ = _service(cube)
    fil = _printer("filament", "PLA")
    refs = _refs(4, "PLA")
    a, b = layouts.fits(fil, refs, seconds=2.0), layouts.fits(fil, refs, seconds=2.0)
    assert a.layout is not None and a.chosen == (0, 1, 2, 3)
    assert a.work_s == b.work_s >= FIT_CALL_S + 4 * FIT_COPY_S      # engine units on top of the charges
    assert len(a.layout.transforms) == 4 and a.layout.build_height_mm == pytest.approx(20.0)
    assert a.layout.utilization == pytest.approx(4 * 400.0 / (200.0 * 200.0))   # 4 cube shadows on the plate
    corners = [t @ np.array([0.0, 0.0, 0.0, 1.0]) for t in a.layout.transforms]
    for i in range(4):
        for j in range(i + 1, 4):
            # spacing 5 mm between 20 mm squares: centres at least 25 mm apart along some axis
            gap = np.abs(corners[i][:2] - corners[j][:2]).max()
            assert gap >= 25.0 - 1e-6


def test_the_pool_fill_keeps_the_required_copies(cube):
    layouts, _, _ = _service(cube)
    fil = _printer("filament", "PLA", volume=(60.0, 60.0, 200.0))   # 52 mm inside the margin: 2 x 2 cubes
    got = layouts.fill(fil, _refs(9, "PLA"), must=1, seconds=2.0)
    assert got.layout is not None and 0 in got.chosen and 1 <= len(got.chosen) <= 4
    assert len(got.layout.transforms) == len(got.chosen)


def test_a_powder_build_is_charged_by_its_bodies(cube):
    layouts, _, _ = _service(cube)
    pw = _printer("powder", "PA12")
    got = layouts.fits(pw, _refs(3, "PA12"), seconds=5.0)
    assert got.layout is not None and got.chosen == (0, 1, 2)
    assert got.work_s == pytest.approx(FIT_CALL_S + 3 * POWDER_BODY_S + 9 * POWDER_PAIR_S)
    h = got.layout.build_height_mm
    assert h >= 20.0 - 1e-6
    assert got.layout.utilization == pytest.approx(3 * 8000.0 / (200.0 * 200.0 * h))   # volume density
