"""Operator sheets of the demo: every plate started and cleared once, inside a shift, with its pick list."""

import csv
from datetime import datetime


def _in_shift(t: datetime, calendar) -> bool:
    # the job's calendar, read independently of packer.output.report.sheets
    return t.weekday() in calendar.days and calendar.shift_start <= t.time() <= calendar.shift_end


def test_sheets_cover_every_plate_and_copy_inside_shifts(demo):
    job, plan, out = demo
    rows = list(csv.DictReader((out / "operator-sheets.csv").open(encoding="utf-8")))
    starts = [r for r in rows if r["action"] == "start"]
    clears = [r for r in rows if r["action"] == "clear"]
    assert sorted(r["plate"] for r in starts) == sorted(p["id"] for p in plan["plates"])
    assert len(clears) == sum(len(p["items"]) for p in plan["plates"])
    want = {(p["id"], i["order"], i["part"], str(i["copy"])) for p in plan["plates"] for i in p["items"]}
    assert {(r["plate"], r["order"], r["part"], r["copy"]) for r in clears} == want
    for r in rows:
        assert _in_shift(datetime.fromisoformat(r["time"]), job.calendar), r
    by_plate = {p["id"]: p for p in plan["plates"]}
    for r in starts:
        assert r["material"] == by_plate[r["plate"]]["material"] and r["plate_file"] == by_plate[r["plate"]]["file"]
    # time order per printer
    for printer in {r["printer"] for r in rows}:
        times = [r["time"] for r in rows if r["printer"] == printer]
        assert times == sorted(times)


def test_one_page_per_printer_and_shift(demo):
    _, plan, out = demo
    rows = list(csv.DictReader((out / "operator-sheets.csv").open(encoding="utf-8")))
    pages = {(r["printer"], r["shift_start"]) for r in rows}
    html = (out / "operator-sheets.html").read_text()
    assert html.count("<section class='page'>") == len(pages)
    for p in plan["plates"]:
        assert f"start {p['id']}" in html and f"clear {p['id']}" in html


def test_sheets_carry_material_changes_and_post_processing(demo):
    _, plan, out = demo
    rows = list(csv.DictReader((out / "operator-sheets.csv").open(encoding="utf-8")))
    by_plate = {p["id"]: p for p in plan["plates"]}
    for r in rows:
        p = by_plate[r["plate"]]
        if r["action"] == "clear":
            steps = [s["step"] for s in p.get("post_processing", [])]
            assert all(step in r["post_processing"] for step in steps)
            assert bool(steps) == bool(r["post_processing"])
    # every change of material on a printer is flagged on the start of the plate after it
    for printer in {p["printer"] for p in plan["plates"]}:
        seq = sorted((p for p in plan["plates"] if p["printer"] == printer), key=lambda p: p["start"])
        starts = {r["plate"]: r for r in rows if r["action"] == "start"}
        for a, b in zip(seq, seq[1:]):
            flagged = starts[b["id"]]["material_change_from"]
            assert flagged == (a["material"] if a["material"] != b["material"] else "")
