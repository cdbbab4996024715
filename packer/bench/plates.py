"""``packer bench plates``: equal disks on round and square plates against the best-known packings.

For n = 2..30 identical disks and a round or a square plate, the disk size is set
so that the best-known packing of n equal circles in that container just fits
with the spacing and margin (a relative slack ``--slack`` on the radius covers the
polygons that stand for the circles). packer's layout engine
(:func:`packer.nest.fit_on_plate`) must then place all n on one plate; the table
gives n, the best-known ratio, whether all n were placed and the time.

Best-known ratios (container size over circle radius), from the tables of
packings of equal circles in a circle and in a square kept by E. Specht
(packomania.com, "The best known packings of equal circles in a circle" and
"... in a square"). The values below are recalled from memory (12 digits were
not at hand), except those with a closed form: circle n = 2-9, 11, 13, 18, 19
(Kravitz, Math. Mag. 40, 1967; Graham 1968; the circle-in-circle closed forms
1 + 1/sin(pi/(n-1)) for n = 8, 11, 13 and 1 + sqrt 2 + sqrt 6 for 18, 19);
square n = 2-9, 12, 16, 23, 25 (Schaer, Meir, Goldberg; the square ratio is
2 + 2/m with m the largest smallest distance of n points in a unit square).
"""

from __future__ import annotations

import math
import time

from shapely.geometry import Point, box

from packer.clihelp import command_parser
from packer.nest import Container, Shape, fit_on_plate

__all__ = ["CIRCLE_RATIO", "SQUARE_POINT_DISTANCE", "square_ratio", "disk_case", "bench_command"]

#: R / r for n equal circles of radius r in a circle of radius R (best known; see the module
#: docstring: closed forms where noted there, the rest from memory of Specht's table)
CIRCLE_RATIO = {
    2: 2.0, 3: 1 + 2 / math.sqrt(3), 4: 1 + math.sqrt(2), 5: 1 + math.sqrt(2 * (1 + 1 / math.sqrt(5))),
    6: 3.0, 7: 3.0, 8: 1 + 1 / math.sin(math.pi / 7), 9: 1 + math.sqrt(2 * (2 + math.sqrt(2))),
    10: 3.813026472, 11: 1 + 1 / math.sin(math.pi / 9), 12: 4.029552827, 13: 1 + 1 / math.sin(math.pi / 10),
    14: 4.328428174, 15: 4.521356237, 16: 4.615425563, 17: 4.792033999,
    18: 1 + math.sqrt(2) + math.sqrt(6), 19: 1 + math.sqrt(2) + math.sqrt(6), 20: 5.122307963,
    21: 5.252405098, 22: 5.439458943, 23: 5.545052872, 24: 5.651786209, 25: 5.752824718,
    26: 5.828448189, 27: 5.906397614, 28: 6.014938420, 29: 6.138597517, 30: 6.197741518,
}

#: m_n: the largest smallest distance of n points in a unit square (best known; closed forms
#: for 2-9, 12, 16, 23, 25, the rest from memory of Specht's table)
SQUARE_POINT_DISTANCE = {
    2: math.sqrt(2), 3: math.sqrt(6) - math.sqrt(2), 4: 1.0, 5: math.sqrt(2) / 2, 6: math.sqrt(13) / 6,
    7: 4 - 2 * math.sqrt(3), 8: (math.sqrt(6) - math.sqrt(2)) / 2, 9: 0.5, 10: 0.421279543,
    11: 0.398207310, 12: math.sqrt(34) / 15, 13: 0.366096007, 14: 0.348915260, 15: 0.341081377,
    16: 1 / 3, 17: 0.306153985, 18: 0.300462606, 19: 0.289541811, 20: 0.286611652,
    21: 0.271812255, 22: 0.267958402, 23: (math.sqrt(6) - math.sqrt(2)) / 4, 24: 0.254333095, 25: 0.25,
    26: 0.238734757, 27: 0.235849528, 28: 0.230535493, 29: 0.226882900, 30: 0.224502964,
}

#: closed-form entries (the rest are from memory)
CLOSED_FORM = {"circle": {2, 3, 4, 5, 6, 7, 8, 9, 11, 13, 18, 19},
               "square": {2, 3, 4, 5, 6, 7, 8, 9, 12, 16, 23, 25}}


