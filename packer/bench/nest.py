"""``packer bench nest``: benchmark tables of the nesting engine.

One row per instance: result (strip density or bins), wall seconds, wall and
CPU seconds per budget second (CPU: the busiest worker process, so a loaded
machine shows in the wall column only), highest published density and gap,
the bounding-box shelf baseline and the engine's lift over it, the exact check.
``--generated N`` adds N generated instances (:mod:`packer.bench.nestgen`, the
development set no one tuned for), optionally with a long run of the engine
itself on each as the reference (``--long S``).
"""

from __future__ import annotations

import json
import math
import sys
import tempfile
import time
from pathlib import Path

from packer.errors import PackerError

from packer.nest import budget
from packer.bench.nestcmd import PUBLISHED, parser, solve_instance
from packer.bench.instances import read_instance
from packer.nest.plates import area_bound, nest_plates
from packer.bench.shelf import shelf_bins, shelf_strip_length
from packer.nest.verify import verify_layout

__all__ = ["bench_command"]


def _instances(paths: list[str]) -> list[Path]:
    out = []
    for p in paths:
        q = Path(p)
        if q.is_dir():
            out += sorted(x for x in q.glob("*.json"))
        else:
            out.append(q)
    return out


def _generated(args, folder: Path) -> list[Path]:
    """Write the generated instances (JSON) into ``folder``; their paths."""
    # the generator reads part meshes and footprints, which the engine itself never imports
    from packer.bench.nestgen import generate_instance

    kinds = ("strip", "plate") if args.kind == "both" else (args.kind,)
    out = []
    for k in kinds:
        for s in range(args.gen_seed, args.gen_seed + args.generated):
            inst = generate_instance(s, kind=k, ampp_dir=args.ampp)
            path = folder / f"{inst['name']}.json"
            path.write_text(json.dumps(inst))
            out.append(path)
    return out


def _run(inst, args, seconds):
    start = time.monotonic()
    out, score, problems = solve_instance(inst, seconds=seconds, seed=args.seed, workers=args.workers)
    took = time.monotonic() - start
    run = dict(budget.LAST_RUN)
    return out, score, problems, took, max(run.get("cpu", [0.0])), bool(run.get("guard"))


def _row(f: Path, args, stats: dict) -> bool:
    """Solve, check and print one instance; returns True when the result is invalid."""
    try:
        inst = read_instance(f)
        out, score, problems, took, cpu, guard = _run(inst, args, args.seconds)
        long = _run(inst, args, args.long) if args.long and f.stem.startswith("gen_") else None
    except PackerError as exc:
        print(f"{f.stem:<28} error: {exc}")
        return True
    if args.out:
        Path(args.out).mkdir(parents=True, exist_ok=True)
        (Path(args.out) / f"{inst.name}.result.json").write_text(json.dumps(out))
        if long:
            (Path(args.out) / f"{inst.name}.long.result.json").write_text(json.dumps(long[0]))
    check = ("ok" if not problems else f"INVALID ({len(problems)})")
    stats["ratio"].append(took / args.seconds)
    stats["guard"] += guard
    times = f"{took:>7.1f} {took / args.seconds:>5.2f} {cpu / args.seconds:>5.2f} {'guard' if guard else '-':>5}"
    if inst.strip_width is not None:
        pub = PUBLISHED.get(inst.name)
        pub_s = f"{pub[0]:.2f} {pub[1]}" if pub else "-"
        gap = f"{pub[0] - 100 * score:.2f}" if pub else "-"
        if pub:
            stats["gaps"].append(pub[0] - 100 * score)
        shelf = inst.total_area / (inst.strip_width * shelf_strip_length(inst.shapes, inst.strip_width))
        lift = score / shelf
        if f.stem.startswith("gen_"):
            stats["lift"].append(lift)
        ref = f"long {100 * long[1]:.2f}" if long else pub_s
        if long:
            stats["long"].append(100 * (long[1] - score))
            gap = f"{100 * (long[1] - score):.2f}"
        print(f"{inst.name:<28} {len(inst.shapes):>4} {100 * score:>8.2f}% {times} {ref:>18} {gap:>6} "
              f"{100 * shelf:>6.2f}% {lift:>5.2f} {check}")
    else:
        w, h = inst.bin_size
        bound = math.ceil(inst.total_area / (w * h) - 1e-9)
        shelf = shelf_bins(inst.shapes, w, h)
        mark = "=" if score == bound else "+" + str(score - bound)
        if f.stem.startswith("gen_"):
            stats["lift"].append(shelf / score)
        ref = f"long {long[1]} bins" if long else f"area bound {bound}"
        print(f"{inst.name:<28} {len(inst.shapes):>4} {score:>4} bins {times} {ref:>18} {mark:>6} "
              f"{shelf:>7} {shelf / score:>5.2f} {check}")
    sys.stdout.flush()
    return bool(problems)


