"""Command functions the packer CLI wires in: ``packer pack`` and ``packer bench pack``.

``pack_command`` loads one box instance (the JSON schema of the container
loading benchmark: container, boxes with dims, quantity and rotatable_axes),
packs it, checks the loading and writes placements as
``{"placements": [{"box", "x", "y", "z", "dims"}]}``.

``bench_command`` prints two tables: procedurally made mechanical parts packed
into a powder volume (spectral packer against a bounding-box layered baseline),
and the box instances of a folder against the best published utilisation.
"""

from __future__ import annotations

import json
import logging
import resource
import sys
import time
from pathlib import Path

import numpy as np

from packer.clihelp import command_parser
from packer.errors import InputError
from packer.bench.packbaseline import bbox_layers
from packer.pack3d.boxes import BoxType, loading_problems, pack_boxes
from packer.pack3d.builds import pack_builds
from packer.pack3d.model import Body
from packer.pack3d.verify import verify_build

__all__ = ["pack_command", "bench_command", "load_box_instance", "bench_parts"]

# Best published mean utilisation on these sets without support from below: about 95-96 %
# (Fanslau & Bortfeldt 2010; Goncalves & Resende 2012; recalled from memory, not re-checked).
PUBLISHED_BEST = 0.955



def load_box_instance(path: str | Path) -> tuple[str, tuple[int, int, int], list[BoxType]]:
    """Read a box instance file: (name, container, box types).

    Raises
    ------
    InputError
        When the file is missing, not JSON, or misses a field.
    """
    try:
        data = json.loads(Path(path).read_text())
        container = tuple(int(v) for v in data["container"])
        types = [BoxType(id=str(b["id"]), dims=tuple(int(v) for v in b["dims"]),
                         quantity=int(b.get("quantity", 1)),
                         upright=tuple(bool(v) for v in b.get("rotatable_axes", (1, 1, 1))))
                 for b in data["boxes"]]
    except (OSError, ValueError, KeyError, TypeError) as e:
        raise InputError(f"{path}: not a box instance ({e})") from e
    return str(data.get("name", Path(path).stem)), container, types


def pack_command(argv: list[str]) -> int:
    """``packer pack INSTANCE.json [--seconds S] [--seed K] [-o RESULT.json]``.

    Returns the exit code: 0 when a checked loading was written.
    """
    ap = command_parser("packer pack", "Load one container with boxes (3D box instance) and check the loading.",
                        ["packer pack INSTANCES/boxes3d/BR1_1.json -o r.json",
                         "packer pack INSTANCES/boxes3d/BR7_1.json --seconds 30",
                         "# INSTANCES: the open box-loading instances (JSON), not shipped with the repository"])
    ap.add_argument("instance", help="box instance file (JSON)")
    ap.add_argument("--seconds", type=float, default=10.0, help="time budget (default 10 s)")
    ap.add_argument("--seed", type=int, default=0, help="random seed (same seed and budget, same loading)")
    ap.add_argument("-o", "--output", help="result JSON (default: standard output)")
    args = ap.parse_args(argv)
    name, container, types = load_box_instance(args.instance)
    t0 = time.monotonic()
    loading = pack_boxes(container, types, seconds=args.seconds, seed=args.seed)
    problems = loading_problems(container, types, loading.placements)
    if problems:  # a bug: never write an unchecked loading
        for p in problems[:20]:
            print("FAIL", p, file=sys.stderr)
        return 1
    result = {"instance": name, "utilization": round(loading.utilisation, 6),
              "placements": [{"box": p.box, "x": p.corner[0], "y": p.corner[1], "z": p.corner[2],
                              "dims": list(p.dims)} for p in loading.placements]}
    text = json.dumps(result, indent=1)
    if args.output:
        Path(args.output).write_text(text + "\n")
    else:
        print(text)
    print(f"{name}: {len(loading.placements)} boxes, utilisation {loading.utilisation:.2%}, "
          f"{time.monotonic() - t0:.1f} s", file=sys.stderr)
    return 0


