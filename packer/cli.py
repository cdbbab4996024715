"""The ``packer`` command: a thin shell over the stages.

Each command has its own parser with examples (:mod:`packer.clihelp`);
``packer plan`` shows progress on standard error (:mod:`packer.progress`),
prints its result on standard output, or one JSON object with ``--json``.

Exit codes of ``packer plan``: 0 every copy planned; 3 plan written, but the
input had problems (listed) or some copies could not be placed; 1 nothing
could be planned (no plan written; the message names the file and what is
wrong); 2 wrong command-line use; 4 the job is over a limit as a whole (see
the Limits table in DEVELOPERS.md; nothing written).
"""

from __future__ import annotations

import json
import os
import sys
import time
from pathlib import Path

from packer import __version__
from packer.clihelp import command_parser
from packer.errors import InputError, PackerError
from packer.limits import LimitError

__all__ = ["main", "HELP"]

EXIT_CODES = ("exit codes: 0 done; 1 nothing could be planned or a packer error (the message says why); "
              "2 wrong command-line use;\n3 plan written, but the input had problems (listed) or some copies "
              "could not be placed (listed with the reason);\n4 the job is over a limit as a whole "
              "(PACKER_LIMIT_* variables, see DEVELOPERS.md).")

HELP = f"""packer {__version__}: plan a day of 3D-print production.

usage: packer COMMAND [options]        packer COMMAND --help shows a command's options

commands:
  plan JOB.yaml        plan a job: plates, timeline, plate files, report, operator sheets
  replan OUTDIR        re-plan after a failed plate, a printer down, added or cancelled orders
  nest INSTANCE.json   solve one 2D nesting benchmark instance (strip or bins)
  pack INSTANCE.json   solve one 3D box-loading benchmark instance
  inspect MESH...      what intake finds in mesh files: format, units, defects, volume, fitting profiles
  bench KIND           benchmark tables: nest, pack, fleet, day, replan, plates, intake (packer bench --help)

examples:
  packer plan jobs/brindle-lane-day.yaml --force
  packer plan jobs/brindle-lane-day.yaml -o out/monday --seconds 60 --stl --zip
  packer plan jobs/brindle-lane-day.yaml --force --quiet --json > summary.json
  packer replan out/brindle-lane-day --failed P01 --now 2026-12-07T10:00
  packer inspect jobs/parts/*.stl --json
  packer bench day --copies 200 --no-verify

{EXIT_CODES}
"""

BENCH_HELP = """usage: packer bench KIND [options]      packer bench KIND --help shows its options

benchmark tables (they print a table; nothing is timed inside the unit tests):
  nest     2D nesting against published densities and a shelf baseline
  pack     3D packing of parts in a powder volume, and box instances
  fleet    the fleet planner on generated days (stand-in layouts)
  day      generated days through the real pipeline, plans checked
  replan   replanning time after a failed plate
  plates   equal disks on round and square plates against the best-known packings
  intake   mesh intake of a folder of real parts against their published volumes

examples:
  packer bench nest --plate
  packer bench pack --skip boxes --seconds 60
  packer bench fleet --copies 200 --seconds 20
  packer bench day --copies 200 --no-verify
  packer bench replan --copies 200 --fresh-seconds 20
  packer bench plates --n 2 12 --seconds 5
  packer bench intake PARTS_FOLDER
"""