def square_ratio(n: int) -> float:
    """Side over circle radius for n equal circles in a square: 2 + 2 / m_n."""
    return 2.0 + 2.0 / SQUARE_POINT_DISTANCE[n]


def disk_case(plate: str, n: int, *, size: float = 200.0, spacing: float = 6.0, margin: float = 4.0,
              slack: float = 1e-3) -> tuple[list[Shape], Container, float]:
    """n disk outlines and the container they go in, sized so the best-known packing just fits.

    As in :mod:`packer.intake.footprint`: each disk of diameter d grows by spacing/2 and
    the plate (diameter or side ``size``, mm) shrinks by margin - spacing/2; grown
    disks of radius a in a container of radius (half side) A fit at the
    best-known ratio when A / a = ratio. The grown disk is a 128-gon around the
    circle (covers it), the container a 512-gon inside the circle (or the square).

    Returns
    -------
    shapes, container, d
        ``d`` is the disk diameter (mm) before growing.
    """
    a_big = size / 2 - margin + spacing / 2
    ratio = CIRCLE_RATIO[n] if plate == "circle" else square_ratio(n) / 2
    a = a_big / (ratio * (1.0 + slack))
    disk = Point(0, 0).buffer(a / math.cos(math.pi / 128), quad_segs=32)
    if plate == "circle":
        region = Point(size / 2, size / 2).buffer(a_big, quad_segs=128)
    else:
        region = box(size / 2 - a_big, size / 2 - a_big, size / 2 + a_big, size / 2 + a_big)
    return [Shape(disk, rotations=(0.0,))] * n, Container(region), 2 * (a - spacing / 2)


def run(plates, ns, *, seconds: float, slack: float):
    """One row per (plate, n): (plate, n, ratio, d, placed, seconds, closed form)."""
    rows = []
    for plate in plates:
        for n in ns:
            shapes, container, d = disk_case(plate, n, slack=slack)
            t0 = time.perf_counter()
            got = fit_on_plate(shapes, container, seconds=seconds, seed=0)
            dt = time.perf_counter() - t0
            ratio = CIRCLE_RATIO[n] if plate == "circle" else square_ratio(n)
            rows.append((plate, n, ratio, d, 0 if got is None else len(got), dt, n in CLOSED_FORM[plate]))
    return rows


def bench_command(argv=None) -> int:
    """``packer bench plates [--n 2 30] [--plates circle square] [--seconds S] [--slack F]``."""
    ap = command_parser("packer bench plates", __doc__.splitlines()[0],
                        ["packer bench plates --n 2 12 --seconds 5",
                         "packer bench plates --plates circle"])
    ap.add_argument("--n", nargs=2, type=int, default=[2, 30], metavar=("FROM", "TO"),
                    help="disk counts from FROM to TO (2 to 30)")
    ap.add_argument("--plates", nargs="+", choices=["circle", "square"], default=["circle", "square"],
                    help="plate shapes to try (default both)")
    ap.add_argument("--seconds", type=float, default=20.0,
                    help="layout budget per case (the disk search gets half; default 20, so at most ~30 s)")
    ap.add_argument("--slack", type=float, default=1e-3, help="relative slack on the disk radius (default 0.001)")
    args = ap.parse_args([a for a in (argv or []) if a != "plates"])
    ns = range(max(2, args.n[0]), min(30, args.n[1]) + 1)
    print("# n equal disks on a 200 mm plate (spacing 6, margin 4), disk size so the best-known packing just")
    print(f"# fits (slack {args.slack:g} on the radius). Best-known ratios: Specht's tables of equal-circle")
    print("# packings in a circle (R/r) and in a square (side/r); 'closed' = closed form, 'memory' = from memory")
    print("| plate | n | best-known ratio | source | disk mm | placed | time s |")
    print("|---|---|---|---|---|---|---|")
    rows = run(args.plates, ns, seconds=args.seconds, slack=args.slack)
    for plate, n, ratio, d, placed, dt, closed in rows:
        print(f"| {plate} | {n} | {ratio:.6f} | {'closed' if closed else 'memory'} | {d:.2f} | "
              f"{'all' if placed == n else 'no'} | {dt:.2f} |", flush=True)
    missed = sum(1 for r in rows if r[4] != r[1])
    print(f"all placed in {len(rows) - missed} of {len(rows)} cases")
    return 0
