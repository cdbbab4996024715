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
from pathlib import Path

from packer.clihelp import command_parser
from packer.intake.identity import copy_key
from packer.replan.events import event_from_option, load_events, parse_copy, parse_moment

__all__ = ["replan_command", "run_replan", "parser"]

_REPEATABLE = ("failed", "finished", "printing", "down", "added", "cancelled")


def parser() -> argparse.ArgumentParser:
    """The arguments of ``packer replan``."""
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
    ap.add_argument("--seconds", type=float, default=10.0,
                    help="work budget of the replan (work-clock seconds, about seconds of an idle machine; "
                         "its shares: packer/replan/README.md)")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same plan, events, seed and budget: same result)")
    ap.add_argument("--plates", help="folder of plate profiles (default: as for packer plan)")
    return ap


def _say(msg: str) -> None:
    print(f"  {msg}", file=sys.stderr, flush=True)


def replan_command(argv: list[str]) -> int:
    r = run_replan(parser().parse_args(argv))
    ch, out, state = r["changes"], r["written"], r["replanned"].state
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
    """Replan (:func:`~packer.replan.job.replan_job`) and write the next version
    (:func:`~packer.replan.write.write_version`) from parsed arguments.

    Returns
    -------
    dict
        ``changes`` (:class:`~packer.replan.changes.Changes`), ``replanned``
        (:class:`~packer.replan.planner.Replanned`), ``written`` (what
        :func:`~packer.replan.write.write_version` returns), ``situation``,
        ``previous`` (the version read), ``new_problems``, ``outcome``, ``wall_s``.
    """
    from packer.replan.job import replan_job
    from packer.replan.planner import ReplanSettings
    from packer.replan.write import write_version

    t0 = time.perf_counter()
    events, file_now = [], None
    if args.events:
        file_now, events = load_events(args.events)
    for kind in _REPEATABLE:
        events += [event_from_option(kind, v) for v in getattr(args, kind)]
    now = parse_moment(args.now, what="--now") if args.now else file_now
    survived = [parse_copy(s, what="--survived") for s in args.survived]
    outcome = replan_job(Path(args.outdir), events, now=now, survived=survived,
                         settings=ReplanSettings(seconds=args.seconds, seed=args.seed), plates_dir=args.plates,
                         say=print, note=_say)
    out = write_version(outcome)
    return {"changes": outcome.changes, "replanned": outcome.replanned, "written": out,
            "situation": outcome.situation, "previous": outcome.previous,
            "new_problems": outcome.previous.new_problems, "outcome": outcome, "wall_s": time.perf_counter() - t0}