def _plan_parser():
    ap = command_parser(
        "packer plan", "Plan a job: plates, timeline, plate files (3MF), plan.json, report, operator sheets "
        "and pick list, written into one output folder.",
        ["packer plan jobs/brindle-lane-day.yaml --force         # into out/brindle-lane-day/",
         "packer plan jobs/brindle-lane-day.yaml -o out/monday --seconds 60",
         "packer plan jobs/brindle-lane-day.yaml --force --stl --zip   # plus STL plates and a zip to hand over",
         "packer plan jobs/brindle-lane-day.yaml --force --quiet --json > summary.json",
         "packer plan jobs/brindle-lane-day.yaml --force --workers 2   # same plan, components in 2 processes"],
        notes=EXIT_CODES)
    ap.add_argument("job", help="job file (YAML)")
    ap.add_argument("-o", "--out", help="output folder (default: out/<job name>/)")
    ap.add_argument("--force", action="store_true", help="replace an existing plan in the output folder")
    ap.add_argument("--seconds", type=float, default=30.0,
                    help="planning budget in seconds (default 30); it is counted as work, so the same job, seed and "
                         "budget give the same plan on any machine, and the wall time follows it on an idle one")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same job and seed, same plan)")
    ap.add_argument("--plates", help="folder of plate profiles (default: plates/ beside the jobs folder)")
    where = ap.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help="plan the parts of the fleet that share no copy (e.g. resin, powder, filament) in N local "
                            "processes; the plan is the same as without (default: one after the other, in-process)")
    where.add_argument("--cluster", metavar="ADDRESS",
                       help="plan those parts on a running Dask distributed scheduler (tcp://host:8786; start it with "
                            "`dask scheduler`, workers with `dask worker ADDRESS`; needs pip install 'packer[cluster]'); "
                            "the plan is the same as in-process")
    ap.add_argument("--stl", action="store_true", help="also write each plate as one STL file (plates/P01.stl, ...)")
    ap.add_argument("--zip", action="store_true", help="also write <job>-handover.zip with every output, for handing over")
    ap.add_argument("-q", "--quiet", action="store_true",
                    help="no progress and no stage lines; problems and errors still go to standard error")
    ap.add_argument("--json", action="store_true",
                    help="print one JSON object with the summary on standard output instead of the text lines")
    return ap


def _summary(plan, files: dict, out: Path, code: int, seconds: float) -> dict:
    placed = sum(len(p.items) for p in plan.plates)
    return {
        "job": plan.job, "outdir": str(out), "exit_code": code, "wall_seconds": round(seconds, 2),
        "plates": len(plan.plates),
        "copies": {"ordered": placed + len(plan.unplaced), "placed": placed, "not_placed": len(plan.unplaced)},
        "not_placed": [{"order": u.order, "part": u.part, "copy": u.copy, "reason": u.reason} for u in plan.unplaced],
        "late_orders": [{"order": o.order, "due": o.due.isoformat(timespec="minutes"),
                         "done": o.done.isoformat(timespec="minutes") if o.done else None,
                         "late_minutes": round(o.late_s / 60, 1)} for o in plan.orders if o.late_s > 0],
        "finish": max(p.free for p in plan.plates).isoformat(timespec="minutes") if plan.plates else None,
        "finish_bound": plan.bounds.get("finish_bound"),
        "plate_bounds": plan.bounds.get("plates", {}),
        "problems": list(plan.problems),
        "files": {k: str(v) for k, v in files.items()},
    }


def _plan(argv: list[str]) -> int:
    args = _plan_parser().parse_args(argv)

    from packer.output.handover import write_handover_zip, write_stl_plates
    from packer.intake.job import load_job
    from packer.output.write import check_target, folder_name, write_outputs
    from packer.pipeline import PlanSettings, executor_for, plan_job
    from packer.progress import Reporter

    started = time.perf_counter()
    job = load_job(args.job, plates_dir=args.plates)
    out = Path(args.out) if args.out else Path("out") / folder_name(job.name)
    check_target(out, replace=args.force)
    text = not args.json and not args.quiet
    if text:
        print(f"packer {__version__}: planning {job.name} ({len(job.orders)} orders, {len(job.fleet)} printers)")
    for problem in job.problems:
        print(f"problem: {problem}", file=sys.stderr)
    with executor_for(workers=args.workers, cluster=args.cluster) as executor, Reporter(quiet=args.quiet) as rep:
        outcome = plan_job(job, settings=PlanSettings(seconds=args.seconds, seed=args.seed), say=rep.say,
                           progress=rep.progress, executor=executor)
        plan = outcome.plan

        def extras(work: Path) -> dict[str, Path]:
            """STL plates and the handover zip, written into the staged folder with the rest."""
            got = {}
            if args.stl:
                write_stl_plates(plan, work)
                got["stl"] = work / "plates"
            if args.zip:
                got["zip"] = write_handover_zip(plan, work)
            return got
        files = write_outputs(outcome, out, say=rep.say, progress=rep.progress, replace=args.force, extras=extras)
    early = {str(p) for p in job.problems}
    for problem in plan.problems:
        if problem not in early:
            print(f"problem: {problem}", file=sys.stderr)
    code = 3 if (plan.problems or plan.unplaced) else 0
    for u in plan.unplaced[:20]:
        print(f"not placed: {u.order}/{u.part}/{u.copy}: {u.reason}", file=sys.stderr)
    if len(plan.unplaced) > 20:
        print(f"... and {len(plan.unplaced) - 20} more not placed (see the report)", file=sys.stderr)
    if args.json:
        print(json.dumps(_summary(plan, files, out, code, time.perf_counter() - started), indent=1))
    elif text:
        placed = sum(len(p.items) for p in plan.plates)
        print(f"{len(plan.plates)} plates, {placed} copies placed, {len(plan.unplaced)} not placed "
              f"({time.perf_counter() - started:.1f} s)")
        print(f"plan: {files['plan']}\nreport: {files['html']}\noperator sheets: {files['sheets_html']}")
        if args.zip:
            print(f"handover: {files['zip']}")
    return code


