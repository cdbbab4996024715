"""The builder's fill rule judges due times on the moment parts are done, and a build refused on
its time, not its geometry, does not shrink the fill the profile learned.

Checks of the planner's own rules (fleet README, "Powder builds on large days"):
- an order is done when its parts are through post-processing (issue 15 item 7), so a copy
  that joins a plate must not push an on-time copy's *done* moment past its due time, even
  when the plate is still cleared before it;
- exact geometry of the stand-in: cubes of side a with spacing s stacked in a grid, a layer
  holds floor((w + s) / (a + s)) per side, n cubes need ceil(n / per layer) layers, so the
  build is layers * a + (layers - 1) * s high. 17 cubes of 20 mm with 5 mm spacing on a
  100 mm square take two layers (45 mm) where the capacity hint projects 26.6 mm: the set
  packs, it is only too late built that high, so the profile's learned fill must stay at
  least the fill that packed.
"""

import math
from dataclasses import replace
from datetime import timedelta

from packer.fleet.budget import Budget
from packer.fleet.builder import build_plates, plate_on
from packer.fleet.planner import CopyRef, PlannerSettings
from packer.fleet.view import FleetView, screen
from packer.intake.job import Printer
from packer.intake.profile import PostStep
from packer.layouts import PlateLayout
from standin_layouts import FnLayouts
from test_fleet_merge import CAL, PRN, STATS, TUE, can_print, fits, hint
from test_fleet_support import profile

CUBE, GAP, SIDE, Z = 20.0, 5.0, 100.0, 100.0     # mm: cube side, spacing, build square, build height


def _cubes(order: str, n: int, due, material: str = "PLA"):
    return [CopyRef(order, "cube", k + 1, 0, material, due, 1) for k in range(n)]


def _view(printer, copies, layouts):
    settings = PlannerSettings()
    eligible, _ = screen(copies, [printer], layouts)
    return FleetView([printer], STATS, CAL, TUE, settings, layouts, eligible), Budget(settings, layouts)


def test_fill_rule_protects_the_done_moment_after_post_processing():
    # an unattended post-processing step of two hours after every plate (curing, say)
    post = (PostStep("cure", 7200.0, False),)
    prn = replace(PRN, profile=replace(PRN.profile, post_processing=post))
    layouts = FnLayouts(fits, hint, can_print)
    far = TUE + timedelta(days=7)
    a, bs = _cubes("A", 1, far), _cubes("B", 10, far)
    view, _ = _view(prn, a + bs, layouts)
    alone = plate_on(view, 0, a, None, view.ready[0], 0)
    shared = plate_on(view, 0, a + bs, None, view.ready[0], 0)
    assert alone.free < shared.free < alone.free + timedelta(hours=2)   # B's copies add less than the step
    # A is due the moment its plate alone is done: cleared with B's copies it is still
    # cleared before that, but done after it, so B's copies may not join
    due_a = alone.done
    a = _cubes("A", 1, due_a)
    view, _ = _view(prn, a + bs, layouts)
    plates = build_plates(view, None, a + bs, banded=False, mode="due").plates
    assert [c.order for c in plates[0].copies] == ["A"]
    assert plates[0].done <= due_a


def _layer_height(n: int) -> float:
    """Height of n cubes stacked in a grid on the build square (exact)."""
    per_side = math.floor((SIDE + GAP) / (CUBE + GAP))
    layers = math.ceil(n / per_side ** 2)
    return layers * CUBE + (layers - 1) * GAP


