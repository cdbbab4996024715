"""Replan events: reading them (options, events file) and checking them against a plan."""

from dataclasses import replace
from datetime import datetime, timedelta
from functools import lru_cache

import pytest

from packer.errors import InputError
from packer.bench.standin import ShelfLayouts
from packer.bench.daygen import make_day
from packer.fleet.planner import plan_fleet
from packer.intake.identity import copy_key
from packer.replan.planner import ReplanSettings, replan
from packer.replan.events import (Cancelled, Down, Failed, Finished, Printing, event_from_option, load_events, parse_copy)
from packer.replan.state import apply_events, state_of_fleet

FAST = ReplanSettings(seconds=0.5, schedule_s=1.0)


# -- reading events ------------------------------------------------------------------------------

def test_options_read_plates_printers_and_times():
    assert event_from_option("failed", "P03") == Failed("P03", None, origin="--failed P03")
    ev = event_from_option("failed", "P03@2026-12-07T09:40")
    assert ev.at == datetime(2026, 12, 7, 9, 40)
    ev = event_from_option("down", "bench-a@2026-12-07T09:00..2026-12-07T14:00")
    assert (ev.printer, ev.start, ev.until) == ("bench-a", datetime(2026, 12, 7, 9), datetime(2026, 12, 7, 14))
    assert event_from_option("down", "bench-a").start is None
    assert event_from_option("printing", "P07@2026-12-07 10:40").since == datetime(2026, 12, 7, 10, 40)
    assert parse_copy("BL-1041/cable-clip/3", what="x") == ("BL-1041", "cable-clip", 3)


@pytest.mark.parametrize("kind, value, match", [
    ("failed", "P03@yesterday", "not a date and time"),
    ("down", "bench-a@2026-12-07T09:00..", "nothing after"),
    ("finished", "@2026-12-07T09:00", "names nothing"),
])
def test_bad_options_are_named(kind, value, match):
    with pytest.raises(InputError, match=match):
        event_from_option(kind, value)


@pytest.mark.parametrize("text", ["BL-1041/cable-clip", "BL-1041/cable-clip/0", "//3", "a/b/c"])
def test_bad_copy_names(text):
    with pytest.raises(InputError, match="ORDER/PART/COPY"):
        parse_copy(text, what="--survived")


def test_events_file_reads_every_kind(tmp_path):
    (tmp_path / "ev.yaml").write_text(
        "now: 2026-12-07T10:00\n"
        "events:\n"
        "  - {failed: P03, at: 2026-12-07T09:40, survived: [BL-1045/spring-clip/3]}\n"
        "  - {finished: P01}\n"
        "  - {printing: P07, since: 2026-12-07T09:55}\n"
        "  - {down: bench-a, from: 2026-12-07T09:00, until: 2026-12-07T14:00}\n"
        "  - {added: rush.yaml}\n"
        "  - {cancelled: BL-1046}\n")
    now, events = load_events(tmp_path / "ev.yaml")
    assert now == datetime(2026, 12, 7, 10)
    assert [type(e).__name__ for e in events] == ["Failed", "Finished", "Printing", "Down", "Added", "Cancelled"]
    assert events[0].survived == (("BL-1045", "spring-clip", 3),)
    assert events[4].file == (tmp_path / "rush.yaml").resolve()
    assert events[1].origin.endswith("ev.yaml:4: events[1].finished")


def test_events_file_reports_every_problem_with_line_and_key(tmp_path):
    (tmp_path / "ev.yaml").write_text(
        "events:\n"
        "  - {failed: P03, when: 2026-12-07T09:40}\n"           # line 2: unknown key
        "  - {failed: P03, finished: P04}\n"                   # line 3: two kinds
        "  - {down: bench-a, from: 2026-12-07T09:00, until: 2026-12-07T08:00}\n"
        "  - {printing: P07, since: soon}\n"
        "  - {failed: P02, survived: [nonsense]}\n")
    with pytest.raises(InputError) as err:
        load_events(tmp_path / "ev.yaml")
    text = str(err.value)
    assert "ev.yaml:2: events[0].when: unknown key" in text
    assert "ev.yaml:3: events[1]: must name exactly one of" in text
    assert "ev.yaml:4: events[2].until: must be later than 'from'" in text
    assert "ev.yaml:5: events[3].since: must be a date and time" in text
    assert "events[4].survived[0]" in text and "ORDER/PART/COPY" in text


def test_events_file_needs_a_list(tmp_path):
    (tmp_path / "ev.yaml").write_text("now: 2026-12-07T10:00\n")
    with pytest.raises(InputError, match="missing required key 'events'"):
        load_events(tmp_path / "ev.yaml")


# -- events against a plan ------------------------------------------------------------------------

@lru_cache(maxsize=None)
def _day():
    day = make_day(copies=60, printers=5, seed=3, small=True)
    res = plan_fleet(day.copies, day.printers, stats=day.stats, calendar=day.calendar, start=day.start,
                     layouts=ShelfLayouts(day.parts), seconds=0.5, seed=0)
    return day, state_of_fleet(res.plates, res.unplaced, start=day.start)