def bench_parts(count: int, *, seed: int) -> list:
    """Procedural mechanical parts for the benchmark: kinds in turn, largest side 25-110 mm.

    Returns
    -------
    list of trimesh.Trimesh
    """
    from packer.bench.partgen import PART_KINDS, make_part  # procedural parts live outside the engine

    rng = np.random.default_rng(seed)
    sizes = rng.uniform(25.0, 110.0, size=count)
    return [make_part(PART_KINDS[k % len(PART_KINDS)], size=float(sizes[k]), seed=seed * 1000 + k)
            for k in range(count)]


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _parts_table(args) -> None:
    volume, spacing, margin = (331.0, 318.0, 392.0), 3.0, 5.0   # the powder-cell-331 volume
    meshes = bench_parts(args.parts, seed=args.seed)
    bodies = [Body(m) for m in meshes]
    part_volume = sum(float(m.volume) for m in meshes)
    print(f"(a) {len(bodies)} procedural parts ({part_volume / 1e3:.0f} cm3 of parts) into "
          f"{volume[0]:g} x {volume[1]:g} x {volume[2]:g} mm, spacing {spacing:g} mm, margin {margin:g} mm")
    rows = []
    for label, run in (("spectral (this packer)", lambda: pack_builds(bodies, volume=volume, spacing=spacing,
                                                                      margin=margin, seconds=args.seconds,
                                                                      seed=args.seed)),
                       ("bounding-box layers", lambda: bbox_layers(bodies, volume=volume, spacing=spacing,
                                                                   margin=margin))):
        t0 = time.monotonic()
        res = run()
        elapsed = time.monotonic() - t0
        t1 = time.monotonic()
        bad = sum(len(verify_build(bodies, b.placements, volume=volume, spacing=spacing, margin=margin))
                  for b in res.builds)
        check = time.monotonic() - t1
        used = sum(volume[0] * volume[1] * b.height for b in res.builds)
        placed = sum(float(meshes[p.index].volume) for b in res.builds for p in b.placements)
        rows.append((label, len(res.builds), [b.height for b in res.builds], placed / used if used else 0.0,
                     len(res.unplaced), elapsed, check, bad))
    print(f"{'method':24} {'builds':>6} {'heights mm':>18} {'density':>8} {'unplaced':>8} "
          f"{'pack s':>7} {'check s':>7} {'check':>6}")
    for label, nb, hs, dens, nu, el, ch, bad in rows:
        print(f"{label:24} {nb:6d} {'/'.join(f'{h:.1f}' for h in hs):>18} {dens:8.1%} {nu:8d} "
              f"{el:7.1f} {ch:7.1f} {'ok' if not bad else f'{bad} bad':>6}")
    if rows[1][3] > 0:
        print(f"density ratio spectral / bounding-box layers: {rows[0][3] / rows[1][3]:.2f}x")
    print(f"peak memory so far: {_peak_mb():.0f} MB")


def _boxes_table(args) -> None:
    if args.boxes is None:
        print("(b) box instances skipped: give --boxes FOLDER (the open box-loading instances are not "
              "shipped with the repository)")
        return
    folder = Path(args.boxes)
    files = sorted(folder.glob("*.json"))
    if not files:
        print(f"(b) no box instances in {folder}")
        return
    print(f"(b) {len(files)} box instances from {folder}, {args.box_seconds:g} s each")
    print(f"{'instance':10} {'boxes':>6} {'utilisation':>11} {'cargo bound':>11} {'s':>5} {'check':>6}")
    utils, bounds = [], []
    for f in files:
        name, container, types = load_box_instance(f)
        t0 = time.monotonic()
        loading = pack_boxes(container, types, seconds=args.box_seconds, seed=args.seed)
        el = time.monotonic() - t0
        bad = loading_problems(container, types, loading.placements)
        cargo = sum(t.quantity * int(np.prod(t.dims)) for t in types) / float(np.prod(container))
        utils.append(loading.utilisation)
        bounds.append(min(1.0, cargo))
        print(f"{name:10} {len(loading.placements):6d} {loading.utilisation:11.2%} {min(1.0, cargo):11.2%} "
              f"{el:5.1f} {'ok' if not bad else 'BAD':>6}")
    mean = float(np.mean(utils))
    print(f"{'mean':10} {'':6} {mean:11.2%} {float(np.mean(bounds)):11.2%}")
    print(f"best published mean without support: about {PUBLISHED_BEST:.1%} (95-96 %, recalled from memory); "
          f"gap {100 * (PUBLISHED_BEST - mean):.1f} points")


def bench_command(argv: list[str]) -> int:
    """``packer bench pack [--seconds S] [--seed K] [--boxes DIR] [--parts N] [--box-seconds B]``.

    Prints the parts table (a) and the box table (b). Returns 0.
    """
    if argv and argv[0] == "pack":
        argv = argv[1:]
    ap = command_parser("packer bench pack", "Benchmark 3D packing: (a) procedural parts in a powder volume "
                        "against a bounding-box baseline, (b) box instances against their volume bound.",
                        ["packer bench pack --skip boxes --seconds 60     # parts only, no data needed",
                         "packer bench pack --boxes INSTANCES/boxes3d --box-seconds 2",
                         "# INSTANCES: the open box-loading instances (JSON), not shipped with the repository"])
    ap.add_argument("--seconds", type=float, default=240.0, help="time budget of the parts packing (default 240 s)")
    ap.add_argument("--seed", type=int, default=0, help="seed of the parts and the packer")
    ap.add_argument("--parts", type=int, default=160, help="number of procedural parts (default 160)")
    ap.add_argument("--boxes", default=None, metavar="FOLDER",
                    help="folder of box instances (JSON); without it table (b) is skipped")
    ap.add_argument("--box-seconds", type=float, default=2.0, help="time per box instance (default 2 s)")
    ap.add_argument("--skip", choices=("parts", "boxes"), help="leave one table out")
    args = ap.parse_args(argv)
    handler = logging.StreamHandler(sys.stdout)
    handler.setFormatter(logging.Formatter("    %(message)s"))
    logger = logging.getLogger("packer.pack3d")
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    if args.skip != "parts":
        _parts_table(args)
    if args.skip != "boxes":
        _boxes_table(args)
    print(f"peak memory: {_peak_mb():.0f} MB")
    logger.removeHandler(handler)
    return 0
