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

from .instances import Instance, placement_records, read_instance
from .budget import set_wall_guard
from .plates import area_bound, nest_plates
from .shapes import Container
from .shelf import shelf_bins, shelf_strip_length
from .strip import nest_strip
from .verify import verify_layout

__all__ = ["nest_command", "bench_command", "PUBLISHED", "solve_instance"]

#: Best published strip densities (%) as listed in the shared benchmark README
#: (benchmarks/nesting2d/README.md).  "recalled": the README's table of literature
#: best-known values (guided cuckoo search, Elkeran 2013, EJOR 231(3):757-769),
#: which the README marks as recalled and not re-checked; "recorded": the best
#: of the solutions stored in the ESICUP files (Gomes & Oliveira 2006, EJOR
#: 171(3):811-829; Bennell & Song 2010, J. Heuristics 16:167-188).
PUBLISHED = {
    "albano": (89.58, "recalled"),
    "dagli": (89.51, "recalled"),
    "dighe1": (100.0, "recalled"),
    "dighe2": (100.0, "recalled"),
    "fu": (92.41, "recalled"),
    "jakobs1": (89.1, "recalled"),
    "mao": (85.44, "recalled"),
    "shapes0": (68.79, "recalled"),
    "shapes1": (76.73, "recalled"),
    "trousers": (91.0, "recalled"),
    "blaz": (83.59, "recorded"),
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
                          "a shelf baseline and the exact check, one row per instance.",
                          ["packer bench nest --plate            # the filament demo plate, no data needed",
                           "packer bench nest INSTANCES/nesting2d --seconds 60",
                           "packer bench nest INSTANCES/nesting2d_bins --seconds 60 --out results/",
                           "# INSTANCES: the open benchmark instances (JSON), not shipped with the repository"]),
}


def _parser(prog: str) -> argparse.ArgumentParser:
    description, examples = _NEST_EXAMPLES[prog]
    ap = command_parser(prog, description, examples)
    ap.add_argument("--seconds", type=float, default=60.0, help="time budget per instance (s)")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same seed and budget, same result)")
    ap.add_argument("--workers", type=int, default=2, help="processes (best of their seeds)")
    return ap


def nest_command(argv: list[str]) -> int:
    """``packer nest INSTANCE.json [--seconds S] [--seed K] [--workers W] [-o RESULT.json]``."""
    ap = _parser("packer nest")
    ap.add_argument("instance", help="instance file (JSON)")
    ap.add_argument("-o", "--output", help="write the result here (JSON)")
    args = ap.parse_args(argv)
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


def _instances(paths: list[str]) -> list[Path]:
    out = []
    for p in paths:
        q = Path(p)
        if q.is_dir():
            out += sorted(x for x in q.glob("*.json"))
        else:
            out.append(q)
    return out


def bench_command(argv: list[str]) -> int:
    """``packer bench nest [INSTANCE.json | DIR ...] [--seconds S] [--seed K] [--workers W]``.

    Prints one row per instance: density (or bins), time, best published
    density, bounding-box shelf baseline, and the exact check.
    """
    if argv and argv[0] == "nest":
        argv = argv[1:]
    ap = _parser("packer bench nest")
    ap.add_argument("paths", nargs="*", help="instance files or folders of them")
    ap.add_argument("--out", help="folder to write each result file into")
    ap.add_argument("--plate", action="store_true",
                    help="also nest the filament demo plate (60 copies of 12 footprints)")
    ap.add_argument("--wall-guard", type=float, default=1.0,
                    help="stop a run after this multiple of --seconds of wall clock (+1 s), even when its "
                         "deterministic work budget is not spent (default 1.0: the budget is a hard limit)")
    args = ap.parse_args(argv)
    set_wall_guard(args.wall_guard)
    if not args.paths and not args.plate:
        ap.error("give instance files, folders, or --plate")
    if args.plate:
        bad_plate = _bench_plate(args)
    files = _instances(args.paths)
    if not files:
        return 1 if args.plate and bad_plate else 0
    print(f"(wall guard {args.wall_guard:g} x budget + 1 s; 'capped' after the check: the run reached the "
          "guard, so the wall clock, not the work budget, stopped it and the result may differ between runs)")
    print(f"{'instance':<22} {'n':>4} {'result':>9} {'time s':>7} {'published':>16} {'gap':>6} "
          f"{'shelf':>7} check")
    gaps, bad = [], 0
    for f in files:
        try:
            inst = read_instance(f)
            start = time.monotonic()
            out, score, problems = solve_instance(inst, seconds=args.seconds, seed=args.seed,
                                                  workers=args.workers)
            took = time.monotonic() - start
        except PackerError as exc:
            print(f"{f.stem:<22} error: {exc}")
            bad += 1
            continue
        if args.out:
            Path(args.out).mkdir(parents=True, exist_ok=True)
            (Path(args.out) / f"{inst.name}.result.json").write_text(json.dumps(out))
        check = "ok" if not problems else f"INVALID ({len(problems)})"
        if took >= args.wall_guard * args.seconds:
            check += " capped"
        bad += bool(problems)
        if inst.strip_width is not None:
            pub = PUBLISHED.get(inst.name)
            pub_s = f"{pub[0]:.2f} {pub[1]}" if pub else "-"
            gap = f"{pub[0] - 100 * score:.2f}" if pub else "-"
            if pub:
                gaps.append(pub[0] - 100 * score)
            shelf = inst.total_area / (inst.strip_width * shelf_strip_length(inst.shapes, inst.strip_width))
            print(f"{inst.name:<22} {len(inst.shapes):>4} {100 * score:>8.2f}% {took:>7.1f} {pub_s:>16} "
                  f"{gap:>6} {100 * shelf:>6.2f}% {check}")
        else:
            w, h = inst.bin_size
            bound = math.ceil(inst.total_area / (w * h) - 1e-9)
            shelf = shelf_bins(inst.shapes, w, h)
            mark = "=" if score == bound else "+" + str(score - bound)
            print(f"{inst.name:<22} {len(inst.shapes):>4} {score:>4} bins {took:>7.1f} "
                  f"{'area bound ' + str(bound):>16} {mark:>6} {shelf:>7} {check}")
        sys.stdout.flush()
    if gaps:
        print(f"strip instances with a published value: {len(gaps)}, mean gap {sum(gaps) / len(gaps):.2f} "
              f"points, worst {max(gaps):.2f}")
    return 1 if bad or (args.plate and bad_plate) else 0


def _bench_plate(args) -> bool:
    """Nest the demo filament plate; print plates, area bound, utilisation, time and check."""
    from .demo import demo_plate

    shapes, container = demo_plate()
    start = time.monotonic()
    res = nest_plates(shapes, container, seconds=min(args.seconds, 8.0), seed=args.seed, workers=args.workers)
    took = time.monotonic() - start
    problems = [p for plate in res.plates for p in verify_layout(shapes, plate, container)]
    placed = sum(len(p) for p in res.plates)
    area = container.region.area
    util = [sum(shapes[p.index].polygon.area for p in plate) / area for plate in res.plates]
    print(f"demo filament plate: {placed} of {len(shapes)} copies on {len(res.plates)} plates "
          f"(area bound {area_bound(shapes, container)}), utilisation "
          f"{', '.join(f'{100 * u:.1f}%' for u in util)}, {took:.1f} s, "
          f"{'ok' if not problems and placed == len(shapes) else 'INVALID'}")
    return bool(problems) or placed != len(shapes)
