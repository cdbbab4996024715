"""Generated days and the skyline-packing stand-in used by the fleet benchmark."""

import itertools
from collections import Counter

from packer.bench.fleetcmd import bench_command
from packer.bench.daygen import box_can_print, box_hint, make_day, shelf_fits


def test_day_is_seeded_and_mixed():
    a, b = make_day(copies=300, printers=8, seed=3), make_day(copies=300, printers=8, seed=3)
    assert a == b
    assert make_day(copies=300, printers=8, seed=4).copies != a.copies
    assert len(a.copies) == 300
    assert {p.profile.technology for p in a.printers} == {"filament", "resin", "powder"}
    assert len({(c.order, c.part, c.copy) for c in a.copies}) == 300
    # due times over two days
    assert len({c.due.date() for c in a.copies}) == 2
    # long tail: the largest line is far above the median line
    q = sorted(Counter((c.order, c.part) for c in a.copies).values())
    assert q[-1] >= 5 * q[len(q) // 2]


def _boxes_ok(day, printer, copies, layout):
    """Independent check of a stand-in layout: grown boxes inside the room and pairwise disjoint."""
    prof = printer.profile
    s, m = prof.spacing, prof.margin
    ux = prof.build_volume[0] - 2 * m + s
    uy = prof.build_volume[1] - 2 * m + s
    rects = []
    for c, (x, y, z, turned) in zip(copies, layout.places):
        part = day.parts[c.kind]
        w, d = (part.d, part.w) if turned else (part.w, part.d)
        w, d, h = w + s, d + s, part.h + s
        assert -1e-9 <= x and x + w <= ux + 1e-9 and -1e-9 <= y and y + d <= uy + 1e-9
        rects.append((x, y, z, x + w, y + d, z + h))
    for a, b in itertools.combinations(rects, 2):
        apart = a[3] <= b[0] + 1e-9 or b[3] <= a[0] + 1e-9 or a[4] <= b[1] + 1e-9 or \
            b[4] <= a[1] + 1e-9 or a[5] <= b[2] + 1e-9 or b[5] <= a[2] + 1e-9
        assert apart, (a, b)


def test_shelf_layouts_are_valid_and_hint_is_a_bound():
    day = make_day(copies=400, printers=6, seed=1)
    fits, hint, can = shelf_fits(day.parts), box_hint(day.parts), box_can_print(day.parts)
    for pr in day.printers:
        tech = pr.profile.technology
        cs = [c for c in day.copies if day.parts[c.kind].technology == tech
              and c.material in pr.materials and can(pr, c) is None][:60]
        best = None
        for k in range(1, len(cs) + 1):
            lay = fits(pr, cs[:k])
            if lay is None:
                break
            best = (k, lay)
        assert best is not None
        k, lay = best
        _boxes_ok(day, pr, cs[:k], lay)
        # the hint is the area (volume) share of the spacing-grown footprints: a layout that
        # fits never needs more than the whole plate
        assert hint(pr, cs[:k]) <= 1.0 + 1e-9


def test_bench_command_prints_a_table_and_repeats(capsys):
    code = bench_command(["--copies", "60", "--printers", "4", "--seconds", "2", "--repeat"])
    out = capsys.readouterr().out
    assert code == 0
    assert "skyline-packing stand-in" in out and "same plan" in out
    row = [line for line in out.splitlines() if line.strip().startswith("60 ")]
    assert row, out
