"""Command functions: ``packer nest INSTANCE.json`` and ``packer bench nest ...``.

The lead wires these into the ``packer`` command line; each takes its
arguments (without the command words) and returns an exit status.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from pathlib import Path

from packer.clihelp import command_parser
from packer.errors import PackerError

from packer.bench.instances import Instance, placement_records, read_instance
from packer.nest.budget import set_wall_guard
from packer.nest.plates import nest_plates
from packer.nest.shapes import Container
from packer.nest.strip import nest_strip
from packer.nest.verify import verify_layout

__all__ = ["nest_command", "bench_command", "PUBLISHED", "solve_instance", "parser"]

#: Highest published strip density (%) of each instance, as listed in the shared benchmark
#: README (benchmarks/nesting2d/README.md), with its kind:
#: "recalled": the README's table of literature best-known values (guided cuckoo search,
#: Elkeran 2013, EJOR 231(3):757-769), marked there as recalled and not re-checked;
#: "record 2025": the best-ever layouts of the open-source heuristic of Gardeyn, Vanden Berghe
#: & Wauters (2025, arXiv:2509.13329), densities recomputed from their record files.
#: Where both exist, the higher one is kept (fu and shapes1: Elkeran, by 0.01 points).
PUBLISHED = {
    "albano": (89.82, "record 2025"),
    "blaz": (86.22, "record 2025"),
    "dagli": (90.17, "record 2025"),
    "dighe1": (100.0, "recalled"),
    "dighe2": (100.0, "recalled"),
    "fu": (92.41, "recalled"),
    "jakobs1": (89.25, "record 2025"),
    "mao": (86.87, "record 2025"),
    "shapes0": (69.98, "record 2025"),
    "shapes1": (76.73, "recalled"),
    "trousers": (92.62, "record 2025"),
    "gardeyn0": (89.85, "record 2025"),
    "gardeyn1": (90.23, "record 2025"),
    "gardeyn2": (89.57, "record 2025"),
    "gardeyn4": (79.92, "record 2025"),
    "gardeyn5": (70.55, "record 2025"),
    "gardeyn6": (92.71, "record 2025"),
    "gardeyn8": (90.99, "record 2025"),
    "gardeyn9": (86.74, "record 2025"),
}


def solve_instance(inst: Instance, *, seconds: float, seed: int, workers: int):
    """Solve one instance; returns (result dict for the file, density or bins, problems)."""
    if inst.strip_width is not None:
        res = nest_strip(inst.shapes, width=inst.strip_width, seconds=seconds, seed=seed, workers=workers)
        out = {"length": res.length, "placements": placement_records(inst, res.placements)}
        problems = verify_layout(inst.shapes, res.placements, Container.rectangle(res.length, inst.strip_width))
        if len(res.placements) != len(inst.shapes):
            problems.append(f"{len(inst.shapes) - len(res.placements)} shapes not placed")
        score = inst.total_area / (inst.strip_width * res.length)
        return out, score, problems
    w, h = inst.bin_size
    container = Container.rectangle(w, h)
    # spacing 0 in the bin benchmarks: shapes may touch exactly
    res = nest_plates(inst.shapes, container, seconds=seconds, seed=seed, workers=workers, clearance=0.0)
    out = {"bins": [{"placements": placement_records(inst, plate)} for plate in res.plates]}
    problems = []
    for k, plate in enumerate(res.plates):
        problems += [f"bin {k}: {p}" for p in verify_layout(inst.shapes, plate, container)]
    if res.unplaced:
        problems.append(f"shapes {list(res.unplaced)} fit no bin")
    return out, len(res.plates), problems


_NEST_EXAMPLES = {
    "packer nest": ("Solve one 2D nesting benchmark instance (strip or bins) and check it exactly.",
                    ["packer nest INSTANCES/nesting2d/shapes0.json --seconds 30 -o result.json",
                     "packer nest INSTANCES/nesting2d_bins/ts001c5.json --seconds 5",
                     "# INSTANCES: the open benchmark instances (JSON), not shipped with the repository"]),
    "packer bench nest": ("Benchmark the nesting engine: density (or bins) against the best published value, "
                          "a shelf baseline and the exact check, wall and CPU seconds per budget second, one row per instance.",
                          ["packer bench nest --plate            # the filament demo plate, no data needed",
                           "packer bench nest INSTANCES/nesting2d --seconds 60",
                           "packer bench nest INSTANCES/nesting2d_bins --seconds 60 --out results/",
                           "packer bench nest --generated 6 --seconds 60 --long 600   # generated strips, no data needed",
                           "# INSTANCES: the open benchmark instances (JSON), not shipped with the repository"]),
}


def parser(prog: str) -> argparse.ArgumentParser:
    description, examples = _NEST_EXAMPLES[prog]
    ap = command_parser(prog, description, examples)
    ap.add_argument("--seconds", type=float, default=60.0, help="time budget per instance (s)")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same seed and budget, same result)")
    ap.add_argument("--workers", type=int, default=2, help="processes (best of their seeds)")
    return ap


def nest_command(argv: list[str]) -> int:
    """``packer nest INSTANCE.json [--seconds S] [--seed K] [--workers W] [-o RESULT.json]``."""
    ap = parser("packer nest")
    ap.add_argument("instance", help="instance file (JSON)")
    ap.add_argument("-o", "--output", help="write the result here (JSON)")
    args = ap.parse_args(argv)
    set_wall_guard(1.5, clock="wall")     # a user who asks for a minute gets about a minute
    try:
        inst = read_instance(args.instance)
        start = time.monotonic()
        out, score, problems = solve_instance(inst, seconds=args.seconds, seed=args.seed, workers=args.workers)
        took = time.monotonic() - start
    except PackerError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    if args.output:
        Path(args.output).write_text(json.dumps(out, indent=1))
    if inst.strip_width is not None:
        print(f"{inst.name}: length {out['length']:.6g}, density {100 * score:.2f} %, {took:.1f} s")
    else:
        bound = math.ceil(inst.total_area / (inst.bin_size[0] * inst.bin_size[1]) - 1e-9)
        print(f"{inst.name}: {score} bins (area bound {bound}), {took:.1f} s")
    for p in problems:
        print(f"INVALID: {p}")
    return 1 if problems else 0


def bench_command(argv: list[str]) -> int:
    """``packer bench nest ...``: see :func:`packer.bench.nest.bench_command`."""
    from packer.bench.nest import bench_command as run

    return run(argv)
