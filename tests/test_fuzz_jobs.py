"""Property tests: generated job files never make packer crash, lose a copy or write outside.

Two generators: job documents built as data (random structure, values and strings
in every field, mostly near a valid job so that planning is reached) and the
YAML text of such a document with hostile fragments spliced in (anchors, aliases,
tags, brackets, NUL, a byte-order mark, document markers). For every case packer
either plans, with every countable ordered copy on a plate or in ``unplaced``
exactly once, or exits 1 or 4 with a message naming the job file; never a
traceback, never a file outside the sandbox's output folder.

The normal run is 240 cases with a fixed seed; ``PACKER_FUZZ_EXAMPLES=5000``
runs a longer, random one (see DEVELOPERS.md).
"""

import contextlib
import io
import json
import os
import shutil
import tempfile
from datetime import datetime
from pathlib import Path

import yaml
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from packer.cli import main

ROOT = Path(__file__).resolve().parent.parent
SLAB = ROOT / "tests" / "data" / "bad" / "slab.stl"
LONG = int(os.environ.get("PACKER_FUZZ_EXAMPLES", "0"))
PER_LINE = 20                          # PACKER_LIMIT_COPIES_PER_LINE during the fuzz run: small plans

SETTINGS = dict(max_examples=LONG or 120, deadline=None, database=None, derandomize=not LONG,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

HOSTILE = ["../../escape", "/tmp/packer-fuzz-abs", "a\x00b", "\x1b[31mred", "2026-02-30", "2026-12-07T25:00",
           "PLA", "slab.stl", "../slab.stl", "slab", "", " ", "X" * 300, "!!python/object", "~", "null",
           "fil-bench-244", "../plates/fil-bench-244", "line\nbreak", "%2F", "a/b/c", "\u202e", "\ud800x", "\x1b[2J", "é"]
text = st.one_of(st.sampled_from(HOSTILE), st.text(max_size=12),
                 st.text(st.characters(exclude_categories=()), max_size=6))     # lone surrogates too
scalar = st.one_of(st.none(), st.booleans(), st.integers(min_value=-10 ** 30, max_value=10 ** 30),
                   st.integers(min_value=-3, max_value=PER_LINE + 3), st.floats(), text,
                   st.datetimes(min_value=datetime(1, 1, 1), max_value=datetime(9999, 1, 1)))
value = st.recursive(scalar, lambda inner: st.lists(inner, max_size=3) | st.dictionaries(text, inner, max_size=3),
                     max_leaves=6)


def often(good, bad):
    """``good`` five times in six, else ``bad`` (so that most cases reach planning)."""
    return st.integers(min_value=0, max_value=5).flatmap(lambda k: bad if k == 5 else good)   # small k is drawn most


def near(valid):
    """Mostly the valid value, sometimes anything."""
    return often(st.just(valid), value)


def keyed(fixed: dict, optional: dict):
    """A mapping with the given keys (values drawn), some optional keys, and now and then an unknown one."""
    names = st.one_of(st.sampled_from(["colour", "qty", "Quantity", "1", "<<"]), text)
    unknown = often(st.just({}), st.dictionaries(names, value, min_size=1, max_size=1))
    return st.tuples(st.fixed_dictionaries(fixed, optional=optional), unknown).map(lambda t: {**t[0], **t[1]})


line = keyed({"mesh": near("slab.stl"), "quantity": often(st.integers(min_value=1, max_value=3), value),
              "material": near("PLA")},
             {"part": text, "rotations": value, "orientation": near("as-modelled")})
order = keyed({"id": often(st.sampled_from(["O-1", "O-2", "O-3", "O-1", "1041"]), text),
               "due": near("2026-12-07T17:00"), "lines": often(st.lists(line, min_size=1, max_size=3), value)},
              {"priority": near(2), "notes": value})
printer = keyed({"name": near("bench-a"), "profile": near("fil-bench-244")},
                {"materials": near(["PLA"]), "available_from": near("2026-12-07T08:00")})
job = keyed({"name": st.one_of(text, st.just("fuzz")), "fleet": often(st.lists(printer, min_size=1, max_size=2), value),
             "orders": often(st.lists(order, min_size=1, max_size=3), value)},
            {"start": near("2026-12-07T07:00"), "rules": st.fixed_dictionaries({}, optional={
                "spacing": near(3.0), "margin": near(2.0)}), "calendar": value, "mesh_roots": value})

SPLICES = ["&a ", "*a", "*zz ", "!!python/object:os.system ", "!tag ", "!!binary ", "[", "{", "}", "]", "\t",
           ": ", "- ", "---\n", "...\n", "%YAML 1.1\n", "? ", "|\n", "\x00", "\ufeff", "<<: *a\n", "'", '"', "#",
           "\n  - &a [*a]\n", "\\", "\u2028"]


def _countable(q) -> int:
    """Copies a line's quantity stands for: a whole number 1..limit (a bool is not a number)."""
    if isinstance(q, bool) or not isinstance(q, (int, float)):
        return 0
    try:
        ok = q == int(q) and 1 <= q <= PER_LINE
    except (OverflowError, ValueError):
        return 0
    return int(q) if ok else 0


def expected_copies(doc) -> int | None:
    """Ordered copies packer must account for, read off the document independently of packer."""
    if not isinstance(doc, dict) or not isinstance(doc.get("orders"), list):
        return None
    total = 0
    for o in doc["orders"]:
        lines = o.get("lines") if isinstance(o, dict) else None
        for ln in lines if isinstance(lines, list) else []:
            if isinstance(ln, dict):
                total += _countable(ln.get("quantity"))
    return total


def _run(text_of_job: str | bytes, *, use_out: bool):
    """Plan the job in a sandbox; return (exit code, output, written files, sandbox listing, expected)."""
    base = Path(tempfile.mkdtemp(prefix="packer-fuzz-"))
    here = os.getcwd()
    try:
        sandbox = base / "a" / "b" / "c"
        (sandbox / "jobs").mkdir(parents=True)
        (sandbox / "run").mkdir()
        shutil.copy(SLAB, sandbox / "jobs" / "slab.stl")
        path = sandbox / "jobs" / "job.yaml"
        path.write_bytes(text_of_job.encode("utf-8", "surrogatepass") if isinstance(text_of_job, str) else text_of_job)
        before = {p for p in base.rglob("*")}
        os.chdir(sandbox / "run")
        out = io.StringIO()
        argv = ["plan", str(path), "--seconds", "0.2", "--quiet", "--plates", str(ROOT / "plates")]
        if use_out:
            argv += ["-o", str(sandbox / "run" / "plan")]
        os.environ["PACKER_LIMIT_COPIES_PER_LINE"] = str(PER_LINE)
        try:
            with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
                code = main(argv)
        finally:
            del os.environ["PACKER_LIMIT_COPIES_PER_LINE"]
        os.chdir(here)
        new = sorted(p.relative_to(sandbox / "run").as_posix() for p in set(base.rglob("*")) - before)
        outside = [p for p in set(base.rglob("*")) - before if (sandbox / "run") not in p.parents]
        plans = sorted((sandbox / "run").rglob("plan.json"))
        plan = json.loads(plans[0].read_text(encoding="utf-8")) if plans else None
        return code, out.getvalue(), new, outside, plan, str(path)
    finally:
        os.chdir(here)
        shutil.rmtree(base, ignore_errors=True)


def _check(code, output, new, outside, plan, path, expected):
    event(f"exit {code}")                                  # --hypothesis-show-statistics shows the mix
    assert "Traceback" not in output and "internal error" not in output, output
    assert outside == [], outside                         # nothing written outside the run folder
    assert code in (0, 1, 3, 4), (code, output)
    if code in (1, 4):
        assert path in output, output                     # the message names the job file
        assert plan is None and new == [], new            # refused: nothing written
        return
    assert plan is not None, output
    placed = [(i["order"], i["part"], i["copy"]) for p in plan["plates"] for i in p["items"]]
    unplaced = [(u["order"], u["part"], u["copy"]) for u in plan["unplaced"]]
    assert len(placed) + len(unplaced) == len(set(placed + unplaced))      # each copy once
    assert all(u["reason"] for u in plan["unplaced"])
    if expected is not None:
        assert len(placed) + len(unplaced) == expected, (expected, output)
    assert (code == 3) == bool(plan["problems"] or unplaced), output
    assert all(n == "plan" or n.startswith(("plan/", "out")) for n in new), new


@settings(**SETTINGS)
@given(doc=job, use_out=st.booleans())
def test_generated_job_documents(doc, use_out):
    text_of_job = yaml.safe_dump(doc, allow_unicode=True)
    _check(*_run(text_of_job, use_out=use_out), expected_copies(doc))


@settings(**SETTINGS)
@given(doc=job, data=st.data())
def test_generated_job_text_with_hostile_fragments(doc, data):
    text_of_job = yaml.safe_dump(doc, allow_unicode=True)
    for _ in range(data.draw(st.integers(min_value=1, max_value=3))):
        at = data.draw(st.integers(min_value=0, max_value=len(text_of_job)))
        text_of_job = text_of_job[:at] + data.draw(st.sampled_from(SPLICES)) + text_of_job[at:]
    _check(*_run(text_of_job, use_out=data.draw(st.booleans())), None)