def _apply(events, *, now=None, state=None):
    day, first = _day()
    return apply_events(state or first, events, now=now or day.start + timedelta(hours=1), printers=day.printers,
                        calendar=day.calendar, stats=day.stats)


def _replan(sit):
    day, _ = _day()
    return replan(sit, printers=day.printers, stats=day.stats, calendar=day.calendar, layouts=ShelfLayouts(day.parts), settings=FAST).state


def _first_plate():
    _, state = _day()
    return min(state.plates, key=lambda p: (p.start, p.id))


@pytest.mark.parametrize("events, match", [
    ([Failed("P99", origin="--failed P99")], r"--failed P99: no plate P99 in the plan"),
    ([Finished("P01", origin="a"), Failed("P01", origin="b")], r"b: plate P01 is also reported finished \(a\)"),
    ([Down("no-such", origin="--down no-such")], r"no printer no-such in the fleet"),
    ([Cancelled("W-999", origin="--cancelled W-999")], r"no order W-999 in the plan"),
    ([Failed("P01", at=datetime(2026, 3, 1, 12), origin="x")], r"before the plan's start"),
    ([Failed("P01", at=datetime(2026, 3, 2, 23), origin="x")], r"is after now"),
    ([Failed("P01", survived=(("W-1", "nope", 1),), origin="x")], r"copy W-1/nope/1 is not on plate P01"),
])
def test_events_that_do_not_fit_the_plan(events, match):
    with pytest.raises(InputError, match=match):
        _apply(events)


def test_now_before_the_plan_start():
    day, _ = _day()
    with pytest.raises(InputError, match=r"now .* is before the plan's start"):
        _apply([], now=day.start - timedelta(minutes=5))


def test_a_finished_plate_cannot_fail():
    _, state = _day()
    p = _first_plate()
    done = replace(state, plates=tuple(replace(q, state="finished") if q.id == p.id else q for q in state.plates))
    with pytest.raises(InputError, match=f"plate {p.id} is already finished; a finished plate cannot be reported failed"):
        _apply([Failed(p.id, origin="x")], state=done)


def test_a_printer_cannot_go_down_under_a_reported_plate():
    p = _first_plate()
    with pytest.raises(InputError, match=f"is down from .* but plate {p.id} is printing"):
        _apply([Printing(p.id, origin="p"), Down(p.printer, p.start + timedelta(minutes=10), origin="d")],
               now=p.start + timedelta(minutes=20))


def test_unreported_plates_run_as_planned():
    day, state = _day()
    now = day.start + timedelta(hours=2)
    sit = _apply([], now=now)
    states = {p.id: p.state for p in sit.frozen}
    for p in state.plates:
        want = "finished" if p.end <= now else ("printing" if p.start <= now else "planned")
        assert states.get(p.id, "planned") == want, p.id


def test_failed_copies_come_back_boosted_with_their_due_time():
    p = _first_plate()
    survivor = copy_key(p.copies[0])
    sit = _apply([Failed(p.id, survived=(survivor,), origin="x")], now=p.start + timedelta(minutes=30))
    back = {copy_key(c): c for c in sit.pool}
    assert set(back) == {copy_key(c) for c in p.copies[1:]}
    assert all(back[copy_key(c)].boost == 1.0 and back[copy_key(c)].due == c.due for c in p.copies[1:])
    failed = next(f for f in sit.frozen if f.id == p.id)
    assert failed.state == "failed" and [copy_key(c) for c in failed.copies] == [survivor]
    new = _replan(sit)
    where = {copy_key(c): q for q in new.plates for c in q.copies}
    assert all(where[k].state == "planned" for k in back if k in where)
    assert where[survivor].id == p.id


def test_a_down_printer_takes_no_work_in_its_window():
    day, state = _day()
    now = day.start + timedelta(hours=1)
    busy = max({p.printer for p in state.plates}, key=lambda n: sum(p.printer == n for p in state.plates))
    start, until = now + timedelta(hours=1), now + timedelta(hours=8)
    new = _replan(_apply([Down(busy, start, until, origin="d")], now=now))
    for p in new.plates:
        if p.printer == busy and p.state == "planned":
            assert p.free <= start or p.start >= until, (p.id, p.start, p.free)


def test_cancelled_order_leaves_planned_plates_and_stays_on_printed_ones():
    day, state = _day()
    late = max(state.plates, key=lambda p: p.start)
    order = late.copies[0].order
    new = _replan(_apply([Cancelled(order, origin="c")], now=day.start))
    assert order in new.cancelled
    for p in new.plates:
        if p.state == "planned":
            assert all(c.order != order for c in p.copies)
    assert all(c.order != order for c, _ in new.unplaced)


def test_no_event_no_change_in_contents():
    day, state = _day()
    new = _replan(_apply([], now=day.start))
    before = {p.id: {copy_key(c) for c in p.copies} for p in state.plates}
    after = {p.id: {copy_key(c) for c in p.copies} for p in new.plates}
    assert before == after
    assert new.next_number == state.next_number