def _delegate(module: str, func: str) -> callable:
    def run(argv: list[str]) -> int:
        import importlib
        return getattr(importlib.import_module(module), func)(argv)
    return run


COMMANDS = {
    "plan": _plan,
    "nest": _delegate("packer.bench.nestcmd", "nest_command"),
    "pack": _delegate("packer.bench.packcmd", "pack_command"),
    "replan": _delegate("packer.replan.command", "replan_command"),
    "inspect": _delegate("packer.inspect", "inspect_command"),
}
BENCHES = {
    "nest": _delegate("packer.bench.nestcmd", "bench_command"),
    "pack": _delegate("packer.bench.packcmd", "bench_command"),
    "fleet": _delegate("packer.bench.fleetcmd", "bench_command"),
    "replan": _delegate("packer.bench.replan", "bench_command"),
    "day": _delegate("packer.bench.day", "bench_command"),
    "intake": _delegate("packer.bench.intake", "bench_command"),
    "plates": _delegate("packer.bench.plates", "bench_command"),
}


def _bench(argv: list[str]) -> int:
    if argv and argv[0] in ("-h", "--help"):
        print(BENCH_HELP.rstrip())
        return 0
    if not argv or argv[0] not in BENCHES:
        print(BENCH_HELP.rstrip(), file=sys.stderr)
        if argv:
            print(f"packer bench: unknown benchmark '{argv[0]}'", file=sys.stderr)
        return 2
    return BENCHES[argv[0]](argv[1:])


def _run(command, argv: list[str]) -> int:
    try:
        return command(argv)
    except SystemExit as exc:          # argparse: --help exits 0, wrong use exits 2
        return exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 2)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    commands = {**COMMANDS, "bench": _bench}
    if not argv or argv[0] in ("-h", "--help", "help"):
        print(HELP.rstrip(), file=sys.stdout if argv else sys.stderr)
        return 0 if argv else 2
    if argv[0] == "--version":
        print(__version__)
        return 0
    if argv[0] not in commands:
        print(f"packer: unknown command '{argv[0]}'; commands: {', '.join(commands)} (packer --help)", file=sys.stderr)
        return 2
    try:
        return _run(commands[argv[0]], argv[1:])
    except LimitError as exc:
        print(f"packer: refused, over a limit:\n{exc}", file=sys.stderr)
        return EXIT_LIMIT
    except InputError as exc:
        print(f"packer: cannot plan:\n{exc}", file=sys.stderr)
        return 1
    except PackerError as exc:
        print(f"packer: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("packer: interrupted; nothing half-written was left in place", file=sys.stderr)
        return 130
    except OSError as exc:
        print(f"packer: cannot read or write {exc.filename or ''}: {exc.strerror or exc}; nothing half-written "
              "was left in place", file=sys.stderr)
        return 1
    except MemoryError:
        print("packer: out of memory; lower the limits (see DEVELOPERS.md) or split the job", file=sys.stderr)
        return 1
    except Exception as exc:  # noqa: BLE001 - the last line of defence: a message, never a traceback
        print(f"packer: internal error, a bug ({type(exc).__name__}: {str(exc)[:300]}); nothing half-written "
              "was left in place. Please report it with the job file.", file=sys.stderr)
        if os.environ.get("PACKER_DEBUG"):
            raise
        return 1


#: Exit code when a job is refused as a whole for being over a limit.
EXIT_LIMIT = 4
