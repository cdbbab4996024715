"""Material changes cost time and post-processing sets when an order is done."""

from dataclasses import replace
from datetime import datetime, time, timedelta
from pathlib import Path

import pytest

from packer.fleet.planner import CopyRef, plan_fleet
from packer.fleet.timemodel import PartStats
from packer.intake.job import Calendar, Printer
from packer.intake.profile import PostStep, load_profile
from standin_layouts import FnLayouts
from test_fleet_support import profile

CAL = Calendar(shift_start=time(7), shift_end=time(19), days=(0, 1, 2, 3, 4))
TUE = datetime(2026, 3, 3, 7, 0)     # a Tuesday, shift start
STATS = [PartStats(8000.0, 2400.0, 20.0, 400.0)]     # a 20 mm cube
ROOT = Path(__file__).resolve().parent.parent


def hint(p, copies):
    return sum(STATS[c.kind].footprint_mm2 for c in copies) / 4000.0     # 10 cubes a plate


def fits(p, copies):
    return object() if hint(p, copies) <= 1.0 else None


def _plan(prof, copies):
    prn = Printer(name="p1", profile=prof, available_from=TUE, materials=("PLA", "PETG"))
    return plan_fleet(copies, [prn], stats=STATS, calendar=CAL, start=TUE, layouts=FnLayouts(fits, hint),
                      seconds=5.0)


def _copies(material, n, order, due):
    return [CopyRef(order, "cube", k + 1, 0, material, due, 1) for k in range(n)]


def test_a_change_of_material_delays_the_next_plate_by_the_change_time():
    due = TUE + timedelta(days=3)
    copies = _copies("PLA", 10, "A", due) + _copies("PETG", 10, "B", due)
    prof = replace(profile("filament"), material_change_s=1800.0)
    plates = sorted(_plan(prof, copies).plates, key=lambda p: p.start)
    assert [p.material for p in plates] in (["PLA", "PETG"], ["PETG", "PLA"])
    gap = (plates[1].start - plates[0].free).total_seconds()
    assert plates[1].change_s == 1800.0 and gap >= 1800.0 and plates[0].change_s == 0.0


def test_the_printer_stays_on_its_material_when_urgency_allows():
    # A (PLA), B (PETG) and C (PLA) are all due the same afternoon: one change, not two
    due = TUE + timedelta(hours=30)
    copies = _copies("PLA", 10, "A", due) + _copies("PETG", 10, "B", due) + _copies("PLA", 10, "C", due)
    prof = replace(profile("filament"), material_change_s=1800.0)
    plates = sorted(_plan(prof, copies).plates, key=lambda p: p.start)
    changes = sum(1 for a, b in zip(plates, plates[1:]) if a.material != b.material)
    assert changes == 1 and sum(p.change_s > 0 for p in plates) == 1


def test_an_order_is_done_when_its_parts_are_through_post_processing():
    steps = (PostStep("wash", 600.0, True), PostStep("cure", 1800.0, False))
    prof = replace(profile("filament"), post_processing=steps)
    res = _plan(prof, _copies("PLA", 3, "A", TUE + timedelta(days=3)))
    (p,) = res.plates
    # wash with an operator right after clearing (inside the shift), then 30 min of curing
    assert p.done == p.free + timedelta(seconds=600 + 1800)
    # after the shift an operator step waits for the next morning (07:00) and runs 10 min
    late = replace(p, free=datetime(2026, 3, 3, 18, 55))
    assert late.done == datetime(2026, 3, 4, 7, 10) + timedelta(seconds=1800)


def test_shipped_profiles_declare_changes_and_post_processing():
    resin = load_profile(ROOT / "plates" / "resin-vat-176.yaml")
    powder = load_profile(ROOT / "plates" / "powder-cell-331.yaml")
    assert resin.material_change_s > 0 and [s.step for s in resin.post_processing] == ["wash", "cure"]
    assert any(s.operator for s in powder.post_processing)
    assert any(not s.operator for s in powder.post_processing)


def test_a_bad_post_processing_step_is_reported_with_its_key(tmp_path):
    text = (ROOT / "plates" / "fil-round-192.yaml").read_text()
    bad = tmp_path / "bad.yaml"
    bad.write_text(text + "post_processing:\n  - {step: sand, duration_s: -5}\n")
    with pytest.raises(Exception) as err:
        load_profile(bad)
    assert "post_processing[0].duration_s" in str(err.value)