def test_new_plate_ids_are_never_reused():
    p = _first_plate()
    sit = _apply([Failed(p.id, origin="x")], now=p.start + timedelta(minutes=30))
    new = _replan(sit)
    _, state = _day()
    fresh = [q.id for q in new.plates if q.id not in {s.id for s in state.plates}]
    assert fresh and all(int(i[1:]) >= state.next_number for i in fresh)
    assert new.next_number == state.next_number + len(fresh)


def test_replan_planner_touches_no_file_or_mesh():
    """events, state, planner and changes work on plain data: no meshes, exporter, report or pipeline."""
    import ast
    from pathlib import Path
    folder = Path(__file__).resolve().parent.parent / "packer" / "replan"
    bad = ("trimesh", "packer.intake.parts", "packer.output.export", "packer.output.report", "packer.pipeline", "packer.output.write",
           "packer.replan.versions", "packer.replan.write")
    for name in ("events.py", "state.py", "planner.py", "changes.py"):
        tree = ast.parse((folder / name).read_text(encoding="utf-8"))
        mods = {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
        mods |= {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom) and n.module}
        assert not [m for m in mods for b in bad if m == b or m.startswith(b + ".")], (name, mods)


def test_change_report_counts_what_moved():
    from packer.replan.changes import changes_markdown, compare
    p = _first_plate()
    _, state = _day()
    sit = _apply([Failed(p.id, origin="--failed")], now=p.start + timedelta(minutes=30))
    new = _replan(sit)
    ch = compare(state, new)
    lost = {copy_key(c) for c in p.copies}
    assert {(o, pt, n) for o, pt, n, _, _ in ch.moved_copies} == lost
    assert all(src == f"{p.id} (failed)" for *_, src, _ in ch.moved_copies)
    assert set(ch.new_plates) == {dst for *_, dst in ch.moved_copies} - {"unplaced"}
    assert p.id not in ch.removed_plates                   # a failed plate stays, as a record
    done = {o: (t0, t1) for o, _, t0, t1 in ch.orders}
    assert all(done[c.order][1] is None or done[c.order][1] > p.start for c in p.copies)
    text = "\n".join(changes_markdown(ch, old_version=1, new_version=2, now=sit.now, events=["x"], notes=sit.notes,
                                      rewritten=0, state=new))
    assert f"| {p.id} (failed) |" in text and "untouched" not in text and "contents did not change: 0" in text


def test_a_plate_printing_when_its_printer_went_down_is_taken_as_failed():
    p = _first_plate()
    cut = p.start + (p.end - p.start) / 2
    sit = _apply([Down(p.printer, cut, origin="d")], now=cut + timedelta(minutes=5))
    failed = next(f for f in sit.frozen if f.id == p.id)
    assert failed.state == "failed" and failed.assumed and failed.end == cut
    assert {copy_key(c) for c in sit.pool} >= {copy_key(c) for c in p.copies}
    assert any(n.startswith(f"{p.id} failed") and "went down" in n for n in sit.notes)
    new = _replan(sit)
    assert all(q.printer != p.printer for q in new.plates if q.state == "planned")   # down for good


def test_copies_only_down_printers_could_take_are_unplaced_with_the_reason():
    day, _ = _day()
    p = _first_plate()
    cut = p.start + (p.end - p.start) / 2
    tech = next(q for q in day.printers if q.name == p.printer).profile.technology
    same = [q.name for q in day.printers if q.profile.technology == tech]
    new = _replan(_apply([Down(n, cut, origin="d") for n in same], now=cut + timedelta(minutes=5)))
    assert {copy_key(c) for c, _ in new.unplaced} >= {copy_key(c) for c in p.copies}
    for c, why in new.unplaced:          # the down printers that run its material are named
        assert any(f"{n} is down from" in why for n in same), why


def test_cancelled_copies_keep_or_scrap_by_event_or_job(tmp_path):
    assert event_from_option("cancelled", "BL-1046=scrap") == Cancelled("BL-1046", origin="--cancelled BL-1046=scrap",
                                                                        leftover="scrap")
    assert event_from_option("cancelled", "BL-1046").leftover is None          # the job's rule decides
    with pytest.raises(InputError, match="stock or scrap"):
        event_from_option("cancelled", "BL-1046=melt")
    (tmp_path / "ev.yaml").write_text("events:\n  - {cancelled: BL-1046, copies: stock}\n"
                                      "  - {cancelled: BL-1047, copies: bin}\n")
    with pytest.raises(InputError, match=r"ev.yaml:3: events\[1\].copies: must be one of: stock, scrap"):
        load_events(tmp_path / "ev.yaml")
    from tests.test_job import GOOD, _job
    from packer.intake.job import load_job
    assert load_job(_job(tmp_path, GOOD)).rules.cancelled_copies == "stock"          # the default
    assert load_job(_job(tmp_path, GOOD + "rules: {cancelled_copies: scrap}\n")).rules.cancelled_copies == "scrap"
    bad = load_job(_job(tmp_path, GOOD + "rules: {cancelled_copies: sell}\n"))
    assert any("rules.cancelled_copies: must be one of: stock, scrap" in str(p) for p in bad.problems)
