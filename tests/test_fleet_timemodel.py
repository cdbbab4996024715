"""Time and material models checked against examples worked by hand from their formulas."""

import pytest

from packer.errors import InputError
from packer.fleet.timemodel import (PartStats, deposited_volume_mm3, layers, part_mass_g, plate_time, powder_use_g)
from packer.intake.profile import ResinTime
from test_fleet_support import profile

CUBE20 = PartStats(volume_mm3=8000.0, area_mm2=2400.0, height_mm=20.0, footprint_mm2=400.0)


def test_layers_exact_multiple_is_not_rounded_up():
    # 50 mm / 0.05 mm = 1000 layers exactly (floating point must not give 1001)
    assert layers(50.0, 0.05) == 1000
    assert layers(50.01, 0.05) == 1001
    assert layers(0.0, 0.05) == 0


def test_resin_check_value_8637_5_s():
    # Source: REFERENCES.md, resin time model (Gibson, Rosen, Stucker, AM Technologies 2nd ed.
    # ch. 4 and 16): 50 mm at 0.05 mm -> N = 1000; 5 bottom layers of 30 s = 150 s;
    # 995 layers of 2.5 s = 2487.5 s; each layer 5/2 + 5/2 + 1 = 6 s -> 6000 s; T = 8637.5 s.
    p = profile("resin", time=ResinTime(layer_height_mm=0.05, bottom_layers=5, bottom_exposure_s=30.0,
                                        exposure_s=2.5, lift_mm=5.0, lift_speed_mm_s=2.0,
                                        retract_speed_mm_s=2.0, rest_s=1.0))
    tall = PartStats(volume_mm3=5000.0, area_mm2=2000.0, height_mm=50.0, footprint_mm2=100.0)
    est = plate_time(p, [tall])
    assert est.print_s == pytest.approx(8637.5)
    assert est.terms["layers"] == 1000


def test_resin_time_follows_tallest_part_not_count():
    # Gibson et al. ch. 16: a whole layer cures at once.
    p = profile("resin")
    tall = PartStats(5000.0, 2000.0, 50.0, 100.0)
    short = PartStats(500.0, 400.0, 10.0, 50.0)
    one = plate_time(p, [tall]).print_s
    assert plate_time(p, [tall] + [short] * 20).print_s == pytest.approx(one)
    assert plate_time(p, [short]).print_s < one


def test_filament_cube_by_hand():
    # 20 mm cube, default FilamentTime (0.2 mm layers, 0.45 mm lines, 2 walls, 20 % infill,
    # 10 mm3/s, 2 s per layer change, 0.6 s travel per part per layer). Formula: timemodel docstring.
    # shell = min(8000, 2400 * 2 * 0.45) = 2160 mm3; deposited = 2160 + 0.2 * (8000 - 2160) = 3328 mm3
    # deposit = 3328 / 10 = 332.8 s; layers = 20 / 0.2 = 100; layer changes = 200 s; travel = 60 s
    p = profile("filament")
    assert deposited_volume_mm3(p.time, CUBE20) == pytest.approx(3328.0)
    est = plate_time(p, [CUBE20])
    assert est.terms["deposit_s"] == pytest.approx(332.8)
    assert est.print_s == pytest.approx(592.8)
    assert est.setup_s == 300.0 and est.clear_s == 300.0
    assert est.total_s == pytest.approx(1192.8)
    # two cubes: deposit doubles (665.6), layer changes stay (200), travel doubles (120)
    assert plate_time(p, [CUBE20, CUBE20]).print_s == pytest.approx(985.6)


def test_filament_shell_clamped_to_volume():
    # a 2 mm cube: shell estimate 24 * 2 * 0.45 = 21.6 mm3 > V = 8 mm3, so the part is all shell
    tiny = PartStats(8.0, 24.0, 2.0, 4.0)
    assert deposited_volume_mm3(profile("filament").time, tiny) == pytest.approx(8.0)


def test_powder_build_by_hand():
    # Gibson et al. eqs. 16.8-16.11 (REFERENCES.md): ten 20 mm cubes, V = 80000 mm3, build height
    # 100 mm at 0.1 mm -> 1000 layers * 10 s recoat = 10000 s; scan = 80000 / (0.1 * 0.1 * 3000)
    # = 2666.67 s; build = 12666.67 s; cool-down 1.0 * build; print = 25333.33 s; warm-up 5400 s.
    p = profile("powder", volume=(300.0, 300.0, 300.0))
    est = plate_time(p, [CUBE20] * 10, build_height_mm=100.0)
    assert est.terms["recoat_s"] == pytest.approx(10000.0)
    assert est.terms["scan_s"] == pytest.approx(2666.6667, rel=1e-6)
    assert est.print_s == pytest.approx(25333.333, rel=1e-6)
    assert est.setup_s == 5400.0
    # without a build height the tallest part (20 mm, 200 layers) is used: recoat 2000 s
    assert plate_time(p, [CUBE20] * 10).terms["recoat_s"] == pytest.approx(2000.0)


def test_masses_by_hand():
    # filament: PLA 1.24 g/cm3 (REFERENCES.md, common practice) * 3328 mm3 = 4.12672 g
    assert part_mass_g(profile("filament"), "PLA", CUBE20) == pytest.approx(4.12672)
    # resin: solid, 1.1 g/cm3 * 8 cm3 = 8.8 g
    assert part_mass_g(profile("resin"), "resin-grey", CUBE20) == pytest.approx(8.8)
    # powder: PA12 1.01 g/cm3 (REFERENCES.md, from memory) * 8 cm3 = 8.08 g
    assert part_mass_g(profile("powder"), "PA12", CUBE20) == pytest.approx(8.08)


def test_powder_use_by_hand():
    # parts 80 cm3 * 1.01 = 80.8 g; unfused (300*300*100 - 80000) mm3 = 8920 cm3 at 0.43 g/cm3,
    # refresh 0.3 -> 0.3 * 0.43 * 8920 = 1150.68 g; total 1231.48 g
    p = profile("powder", volume=(300.0, 300.0, 300.0))
    use = powder_use_g(p, "PA12", build_volume_used_mm3=300 * 300 * 100.0, parts_volume_mm3=80000.0)
    assert use == pytest.approx(1231.48)


def test_errors_name_the_problem():
    with pytest.raises(InputError, match="at least one part"):
        plate_time(profile("filament"), [])
    with pytest.raises(InputError, match="does not run material 'ABS'"):
        part_mass_g(profile("filament"), "ABS", CUBE20)
    with pytest.raises(InputError, match="not a powder bed"):
        powder_use_g(profile("resin"), "resin-grey", build_volume_used_mm3=1.0, parts_volume_mm3=0.5)
