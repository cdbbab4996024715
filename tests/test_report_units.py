"""The report's modules one by one, on small hand-built plans.

Each check compares against something outside the report code: the HTML and
SVG are parsed by the standard library's parsers, the machine-readable times
are ISO 8601, weekdays come from Zeller's congruence, areas from the rectangle
formula and the shoelace formula, units from the SI, Markdown tables from the
GitHub Flavored Markdown table rules. tests/test_report.py and
tests/test_sheets.py check the written demo report as a whole.
"""

from __future__ import annotations

import csv
import re
from dataclasses import replace
import xml.etree.ElementTree as ET
from datetime import datetime, time, timedelta
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import trimesh
from shapely.geometry import box

from packer.intake.job import Calendar
from packer.intake.profile import load_profile
from packer.output.plan import LostCopy, OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy
from packer.output.report import write_picklist, write_reports
from packer.output.report.fmt import clock, copy_tag, duration, litres, mass, moment, plural, share, spools
from packer.output.report.materials import totals_by_material, totals_by_printer
from packer.output.report.page import order_rows, parts_rows, plate_facts, write_html
from packer.output.report.parts import parts_sections
from packer.output.report.sheets import sheet_actions, shifts_of, write_sheets
from packer.output.report.states import (cancelled_note, cancelled_on_plates, has_states, lost_rows, shown_plates,
                                         state_row, title)
from packer.output.report.summary import bound_rows, summary_facts
from packer.output.report.svg import Drawn, plate_svg, svg_path
from packer.output.report.tags import tagged
from packer.output.report.timeline import Bar, timeline_svg
from packer.output.report.views import placed_shadow, plate_views

ROOT = Path(__file__).resolve().parent.parent
START = datetime(2026, 12, 7, 7, 0)
SVG_NS = "{http://www.w3.org/2000/svg}"
# ISO 8601 extended-format date and time to the minute (ISO 8601-1:2019, 5.4.2)
ISO_MINUTES = re.compile(r"^\d{4}-(0[1-9]|1[0-2])-(0[1-9]|[12]\d|3[01])T([01]\d|2[0-3]):[0-5]\d$")
# void elements of the HTML Living Standard (WHATWG, section 13.1.2): no end tag
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


# --- independent references -----------------------------------------------------------------