def bench_command(argv: list[str]) -> int:
    """``packer bench nest [INSTANCE.json | DIR ...] [--generated N] [--seconds S] ...``."""
    if argv and argv[0] == "nest":
        argv = argv[1:]
    ap = parser("packer bench nest")
    ap.add_argument("paths", nargs="*", help="instance files or folders of them")
    ap.add_argument("--out", help="folder to write each result file (and the generated instances) into")
    ap.add_argument("--plate", action="store_true",
                    help="also nest the filament demo plate (60 copies of 12 footprints)")
    ap.add_argument("--generated", type=int, default=0, metavar="N",
                    help="also run N generated instances (packer.bench.nestgen seeds --gen-seed ...)")
    ap.add_argument("--gen-seed", type=int, default=0, help="first seed of the generated instances")
    ap.add_argument("--kind", choices=("strip", "plate", "both"), default="strip",
                    help="generated instances: strips, plates of bins, or both")
    ap.add_argument("--ampp", help="folder of the real-parts data set: its footprints join the generated outlines")
    ap.add_argument("--long", type=float, default=0.0, metavar="S",
                    help="generated instances: also run the engine for S seconds, as the reference")
    ap.add_argument("--wall-guard", type=float, default=1.5,
                    help="safety net: stop a run after this multiple of --seconds of wall clock (+1 s) "
                         "even when its work budget is not spent (default 1.5; 'guard' in the table)")
    args = ap.parse_args(argv)
    budget.set_wall_guard(args.wall_guard, clock="wall")
    if not args.paths and not args.plate and not args.generated:
        ap.error("give instance files, folders, --generated N or --plate")
    bad = _bench_plate(args) if args.plate else False
    files = _instances(args.paths)
    tmp = None
    if args.generated:
        folder = Path(args.out) if args.out else Path(tmp := tempfile.mkdtemp(prefix="nestgen-"))
        folder.mkdir(parents=True, exist_ok=True)
        files += _generated(args, folder)
    if not files:
        return 1 if bad else 0
    print(f"(wall/budget and cpu/budget: seconds per budget second, cpu of the busiest worker; 'guard': "
          f"the wall-clock safety net ({args.wall_guard:g} x budget + 1 s) stopped the run, not its work budget)")
    print(f"{'instance':<28} {'n':>4} {'result':>9} {'wall s':>7} {'w/b':>5} {'c/b':>5} {'guard':>5} "
          f"{'reference':>18} {'gap':>6} {'shelf':>7} {'lift':>5} check")
    stats = {"gaps": [], "ratio": [], "guard": 0, "lift": [], "long": []}
    for f in files:
        bad |= _row(f, args, stats)
    if stats["gaps"]:
        g = stats["gaps"]
        print(f"strip instances with a published value: {len(g)}, mean gap {sum(g) / len(g):.2f} points, "
              f"worst {max(g):.2f}")
    if stats["lift"]:
        print(f"generated: {len(stats['lift'])}, lift over the shelf baseline min {min(stats['lift']):.2f}, "
              f"{sum(x >= 1.3 for x in stats['lift'])} at 1.3 or more")
    if stats["long"]:
        g = stats["long"]
        print(f"generated strips: mean gap to the {args.long:g} s run {sum(g) / len(g):.2f} points")
    print(f"wall/budget max {max(stats['ratio']):.2f}; runs stopped by the wall guard: {stats['guard']}"
          + (f"; instances written to {tmp}" if tmp else ""))
    return 1 if bad else 0


def _bench_plate(args) -> bool:
    """Nest the demo filament plate; print plates, area bound, utilisation, time and check."""
    from packer.bench.nestdemo import demo_plate

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
