"""``packer inspect MESH... [--json]``: the parts table of mesh files, without a job.

Each file is read, triaged and measured as a plan would; the shipped plate
profiles (``plates/`` of the project, or ``--plates DIR``) are tried for
``fits``. Exit code 0 when every file is usable, 3 when some file is refused
(the table says why), 2 on wrong use.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from packer.errors import InputError
from packer.intake.mesh.units import LINE_UNITS
from packer.intake.parts import load_part
from packer.output.partstable import part_row, refused_row
from packer.intake.profile import load_profile

__all__ = ["inspect_command", "inspect_rows", "shipped_profiles"]

SHIPPED = Path(__file__).resolve().parent.parent / "plates"


def shipped_profiles(folder: Path | None = None) -> list:
    """The plate profiles in ``folder`` (default: the project's ``plates/``), by name."""
    folder = Path(folder) if folder else SHIPPED
    out = []
    for path in sorted(folder.glob("*.y*ml")):
        try:
            out.append(load_profile(path))
        except InputError as exc:
            print(f"packer inspect: skipping profile {path}: {exc}", file=sys.stderr)
    return out


def inspect_rows(paths, *, units: str | None = None, locked: bool = False, profiles=()) -> list[dict]:
    """One parts-table row per mesh file (refused files included, with the reason)."""
    rows = []
    for path in paths:
        try:
            part = load_part(path, lock_orientation=locked, units=units)
        except InputError as exc:
            rows.append(refused_row(path, str(exc), names=[Path(path).stem]))
            continue
        rows.append(part_row(part, profiles=profiles, locked=locked))
    return rows


def _size(values) -> str:
    return " x ".join(f"{v:g}" for v in values)


def print_rows(rows: list[dict], out=sys.stdout) -> None:
    """The table for people: one block per file."""
    for row in rows:
        if row["status"] == "refused":
            print(f"{row['file']}: REFUSED: {row['defects'][0]['detail']}", file=out)
            continue
        print(f"{row['file']}: {row['format']}, {row['unit']} ({row['unit_source']}), "
              f"{row['triangles']} triangles, {row['shells']} shell{'s' if row['shells'] != 1 else ''}", file=out)
        print(f"  size as modelled {_size(row['size_modelled_mm'])} mm, laid flat "
              f"{_size(row['size_laid_flat_mm'])} mm; footprint {row['footprint_mm2']:.1f} mm^2", file=out)
        method = row["volume_method_text"] + (f", {row['volume_detail']}" if row["volume_detail"] else "")
        print(f"  volume {row['volume_mm3']:.1f} mm^3 ({method})", file=out)
        print(f"  orientation: {row['orientation']}", file=out)
        print(f"  fits: {', '.join(row['fits']) or 'no shipped profile'}", file=out)
        for d in row["defects"]:
            print(f"  {d['severity']}: {d['kind']} ({d['count']}): {d['detail']}; {d['action']}", file=out)
        if not row["defects"]:
            print("  no defects", file=out)


def inspect_command(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(prog="packer inspect",
                                 description="Read mesh files and print what intake finds (the parts table).")
    ap.add_argument("meshes", nargs="+", help="STL, OBJ, PLY or 3MF files")
    ap.add_argument("--json", action="store_true", help="print the rows as JSON")
    ap.add_argument("--units", choices=sorted(LINE_UNITS), help="unit of files without one (default mm)")
    ap.add_argument("--as-modelled", action="store_true", help="keep the orientation as modelled")
    ap.add_argument("--plates", help="folder of plate profiles to try (default: the shipped plates/)")
    args = ap.parse_args(argv)
    rows = inspect_rows(args.meshes, units=args.units, locked=args.as_modelled,
                        profiles=shipped_profiles(args.plates))
    if args.json:
        print(json.dumps(rows, indent=1))
    else:
        print_rows(rows)
    return 3 if any(r["status"] == "refused" for r in rows) else 0