def test_build_refused_on_its_time_keeps_the_learned_fill():
    pow_prof = profile("powder", name="cell", volume=(SIDE, SIDE, Z), spacing=GAP, margin=0.0)
    prn = Printer(name="cell-1", profile=pow_prof, available_from=TUE, materials=("PA12",))
    assert _layer_height(16) == CUBE and _layer_height(17) == 2 * CUBE + GAP

    def vhint(p, copies):             # 1/64 of the volume per cube: 17 cubes project 26.6 mm
        return len(copies) / 64.0

    def vfits(p, copies):
        return PlateLayout((), _layer_height(len(copies)), 0.0) if _layer_height(len(copies)) <= Z else None

    layouts = FnLayouts(vfits, vhint, can_print)
    probe = _cubes("A", 17, TUE + timedelta(days=7), "PA12")
    view, _ = _view(prn, probe, layouts)
    low = plate_on(view, 0, probe, PlateLayout((), 17 / 64.0 * Z, 0.0), view.ready[0], 0)
    high = plate_on(view, 0, probe, PlateLayout((), _layer_height(17), 0.0), view.ready[0], 0)
    assert low.done < high.done
    # due between the two: on time as the hint projects the build, late as it packs
    copies = _cubes("A", 17, low.done + (high.done - low.done) / 2, "PA12")
    view, budget = _view(prn, copies, layouts)
    built = build_plates(view, budget, copies, banded=False, mode="due")
    assert sum(len(p.copies) for p in built.plates) == 17 and not built.unplaced
    # every probe packed (geometry held: 17 at 45 mm, then fewer): nothing taught the profile a
    # lower fill, so it is still at least the first probe's (without the rule it fell to just
    # below the 17 cubes' hint, 0.27, as if they had not packed)
    assert view.target["cell"] >= view.settings.first_probe_fill


def test_packed_height_scales_the_next_projections():
    # 17 cubes pack two layers high, 45 mm, where the hint projects 17/64 of the 100 mm room
    pow_prof = profile("powder", name="cell", volume=(SIDE, SIDE, Z), spacing=GAP, margin=0.0)
    prn = Printer(name="cell-1", profile=pow_prof, available_from=TUE, materials=("PA12",))
    layouts = FnLayouts(lambda p, cs: PlateLayout((), _layer_height(len(cs)), 0.0), lambda p, cs: len(cs) / 64.0,
                        can_print)
    copies = _cubes("A", 17, TUE + timedelta(days=7), "PA12")
    view, budget = _view(prn, copies, layouts)
    built = build_plates(view, budget, copies, banded=False, mode="due")
    assert [len(p.copies) for p in built.plates] == [17]
    assert math.isclose(view.height_gain["cell"], _layer_height(17) / (17 / 64.0 * Z))


def test_a_late_build_runs_through_two_nights_at_most():
    # 600 cubes all due at the start (late whatever is done) in a cell 3 m high: by the hint
    # every cube takes 1/1920 of the room, so the chamber would hold them all in one build of
    # about 940 mm. Late copies do not hold a plate back by the due rule, so without a cap that
    # one build ran days; capped, each build is done by the end of the second shift after the
    # one its first copy alone would be done in (the planner's own rule; a constructed case)
    pow_prof = profile("powder", name="cell", volume=(SIDE, SIDE, 3000.0), spacing=GAP, margin=0.0)
    prn = Printer(name="cell-1", profile=pow_prof, available_from=TUE, materials=("PA12",))
    layouts = FnLayouts(lambda p, cs: None, lambda p, cs: len(cs) / 1920.0, can_print)
    copies = _cubes("A", 600, TUE, "PA12")
    view, _ = _view(prn, copies, layouts)
    plates = build_plates(view, None, copies, banded=False, mode="due").plates
    assert sum(len(p.copies) for p in plates) == 600
    assert len(plates) > 1
    for p in plates:
        alone = plate_on(view, 0, p.copies[:1], None, p.start, 0)
        cap, shifts = alone.done, 0
        while shifts < 2:
            cap += timedelta(days=1)
            shifts += cap.weekday() in CAL.days
        assert p.done <= cap.replace(hour=19, minute=0, second=0), (p.start, p.done, len(p.copies))
    # the rule is the fill rule's: by capacity alone ("full") the build is not cut
    full = build_plates(view, None, copies, banded=False, mode="full").plates
    assert len(full) == 1
