"""``packer replan OUTDIR ...``: read the events, replan, write the next version.

    packer replan out/brindle-lane-day --failed P01 --now 2026-12-07T10:00
    packer replan out/brindle-lane-day --events events.yaml

Reads the newest plan version in OUTDIR, applies the events, replans with
frozen plates and writes the next version (``OUTDIR/v2/``...) with
``changes.md``; ``OUTDIR/latest`` points at it.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace
from datetime import datetime
from pathlib import Path

from packer.clihelp import command_parser
from packer.errors import InputError
from packer.intake.identity import copy_key
from packer.replan.events import Added, Failed, describe, event_from_option, load_events, parse_copy, parse_moment

__all__ = ["replan_command"]

_REPEATABLE = ("failed", "finished", "printing", "down", "added", "cancelled")


def _parser() -> argparse.ArgumentParser:
    ap = command_parser("packer replan", "Replan after events: frozen plates stay, the rest is planned again; "
                        "the new version goes to OUTDIR/vN with changes.md.",
                        ["packer replan out/brindle-lane-day --failed P01 --now 2026-12-07T10:00",
                         "packer replan out/brindle-lane-day --down bench-b@2026-12-07T13:00..2026-12-07T15:00 "
                         "--now 2026-12-07T12:00",
                         "packer replan out/brindle-lane-day --cancelled BL-1046 --now 2026-12-07T09:00",
                         "packer replan out/brindle-lane-day --events events.yaml"])
    ap.add_argument("outdir", help="output folder of a plan (packer plan ... -o OUTDIR)")
    ap.add_argument("--failed", action="append", default=[], metavar="PLATE[@TIME]", help="a plate failed")
    ap.add_argument("--survived", nargs="+", default=[], metavar="ORDER/PART/COPY",
                    help="copies of a failed plate that came out fine")
    ap.add_argument("--finished", action="append", default=[], metavar="PLATE[@TIME]", help="a plate finished")
    ap.add_argument("--printing", action="append", default=[], metavar="PLATE[@SINCE]", help="a plate is printing")
    ap.add_argument("--down", action="append", default=[], metavar="PRINTER[@FROM[..UNTIL]]",
                    help="a printer takes no work from FROM (default now) until UNTIL (default: for good)")
    ap.add_argument("--added", action="append", default=[], metavar="ORDERS.yaml",
                    help="new orders (job-file schema: a list under 'orders:')")
    ap.add_argument("--cancelled", action="append", default=[], metavar="ORDER", help="an order was cancelled")
    ap.add_argument("--events", metavar="FILE", help="events file (YAML; see packer/replan/README.md)")
    ap.add_argument("--now", metavar="TIME", help="the moment of the replan (default: the events file's, else the clock)")
    ap.add_argument("--seconds", type=float, default=10.0, help="planning budget for the copies that need a plate")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same plan, events, seed and budget: same result)")
    ap.add_argument("--plates", help="folder of plate profiles (default: as for packer plan)")
    return ap


def _say(msg: str) -> None:
    print(f"  {msg}", file=sys.stderr, flush=True)


def replan_command(argv: list[str]) -> int:
    r = run_replan(_parser().parse_args(argv))
    ch, rp, out, state = r["changes"], r["replanned"], r["written"], r["replanned"].state
    planned = [p for p in state.plates if p.state == "planned"]
    print(f"{len(planned)} plates planned ({len(ch.new_plates)} new, {len(ch.moved_plates)} moved, "
          f"{len(ch.removed_plates)} removed), {len(ch.moved_copies)} copies moved, "
          f"{len(state.unplaced) + len(out['fixed'])} not placed; orders late: {', '.join(ch.late_now) or 'none'}")
    print(f"plate files: {out['copied']} copied unchanged, {out['exported']} written; untouched plates rewritten: "
          f"{out['rewritten']} ({r['wall_s']:.1f} s)")
    print(f"plan: {out['plan']}\nchanges: {out['changes']}\nreport: {out['html']}")
    for c, why in state.unplaced[:10]:
        print(f"not placed: {copy_key(c).label}: {why}", file=sys.stderr)
    return 3 if (state.unplaced or out["fixed"] or r["new_problems"]) else 0


def run_replan(args: argparse.Namespace) -> dict:
    """Read, apply the events, replan and write the next version; the figures of the run.

    Returns
    -------
    dict
        ``changes`` (:class:`~packer.replan.changes.Changes`), ``replanned``
        (:class:`~packer.replan.planner.Replanned`), ``written`` (what
        :func:`~packer.replan.write.write_version` returns), ``situation``,
        ``previous`` (the version read), ``new_problems``, ``wall_s``.
    """
    from packer.pipeline import PlateMaker, layout_service
    from packer.replan.changes import changes_markdown, compare
    from packer.replan.planner import ReplanSettings, replan
    from packer.replan.state import apply_events, fmt_time
    from packer.replan.versions import load_written
    from packer.replan.write import write_version

    t0 = time.perf_counter()
    events, file_now = [], None
    if args.events:
        file_now, events = load_events(args.events)
    for kind in _REPEATABLE:
        events += [event_from_option(kind, v) for v in getattr(args, kind)]
    now = parse_moment(args.now, what="--now") if args.now else file_now
    if now is None:
        now = datetime.now().replace(second=0, microsecond=0)
    survived = [parse_copy(s, what="--survived") for s in args.survived]

    added_files = [e.file for e in events if isinstance(e, Added)]
    prev = load_written(Path(args.outdir), plates_dir=args.plates, added_files=added_files)
    if not args.now and file_now is None and now < prev.state.start:
        raise InputError(f"the clock says {fmt_time(now)}, before the plan's start ({fmt_time(prev.state.start)}); "
                         "give the moment of the replan with --now")
    print(f"packer replan: {prev.job.name}, version {prev.version} -> {prev.version + 1}, now {fmt_time(now)}")
    events = _attach(events, survived, prev)
    job = prev.job
    groups = iter(prev.new_groups)
    for k, e in enumerate(events):
        if isinstance(e, Added):
            ids = set(next(groups))
            events[k] = replace(e, orders=tuple(o for o in prev.new_orders if o.id in ids),
                                copies=tuple(c for key, c in sorted(prev.refs.items()) if key[0] in ids))
    sit = apply_events(prev.state, events, now=now, printers=job.fleet, calendar=job.calendar, stats=prev.stats)
    _say(f"{len(sit.frozen)} plates frozen, {len(sit.planned)} not started, {len(sit.pool)} copies need a plate")
    layouts = layout_service(job, prev.parts, prev.kinds, seed=args.seed)
    rp = replan(sit, printers=job.fleet, stats=prev.stats, calendar=job.calendar, layouts=layouts,
                settings=ReplanSettings(seconds=args.seconds, seed=args.seed))
    glue = PlateMaker(job, prev.parts, prev.kinds)
    ch = compare(prev.state, rp.state)

    def render(rewritten: int) -> list[str]:
        return changes_markdown(ch, old_version=prev.version, new_version=prev.version + 1, now=now,
                                events=[describe(e) for e in events], notes=tuple(sit.notes) + tuple(rp.stats["renested"]),
                                rewritten=rewritten, state=rp.state, reasons=rp.stats["reasons"])
    stats = {"pool_copies": len(sit.pool), "new_plates": len(ch.new_plates),
             "removed_plates": len(ch.removed_plates), "moved_plates": len(ch.moved_plates),
             "moved_copies": len(ch.moved_copies), "late_orders": list(ch.late_now),
             "schedule": rp.stats["schedule"]}
    problems = list(prev.data.get("problems", [])) + list(prev.new_problems)
    out = write_version(prev, rp.state, glue=glue, events=events, notes=sit.notes, render=render,
                        fixed_unplaced=prev.fixed_unplaced, problems=problems, added=prev.new_orders, stats=stats,
                        run={"replan_s": round(rp.stats["replan_s"], 2)})
    return {"changes": ch, "replanned": rp, "written": out, "situation": sit, "previous": prev,
            "new_problems": prev.new_problems, "wall_s": time.perf_counter() - t0}


def _attach(events: list, survived: list, prev) -> list:
    """Give each ``--survived`` copy to the failed plate that holds it."""
    if not survived:
        return events
    failed = [k for k, e in enumerate(events) if isinstance(e, Failed)]
    if not failed:
        raise InputError("--survived needs a --failed plate")
    extra: dict[int, list] = {}
    for key in survived:
        holder = [k for k in failed if events[k].plate in prev.plates
                  and key in {copy_key(i) for i in prev.plates[events[k].plate].items}]
        if not holder:
            raise InputError(f"--survived {key.label}: not on any failed plate "
                             f"({', '.join(events[k].plate for k in failed)})")
        extra.setdefault(holder[0], []).append(key)
    return [replace(e, survived=tuple(e.survived) + tuple(extra[k])) if k in extra else e
            for k, e in enumerate(events)]

