"""The report as a planner reads it: plain words, formatted figures, every copy tagged.

Checks are certificates on the written page (what text is there, which tags
are drawn), not pixel positions; the browser test renders the same page.
"""

import re
from datetime import datetime, timedelta
from html import unescape

import numpy as np

from packer.intake.job import Calendar
from packer.output.plan import OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy
from packer.output.report import write_reports
from packer.output.report.fmt import duration, spools
from packer.output.report.materials import totals_by_material

ISO = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d")
START = datetime(2026, 12, 7, 7, 0)


def _text(html: str) -> str:
    html = re.sub(r"<style>.*?</style>", "", html, flags=re.S)
    return unescape(re.sub(r"<[^>]+>", " ", html))


def _section(html: str, title: str) -> str:
    return html.split(f"<h2>{title}</h2>", 1)[1].split("<h2>", 1)[0]


def test_demo_summary_has_plain_words_only(demo):
    _, plan, out = demo
    html = (out / "report.html").read_text()
    summary = _text(_section(html, "Summary"))
    assert not re.search(r"[{}\[\]]|': |\": ", summary)      # no dict or list printed as such
    assert "lateness bound h" not in _text(html)
    assert not ISO.search(_text(html)), ISO.search(_text(html))
    placed = sum(len(p["items"]) for p in plan["plates"])
    assert f"{placed} placed on {len(plan['plates'])} plates" in summary


def test_every_copy_has_a_tag_in_its_drawing_and_table(demo):
    _, plan, out = demo
    html = (out / "report.html").read_text()
    for p in plan["plates"]:
        section = html.split(f"id='plate-{p['id']}'", 1)[1].split("</section>", 1)[0]
        first_drawing = section.split("</svg>", 1)[0]
        tags = re.findall(r'paint-order="stroke">([^<]+)</text>', first_drawing)
        n = len(p["items"])
        assert sorted(tags, key=int) == [str(k) for k in range(1, n + 1)]
        table = section.split("<th>tag</th>", 1)[1]
        assert len(re.findall(r"<tr><td>\d+</td>", table)) == n
        assert "class=\"plate-drawing\"" in section


def test_powder_build_has_three_views(demo):
    _, plan, out = demo
    html = (out / "report.html").read_text()
    for p in plan["plates"]:
        section = html.split(f"id='plate-{p['id']}'", 1)[1].split("</section>", 1)[0]
        assert section.count("<svg") == (3 if p["technology"] == "powder" else 1)


def _copy(order, n, mass=10.0, volume=8000.0):
    return PlacedCopy(order, "part", n, "part.stl", np.eye(4), "m", volume, mass)


def _plate(pid, tech, material, items, start, hours, printer="p1", utilization=0.5):
    return PlatePlan(id=pid, printer=printer, profile="x", technology=tech, material=material,
                     volume=(200, 150, 180), spacing=5, margin=4, items=tuple(items), start=start,
                     end=start + timedelta(hours=hours), free=start + timedelta(hours=hours, minutes=10),
                     height_mm=10, utilization=utilization, print_s=hours * 3600,
                     mass_g=sum(c.mass_g for c in items), file=f"plates/{pid}.3mf")


def _plan():
    a = _plate("P01", "filament", "PLA", [_copy("A", k, mass=750.0) for k in (1, 2)], START, 5)
    b = _plate("P02", "resin", "grey", [_copy("B", 1, volume=120000.0)], START, 0.03, printer="p2",
               utilization=0.05)
    orders = (OrderStatus("A", START + timedelta(hours=3), 2, 3, 2, a.end),
              OrderStatus("B", START + timedelta(hours=8), 1, 1, 1, b.end))
    return Plan(job="t", job_file="t.yaml", start=START, plates=(a, b), orders=orders,
                unplaced=(UnplacedCopy("A", "part", 3, "larger than every plate"),),
                problems=("t.yaml:9: orders[0].lines[1].quantity: must be at least 1, got 0",),
                bounds={"plates": {"filament/PLA": {"bound": 1, "used": 1, "gap": 0.0}},
                        "finish_bound": "2026-12-07T11:00:00", "surely_late_orders": 1},
                stats={"budget_cuts": ["merging cut short"], "final_merged_plates": 0})


def test_summary_notes_and_totals_in_words(tmp_path):
    plan = _plan()
    files = write_reports(plan, tmp_path, views={}, printers=["p1", "p2"], calendar=Calendar(),
                          states={"P01": "printing", "P02": "planned"}, now=START + timedelta(hours=1))
    html = files["html"].read_text()
    text = _text(html)
    assert "4 ordered copies: 3 placed on 2 plates, 0 cancelled, 1 not placed." in text
    assert "Not placed, 1 copy: larger than every plate." in text
    assert f"A by {duration(2 * 3600)}" in text and "class='bad'" in html       # late order highlighted
    assert "1 order cannot be on time in any plan" in text
    assert "merging cut short" in _text(_section(html, "Summary"))              # planner note in the report
    assert "P02 on p2 is nearly empty" in text
    assert "1 problem in the input" in text and "must be at least 1, got 0" in text
    assert "state: printing" in text and "state: planned" in text and ">now</text>" in html
    # the 2-minute resin plate is too short for its name on the timeline: it is listed instead
    assert "Too short to carry their name: P02 on p2" in text
    assert not ISO.search(text)


def test_material_totals_in_shop_units():
    totals = {t.material: t for t in totals_by_material(_plan())}
    # filament: 1 kg spools (common practice, no source); resin: 1 L = 1e6 mm3
    assert totals["PLA"].amount == "1.50 kg = 1.50 spools" and spools(1500) == "1.50 spools"
    assert totals["grey"].amount.endswith("0.12 L of resin")
    assert totals["PLA"].copies == 2 and totals["PLA"].plates == 1