def zeller_weekday(year: int, month: int, day: int) -> str:
    """Weekday of a Gregorian date by Zeller's congruence (Zeller, 1887), as an English abbreviation."""
    if month < 3:
        month, year = month + 12, year - 1
    k, j = year % 100, year // 100
    h = (day + 13 * (month + 1) // 5 + k + k // 4 + j // 4 + 5 * j) % 7
    return ("Sat", "Sun", "Mon", "Tue", "Wed", "Thu", "Fri")[h]


def shoelace(points: list[tuple[float, float]]) -> float:
    """Area of a simple polygon from its corners (Gauss's shoelace formula)."""
    n = len(points)
    return abs(sum(points[i][0] * points[(i + 1) % n][1] - points[(i + 1) % n][0] * points[i][1]
                   for i in range(n))) / 2


class Balance(HTMLParser):
    """Every element the standard library's HTML parser sees is closed, in order (voids aside)."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.doctype = False

    def handle_decl(self, decl):
        self.doctype = self.doctype or decl.lower() == "doctype html"

    def handle_starttag(self, tag, attrs):
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()


def well_formed_html(text: str) -> None:
    parser = Balance()
    parser.feed(text)
    parser.close()
    assert parser.doctype, "no <!doctype html>"
    assert not parser.errors, parser.errors[:3]
    assert not parser.stack, f"never closed: {parser.stack}"


def svg_root(text: str) -> ET.Element:
    root = ET.fromstring(text)            # raises on XML that is not well-formed
    assert root.tag == f"{SVG_NS}svg"
    return root


def view_box(root: ET.Element) -> tuple[float, float, float, float]:
    x, y, w, h = (float(v) for v in root.get("viewBox").split())
    return x, y, w, h


def path_points(d: str) -> list[tuple[float, float]]:
    return [(float(a), float(b)) for a, b in re.findall(r"[ML](-?[\d.]+),(-?[\d.]+)", d)]


def md_cells(line: str) -> int:
    """Cells of a GFM table row: pipes not escaped by a backslash, leading and trailing pipe dropped."""
    return len(re.split(r"(?<!\\)\|", line.strip().strip("|")))


def md_tables(text: str) -> list[list[str]]:
    tables, current = [], []
    for line in text.splitlines():
        if line.startswith("|"):
            current.append(line)
        elif current:
            tables.append(current)
            current = []
    return tables + ([current] if current else [])


# --- small plans ---------------------------------------------------------------------------

def turn_and_shift(deg: float, dx: float, dy: float) -> np.ndarray:
    a = np.radians(deg)
    m = np.eye(4)
    m[:2, :2] = [[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]]
    m[:2, 3] = dx, dy
    return m


def copy(order: str, n: int, *, part: str = "bracket", transform=None, mass_g: float = 12.4,
         volume: float = 10_000.0, material: str = "PLA") -> PlacedCopy:
    return PlacedCopy(order, part, n, Path(f"{part}.stl"), np.eye(4) if transform is None else transform,
                      material, volume, mass_g)


def plate(pid: str, items, *, start=START, hours=5.0, printer="fil-1", tech="filament", material="PLA",
          utilization=0.5, volume=(244.0, 198.0, 205.0), **kw) -> PlatePlan:
    return PlatePlan(id=pid, printer=printer, profile="fil-bench-244", technology=tech, material=material,
                     volume=volume, spacing=6.0, margin=4.0, items=tuple(items), start=start,
                     end=start + timedelta(hours=hours), free=start + timedelta(hours=hours, minutes=5),
                     height_mm=12.0, utilization=utilization, print_s=hours * 3600.0,
                     mass_g=sum(c.mass_g for c in items), file=f"plates/{pid}.3mf", **kw)


def small_plan(**kw) -> Plan:
    p1 = plate("P01", [copy("A", 1), copy("A", 2), copy("B", 1)])
    p2 = plate("P02", [copy("B", 2, material="PETG")], start=START + timedelta(hours=6), hours=2.0,
               material="PETG", change_s=600.0, change_from="PLA")
    orders = (OrderStatus("A", START + timedelta(hours=8), 1, 2, 2, p1.free),
              OrderStatus("B", START + timedelta(hours=7), 2, 3, 2, p2.free))
    return Plan(job="unit-day", job_file="unit-day.yaml", start=START, plates=(p1, p2),
                unplaced=(UnplacedCopy("B", "bracket", 3, "larger than every plate"),), orders=orders,
                bounds={"plates": {"filament/PLA": {"bound": 1, "used": 1, "gap": 0.0},
                                   "filament/PETG": {"bound": 1, "used": 2, "gap": 1.0}}}, **kw)


# --- fmt ------------------------------------------------------------------------------------

@pytest.mark.parametrize("day", [datetime(2026, 12, 7, 13, 34), datetime(2027, 2, 28, 23, 59),
                                 datetime(2028, 2, 29, 0, 5), datetime(2026, 1, 1, 7, 0)])
def test_moment_names_the_weekday_zellers_congruence_gives(day):
    text = moment(day)
    assert text == f"{zeller_weekday(day.year, day.month, day.day)} {day.day:02d} {day:%b} {day.hour:02d}:{day.minute:02d}"
    assert clock(day) == f"{day.hour:02d}:{day.minute:02d}"
    assert moment(None) == "not scheduled"


def test_durations_in_hours_and_minutes_by_hand():
    assert duration(4 * 3600 + 5 * 60) == "4 h 05 min"
    assert duration(35 * 60) == "35 min"
    assert duration(2 * 86400 + 3 * 3600) == "2 d 3 h"
    assert duration(-10.0) == "0 min"            # never a negative span
    assert duration(59 * 60 + 31) == "1 h 00 min"  # rounded to the minute: 59.52 min


def test_units_per_si_and_the_spool_convention():
    # SI brochure (BIPM, 9th ed., 2019), 5.4.7: a space separates the number and the % sign
    assert share(0.553) == "55.3 %" and share(1.0) == "100.0 %"
    # 1 L = 1 dm3 = 1e6 mm3 (SI brochure, table 8)
    assert litres(120_000.0) == "0.12 L" and litres(1e6) == "1.00 L"
    # 1 kg = 1000 g
    assert mass(176.0) == "176 g" and mass(1240.0) == "1.24 kg"
    # filament is sold in 1 kg spools (common practice, no source)
    assert spools(180.0) == "0.18 spool" and spools(2500.0) == "2.50 spools"


def test_english_plurals_and_tags():
    assert plural(1, "copy") == "1 copy" and plural(3, "copy") == "3 copies"
    assert plural(2, "plate") == "2 plates" and plural(0, "order") == "0 orders"
    assert plural(2, "ordered copy") == "2 ordered copies"
    assert [copy_tag(k) for k in range(3)] == ["1", "2", "3"]


# --- tags, states, materials, summary -------------------------------------------------------

def test_tags_follow_order_part_and_copy_whatever_the_plate_order():
    items = [copy("B", 1), copy("A", 2), copy("A", 2, part="arm"), copy("A", 1)]
    tags = tagged(plate("P01", items))
    assert [t for t, _ in tags] == ["1", "2", "3", "4"]
    assert [(c.order, c.part, c.copy) for _, c in tags] == [("A", "arm", 2), ("A", "bracket", 1),
                                                           ("A", "bracket", 2), ("B", "bracket", 1)]


def test_states_of_a_replanned_version():
    failed = plate("P03", [copy("A", 1)], hours=5.0, state="failed",
                   lost=(LostCopy("A", "bracket", 2), LostCopy("A", "bracket", 3), LostCopy("B", "bracket", 1)))
    failed = replace(failed, end=START + timedelta(hours=2, minutes=30))
    gone = plate("P04", [], start=START - timedelta(hours=1), state="failed")
    plan = Plan(job="unit-day", job_file="unit-day.yaml", start=START, plates=(failed,), unplaced=(), orders=(),
                version=2, now=START + timedelta(hours=3), records=(gone,), cancelled={"A": "stock"})
    assert title(plan) == ("Plan for unit-day, version 2",
                           "Replanned at Mon 07 Dec 10:00 (the first plan started Mon 07 Dec 07:00)")
    assert state_row(failed) == ("state", "failed at Mon 07 Dec 09:30, after 2 h 30 min of an estimated 5 h 00 min")
    assert lost_rows(failed) == [("A", "bracket", 2), ("B", "bracket", 1)]
    assert [p.id for p in shown_plates(plan)] == ["P04", "P03"]        # by start
    assert has_states(plan) and cancelled_on_plates(plan) == 1
    assert cancelled_note(plan, "A") == "cancelled: keep as stock" and cancelled_note(plan, "B") == ""
    first = Plan(job="d", job_file="d.yaml", start=START, plates=(plate("P01", [copy("A", 1)]),), unplaced=(),
                 orders=())
    assert not has_states(first) and title(first) == ("Plan for d", "Planning from Mon 07 Dec 07:00")
    printing = plate("P01", [], state="printing", state_at=START + timedelta(minutes=20))
    assert state_row(printing) == ("state", "printing since Mon 07 Dec 07:20")


def test_material_totals_add_up_by_hand():
    plan = small_plan()
    by_material = {t.material: t for t in totals_by_material(plan)}
    # 3 copies of 12.4 g (10 cm3 of PLA at 1.24 g/cm3, the profile's density)
    assert by_material["PLA"].mass_g == pytest.approx(3 * 12.4)
    assert by_material["PLA"].amount == "37 g = 0.04 spool"
    assert by_material["PLA"].parts_volume_mm3 == pytest.approx(30_000.0)
    assert (by_material["PETG"].plates, by_material["PETG"].copies) == (1, 1)
    assert sum(t.copies for t in totals_by_printer(plan)) == sum(len(p.items) for p in plan.plates)


def test_summary_counts_and_bound_rows():
    plan = small_plan()
    facts = [f.text for f in summary_facts(plan)]
    assert facts[0] == "5 ordered copies: 4 placed on 2 plates, 0 cancelled, 1 not placed."
    assert "Not placed, 1 copy: larger than every plate." in facts
    headers, rows = bound_rows(plan)
    assert headers == ["technology / material", "plates used", "lower bound", "above the bound"]
    # PETG: 2 used against a bound of 1 is 1 plate, 100 % more
    assert rows == [("filament/PETG", 2, 1, "1 more (100.0 %)"), ("filament/PLA", 1, 1, "none")]
    assert bound_rows(Plan(job="d", job_file="d.yaml", start=START, plates=(), unplaced=(), orders=()))[1] == []


# --- drawings -------------------------------------------------------------------------------

def test_plate_svg_is_well_formed_and_to_scale():
    outline = box(0, 0, 244, 198)
    piece = box(10, 20, 60, 60)
    svg = plate_svg(outline, outline.buffer(-4, join_style="mitre"), [box(218, 179, 244, 198)],
                    [Drawn(piece, "#3b6e8f", "1", "A / bracket / copy 1")], uid="t", margin_mm=4.0)
    root = svg_root(svg)
    x, y, w, h = view_box(root)
    # the plate lies inside the view box, centred across with equal padding left and right
    assert x < 0 and y < 0 and x + w > 244 and y + h > 198
    assert -x == pytest.approx(x + w - 244, abs=0.01)
    # one scale in both directions: the pixel size keeps the view box's aspect (height rounded to 1 px)
    wpx, hpx = float(root.get("width")), float(root.get("height"))
    assert hpx == pytest.approx(wpx * h / w, abs=0.5)
    # the copy's outline, y flipped about the plate's middle (SVG y points down), area by the shoelace formula
    titled = [p for p in root.iter(f"{SVG_NS}path") if p.find(f"{SVG_NS}title") is not None
              and p.find(f"{SVG_NS}title").text.startswith("A /")]
    pts = path_points(titled[0].get("d"))
    assert {(round(a, 2), round(b, 2)) for a, b in pts} == {(10, 178), (60, 178), (60, 138), (10, 138)}
    assert shoelace(pts) == pytest.approx(50 * 40)
    texts = [t.text for t in root.iter(f"{SVG_NS}text")]
    assert "1" in texts and "keep out" in texts


def test_svg_path_of_a_polygon_with_a_hole():
    ring = box(0, 0, 10, 10).difference(box(4, 4, 6, 6))
    d = svg_path(ring, 10.0)
    assert d.count("M") == 2 and d.count("Z") == 2     # outer ring and hole, each closed


def test_placed_shadow_turns_and_shifts_by_hand():
    footprint = box(0, 0, 50, 40)
    to_print = turn_and_shift(0, 0, 0)
    # a quarter turn anticlockwise takes (x, y) to (-y, x): the box spans x in [-40, 0], y in [0, 50]; then shift
    shadow = placed_shadow(footprint, to_print, turn_and_shift(90, 100, 50))
    assert shadow.bounds == pytest.approx((60, 50, 100, 100))
    assert shadow.area == pytest.approx(2000)


def test_top_view_copies_cover_the_utilization_the_plate_states():
    profile = load_profile(ROOT / "plates" / "fil-bench-244.yaml")
    items = [copy("A", 1, transform=turn_and_shift(0, 10, 10)), copy("A", 2, transform=turn_and_shift(90, 150, 20))]
    # two 50 x 40 mm footprints on the 244 x 198 mm plate: area share by the rectangle formula
    used = 2 * 50 * 40 / (244 * 198)
    p = plate("P01", items, utilization=used)
    views = plate_views(p, profile, ["A"], footprint_of=lambda c: (box(0, 0, 50, 40), np.eye(4)),
                        mesh_of=lambda path: None)
    assert [t for t, _ in views] == ["top view"]
    root = svg_root(views[0][1])
    copies = [e for e in root.iter(f"{SVG_NS}path") if e.find(f"{SVG_NS}title") is not None
              and " / copy " in e.find(f"{SVG_NS}title").text]
    drawn = sum(shoelace(path_points(e.get("d"))) for e in copies)
    assert drawn / (244 * 198) == pytest.approx(used, abs=1e-4)
    facts = dict(plate_facts(p))
    assert facts["area utilization"] == f"{100 * used:.1f} %" == "8.3 %"


def test_powder_build_has_three_well_formed_views():
    profile = load_profile(ROOT / "plates" / "powder-cell-331.yaml")
    cube = trimesh.creation.box(extents=(20, 30, 40))
    cube.apply_translation(-cube.bounds[0])
    p = plate("P05", [copy("C", 1, transform=turn_and_shift(0, 20, 20), material="PA12")], tech="powder",
              material="PA12", volume=profile.build_volume)
    views = plate_views(p, profile, ["C"], footprint_of=lambda c: None, mesh_of=lambda path: cube)
    assert [t.split(" (")[0] for t, _ in views] == ["top view", "front view", "side view"]
    for _, svg in views:
        svg_root(svg)
    top = svg_root(views[0][1])
    shadow = [e for e in top.iter(f"{SVG_NS}path") if e.find(f"{SVG_NS}title") is not None
              and " / copy " in e.find(f"{SVG_NS}title").text][0]
    assert shoelace(path_points(shadow.get("d"))) == pytest.approx(20 * 30)


def test_timeline_is_well_formed_and_linear_in_time():
    bars = [Bar("fil-1", START + timedelta(hours=h), START + timedelta(hours=h + 1),
                START + timedelta(hours=h + 1), f"P0{k}", "PLA", f"P0{k}") for k, h in enumerate((1, 3, 5), 1)]
    svg, unlabelled = timeline_svg(["fil-1"], bars, [(START, START + timedelta(hours=12))], start=START,
                                   end=START + timedelta(hours=12), now=START + timedelta(hours=2))
    root = svg_root(svg)
    x, y, w, h = view_box(root)
    assert (x, y) == (0, 0) and w == float(root.get("width")) and h == float(root.get("height"))
    rects = {r.find(f"{SVG_NS}title").text: r for r in root.iter(f"{SVG_NS}rect")
             if r.find(f"{SVG_NS}title") is not None}
    xs = [float(rects[f"P0{k}"].get("x")) for k in (1, 2, 3)]
    # starts 2 h apart are drawn equally far apart, and a 1 h bar is a twelfth of the 12 h shift
    assert xs[2] - xs[1] == pytest.approx(xs[1] - xs[0], abs=0.15)
    shift = next(r for t, r in rects.items() if t.startswith("shift"))
    assert float(rects["P01"].get("width")) * 12 == pytest.approx(float(shift.get("width")), abs=1.5)
    assert any(t.text == "now" for t in root.iter(f"{SVG_NS}text"))
    assert unlabelled == []


# --- pages ----------------------------------------------------------------------------------

def test_order_and_parts_rows_by_hand():
    plan = small_plan()
    rows, bad = order_rows(plan)
    assert rows[0] == ("A", 1, "Mon 07 Dec 15:00", "2 of 2", "P01", "Mon 07 Dec 12:05", "on time")
    # B is due 14:00 and done with P02 cleared at 15:05: 65 minutes late
    assert rows[1][-1] == "late by 1 h 05 min" and bad == [False, True]
    parts = {(r[0], r[2]): r for r in parts_rows(plan)}
    # 10,000 mm3 = 10.0 cm3 (1 cm3 = 1000 mm3)
    assert parts[("bracket", "PLA")] == ("bracket", "bracket.stl", "PLA", 3, "10.0", "12.4", "P01")


def test_report_page_and_markdown_are_well_formed(tmp_path):
    plan = small_plan()
    profile = load_profile(ROOT / "plates" / "fil-bench-244.yaml")
    views = {p.id: plate_views(p, profile, ["A", "B"], footprint_of=lambda c: (box(0, 0, 50, 40), np.eye(4)),
                               mesh_of=lambda path: None) for p in plan.plates}
    files = write_reports(plan, tmp_path, views=views, printers=["fil-1"], calendar=Calendar())
    html = files["html"].read_text(encoding="utf-8")
    well_formed_html(html)
    assert all(f"id='plate-{p.id}'" in html for p in plan.plates)
    for svg in (tmp_path / "views").glob("*.svg"):
        svg_root(svg.read_text(encoding="utf-8"))
    md = files["md"].read_text(encoding="utf-8")
    # GFM tables: the delimiter row and every body row have as many cells as the header row
    tables = md_tables(md)
    assert len(tables) >= 6
    for table in tables:
        assert re.fullmatch(r"\|(---\|)+", table[1]), table[1]
        assert {md_cells(row) for row in table} == {md_cells(table[0])}, table
    page = tmp_path / "alone.html"
    write_html(plan, page, views={}, timeline=("<svg xmlns='http://www.w3.org/2000/svg'></svg>", [], []),
               safety=("Careful.",))
    well_formed_html(page.read_text(encoding="utf-8"))


def test_parts_section_rows_and_refusals():
    plan = small_plan(parts=(
        {"file": "parts/bracket.stl", "parts": ["bracket"], "status": "planned", "format": "STL (binary)",
         "unit": "mm", "unit_source": "assumed", "triangles": 12, "shells": 1, "defects": [],
         "size_laid_flat_mm": [50.0, 40.0, 12.0], "volume_mm3": 10000.0, "volume_method": "divergence",
         "footprint_mm2": 2000.0, "orientation": "laid flat", "fits": ["fil-bench-244"]},
        {"file": "parts/broken.stl", "parts": ["broken"], "status": "refused",
         "defects": [{"kind": "refused", "severity": "unusable", "count": 1, "detail": "no triangles",
                      "action": "refused: its copies are not placed"}]}))
    [(heading, html, md)] = parts_sections(plan)
    assert heading == "Parts"
    well_formed_html("<!doctype html>" + html)
    assert "<td>bracket.stl</td><td>planned</td><td>50 x 40 x 12</td><td>10000.0, divergence</td>" in html
    assert "<td>broken.stl</td><td>refused</td>" in html
    assert all(md_cells(line) == 5 for line in md.splitlines() if line.startswith("|"))
    assert parts_sections(small_plan()) == []


def test_operator_sheets_shifts_actions_and_iso_times(tmp_path):
    night = Calendar(shift_start=time(22, 0), shift_end=time(6, 0), days=(0, 1, 2, 3, 4))
    shifts = shifts_of(night, START, START + timedelta(days=6))
    # Monday 7 Dec to Sunday 13 Dec 2026: five night shifts of 8 h, each ending the next morning
    assert len(shifts) == 5 and all(b - a == timedelta(hours=8) for a, b in shifts)
    assert [zeller_weekday(a.year, a.month, a.day) for a, _ in shifts] == ["Mon", "Tue", "Wed", "Thu", "Fri"]
    plan = small_plan()
    actions = sheet_actions(plan)
    assert [(a.plate.id, a.kind) for a in actions] == [("P01", "start"), ("P01", "clear"), ("P02", "start"),
                                                       ("P02", "clear")]
    assert actions[2].change_from == "PLA"
    files = write_sheets(plan, tmp_path, Calendar())
    well_formed_html(files["sheets_html"].read_text(encoding="utf-8"))
    with open(files["sheets_csv"], newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 2 + sum(len(p.items) for p in plan.plates)       # one start row, one row per copy cleared
    for row in rows:
        assert ISO_MINUTES.match(row["time"]) and ISO_MINUTES.match(row["shift_start"]), row
        assert row["order_due"] == "" or ISO_MINUTES.match(row["order_due"])
    assert {r["material_change_minutes"] for r in rows if r["action"] == "start" and r["plate"] == "P02"} == {"10.0"}


def test_picklist_rows_and_iso_times(tmp_path):
    plan = small_plan()
    with open(write_picklist(plan, tmp_path / "picklist.csv"), newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [(r["plate"], r["order"], r["copy"]) for r in rows] == [("P01", "A", "1"), ("P01", "A", "2"),
                                                                  ("P01", "B", "1"), ("P02", "B", "2")]
    for r in rows:
        assert ISO_MINUTES.match(r["plate_end"]) and ISO_MINUTES.match(r["order_due"])
        assert datetime.fromisoformat(r["plate_end"]) in {p.end for p in plan.plates}
