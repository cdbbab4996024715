"""The ``packer`` command: a thin shell over the stages.

    packer plan JOB.yaml [-o OUTDIR] [--force] [--seconds S] [--seed K]
    packer replan OUTDIR --failed P03 --now TIME [...]   re-plan after events
    packer nest INSTANCE.json [...]        2D nesting benchmark instance
    packer pack INSTANCE.json [...]        3D box benchmark instance
    packer bench nest|pack|fleet|day|replan|plates   benchmark tables

Exit codes: 0 done; 1 packer error (bad input that stops the job, a bug
caught by a self-check); 2 usage error; 3 plan written, but the input had
problems (listed) or some copies could not be placed.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from packer import __version__
from packer.errors import InputError, PackerError

__all__ = ["main"]


def _say(msg: str) -> None:
    print(f"  {msg}", file=sys.stderr, flush=True)


def _plan(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(prog="packer plan", description="Plan a job: plates, timeline, plate files, report.")
    ap.add_argument("job", help="job file (YAML)")
    ap.add_argument("-o", "--out", help="output folder (default: out/<job name>/)")
    ap.add_argument("--force", action="store_true", help="replace an existing plan in the output folder")
    ap.add_argument("--seconds", type=float, default=30.0, help="planning budget in seconds (default 30); it is counted as work, so the same job, seed and "
                         "budget give the same plan on any machine, and the wall time follows it on an idle one")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same job and seed, same plan)")
    ap.add_argument("--plates", help="folder of plate profiles (default: plates/ beside the jobs folder)")
    args = ap.parse_args(argv)

    from packer.job import load_job
    from packer.output import write_outputs
    from packer.pipeline import PlanSettings, plan_job

    started = time.perf_counter()
    job = load_job(args.job, plates_dir=args.plates)
    out = Path(args.out) if args.out else Path("out") / job.name
    if (out / "plan.json").exists() and not args.force:
        raise InputError(f"{out}: a plan is already there; use --force to replace it or -o for another folder")
    print(f"packer {__version__}: planning {job.name} ({len(job.orders)} orders, {len(job.fleet)} printers)")
    for problem in job.problems:
        print(f"problem: {problem}", file=sys.stderr)
    outcome = plan_job(job, settings=PlanSettings(seconds=args.seconds, seed=args.seed), say=_say)
    files = write_outputs(outcome, out, say=_say)
    plan = outcome.plan
    early = {str(p) for p in job.problems}
    for problem in plan.problems:
        if problem not in early:
            print(f"problem: {problem}", file=sys.stderr)
    placed = sum(len(p.items) for p in plan.plates)
    print(f"{len(plan.plates)} plates, {placed} copies placed, {len(plan.unplaced)} not placed "
          f"({time.perf_counter() - started:.1f} s)")
    for u in plan.unplaced[:20]:
        print(f"not placed: {u.order}/{u.part}/{u.copy}: {u.reason}", file=sys.stderr)
    if len(plan.unplaced) > 20:
        print(f"... and {len(plan.unplaced) - 20} more not placed (see the report)", file=sys.stderr)
    print(f"plan: {files['plan']}\nreport: {files['html']}")
    return 3 if (plan.problems or plan.unplaced) else 0


def _delegate(module: str, func: str) -> callable:
    def run(argv: list[str]) -> int:
        import importlib
        return getattr(importlib.import_module(module), func)(argv)
    return run


COMMANDS = {
    "plan": _plan,
    "nest": _delegate("packer.nest.command", "nest_command"),
    "pack": _delegate("packer.pack3d.command", "pack_command"),
    "replan": _delegate("packer.replan.command", "replan_command"),
}
BENCHES = {
    "nest": _delegate("packer.nest.command", "bench_command"),
    "pack": _delegate("packer.pack3d.command", "bench_command"),
    "fleet": _delegate("packer.fleet.command", "bench_command"),
    "replan": _delegate("packer.replan.command", "replan_bench_command"),
    "day": _delegate("packer.daybench", "bench_command"),
    "plates": _delegate("packer.platebench", "bench_command"),
}


def _bench(argv: list[str]) -> int:
    if not argv or argv[0] not in BENCHES:
        print(f"usage: packer bench {{{','.join(BENCHES)}}} [options]", file=sys.stderr)
        return 2
    return BENCHES[argv[0]](argv[1:])


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    commands = {**COMMANDS, "bench": _bench}
    if not argv or argv[0] in ("-h", "--help"):
        print(__doc__.strip())
        return 0 if argv else 2
    if argv[0] == "--version":
        print(__version__)
        return 0
    if argv[0] not in commands:
        print(f"packer: unknown command '{argv[0]}'; commands: {', '.join(commands)}", file=sys.stderr)
        return 2
    try:
        return commands[argv[0]](argv[1:])
    except InputError as exc:
        print(f"packer: cannot plan:\n{exc}", file=sys.stderr)
        return 1
    except PackerError as exc:
        print(f"packer: {exc}", file=sys.stderr)
        return 1
