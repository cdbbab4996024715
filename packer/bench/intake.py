"""``packer bench intake DIR``: intake of a real-parts data set against its published volumes.

DIR holds ``parts.csv`` (columns part, mesh, volume_mm3, support_mm3, ...) and
the meshes it names, as in the public AM production-planning instance set
(84 STL parts with their supports). Every part goes through the whole intake
(read, triage, volume, lay-flat, footprint) in this process, one after
another. The table compares each volume with the published part + support
volume; the summary checks the targets: at most one part refused (and only for
an unusable file), closed meshes within 0.5 %, every mesh within 5 %, intake
of all parts under 60 s, memory under 2 GB, no traceback, every message naming
its file. ``--job FILE`` also writes a job that plans every part once in
powder builds (for ``packer plan`` and the independent plan checker).
``--repair`` repairs every part as ``repair: true`` does (the intake time then
includes the repair) and adds a table of what repair changed, with the
volumes after repair against the published ones; the job it writes asks for
``repair: true`` too.
"""

from __future__ import annotations

import argparse
import csv
import os
import resource
import time
import traceback
from pathlib import Path

from packer.errors import InputError
from packer.intake.parts import load_part

__all__ = ["bench_command", "intake_rows", "write_real_parts_job"]

TARGETS = {"refused": 1, "closed_rel": 0.005, "all_rel": 0.05, "seconds": 60.0, "memory_gb": 2.0}
#: Part 47 of the data set does not match its published row (its box and volume describe
#: another shape, says the data set's README): left out of the volume checks.
EXCLUDED = {"47"}


def _peak_rss_gb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20   # kB on Linux


def intake_rows(folder: Path, *, repair: bool = False) -> list[dict]:
    """One row per part with a mesh: what intake found, its volume, the published one, time
    (with ``repair``: the repaired part, and what repair changed under ``repair``)."""
    rows = []
    with open(folder / "parts.csv", newline="", encoding="utf-8") as fh:
        table = [r for r in csv.DictReader(fh) if r.get("mesh")]
    for rec in table:
        path = folder / rec["mesh"]
        ref = float(rec["volume_mm3"]) + float(rec["support_mm3"])
        row = {"part": rec["part"], "file": str(path), "published_mm3": ref}
        started = time.perf_counter()
        try:
            part = load_part(path, repair=repair)
        except InputError as exc:
            row.update(status="refused", message=str(exc))
        except Exception:      # a traceback is a failed target: record it, keep going
            row.update(status="traceback", message=traceback.format_exc(limit=3))
        else:
            exam = part.exam
            topo = exam.topology
            row.update(status="planned", triangles=exam.triangles, shells=topo.shells,
                       closed=topo.open_edges == 0 and topo.crowded_edges == 0,
                       method=exam.volume.method, volume_mm3=part.volume,
                       shells_sum_mm3=part.volume + exam.volume.shared_mm3,
                       defects=[d.kind for d in exam.defects],
                       messages=[d.detail for d in exam.defects if d.kind == "file content"])
            if part.repair is not None:
                row["repair"] = part.repair
                row["shells_sum_mm3"] = part.repair.before.volume_mm3 + exam.volume.shared_mm3
        row["seconds"] = time.perf_counter() - started
        rows.append(row)
    return rows


def _rel(a: float, b: float) -> float:
    return a / b - 1.0 if b else float("inf")


def _summary(rows: list[dict], wall: float, cpu: float) -> list[tuple[str, str, str, bool]]:
    planned = [r for r in rows if r["status"] == "planned"]
    refused = [r for r in rows if r["status"] == "refused"]
    crashed = [r for r in rows if r["status"] == "traceback"]
    checked = [r for r in planned if r["part"] not in EXCLUDED]
    closed = [r for r in checked if r["closed"]]
    out = [("parts refused (only unusable files)", f"at most {TARGETS['refused']}",
            f"{len(refused)} of {len(rows)}" + (f" ({', '.join(r['part'] for r in refused)})" if refused else ""),
            len(refused) <= TARGETS["refused"])]
    for label, group, limit in (("closed meshes within 0.5 %", closed, TARGETS["closed_rel"]),
                                ("every mesh within 5 %", checked, TARGETS["all_rel"])):
        for key, what in (("volume_mm3", "volume used (overlaps once)"),
                          ("shells_sum_mm3", "sum of shells (as published)")):
            errs = [abs(_rel(r[key], r["published_mm3"])) for r in group]
            ok = sum(e <= limit for e in errs)
            worst = max(errs, default=0.0)
            out.append((f"{label}: {what}", f"{len(group)} of {len(group)}",
                        f"{ok} of {len(group)}, worst {worst:.3%}", ok == len(group)))
    out.append(("intake of all parts, wall clock", f"< {TARGETS['seconds']:g} s",
                f"{wall:.1f} s, cpu {cpu:.1f} s (load {os.getloadavg()[0]:.1f}, {os.cpu_count()} cores)",
                wall < TARGETS["seconds"]))
    peak = _peak_rss_gb()
    out.append(("peak memory (resident)", f"< {TARGETS['memory_gb']:g} GB", f"{peak:.2f} GB",
                peak < TARGETS["memory_gb"]))
    out.append(("tracebacks", "0", str(len(crashed)), not crashed))
    unnamed = [r for r in refused if not r["message"].startswith(r["file"])]
    unnamed += [r for r in planned for m in r["messages"] if r["file"] not in m]
    out.append(("messages that do not name their file", "0", str(len(unnamed)), not unnamed))
    return out


def _print(rows: list[dict], summary, wall: float) -> None:
    print(f"{'part':>4} {'tris':>6} {'shells':>6} {'closed':>6} {'method':<18} {'volume':>11} {'published':>11} "
          f"{'error':>8} {'sum err':>8} {'s':>5}  defects")
    for r in rows:
        if r["status"] != "planned":
            print(f"{r['part']:>4} {r['status'].upper()}: {r['message'].splitlines()[-1][:110]}")
            continue
        note = " (left out: row does not match)" if r["part"] in EXCLUDED else ""
        print(f"{r['part']:>4} {r['triangles']:>6} {r['shells']:>6} {'yes' if r['closed'] else 'no':>6} "
              f"{r['method']:<18} {r['volume_mm3']:>11.1f} {r['published_mm3']:>11.1f} "
              f"{_rel(r['volume_mm3'], r['published_mm3']):>+8.3%} "
              f"{_rel(r['shells_sum_mm3'], r['published_mm3']):>+8.3%} {r['seconds']:>5.2f}  "
              f"{', '.join(r['defects']) or '-'}{note}")
    print()
    print(f"{'target':<58} {'goal':<12} {'measured':<44} met")
    for label, goal, value, ok in summary:
        print(f"{label:<58} {goal:<12} {value:<44} {'yes' if ok else 'NO'}")


def _print_repair(rows: list[dict]) -> None:
    """What repair changed, part by part (parts it left as they were are counted, not listed)."""
    fixed = [r for r in rows if r["status"] == "planned" and "repair" in r]
    changed = [r for r in fixed if r["repair"].changed != ("nothing to repair",)]
    print(f"\nrepair: {len(changed)} of {len(fixed)} parts changed")
    print(f"{'part':>4} {'closed':>6} {'open':>9} {'crowded':>10} {'shells':>7} {'degen':>8} "
          f"{'volume before':>13} {'after':>11} {'published':>11} {'before':>8} {'after':>8} {'s':>5}")
    for r in changed:
        b, a = r["repair"].before, r["repair"].after
        print(f"{r['part']:>4} {'yn'[not b.closed]}->{'yn'[not a.closed]:<3} {b.open_edges:>4}->{a.open_edges:<4} "
              f"{b.crowded_edges:>4}->{a.crowded_edges:<5} {b.shells:>3}->{a.shells:<3} {b.degenerate:>3}->{a.degenerate:<4} "
              f"{b.volume_mm3:>13.1f} {a.volume_mm3:>11.1f} {r['published_mm3']:>11.1f} "
              f"{_rel(b.volume_mm3, r['published_mm3']):>+8.3%} {_rel(a.volume_mm3, r['published_mm3']):>+8.3%} "
              f"{r['seconds']:>5.2f}")
    checked = [r for r in fixed if r["part"] not in EXCLUDED]
    closed = [r for r in checked if r["repair"].after.closed]
    print(f"closed (own vertex indices): {sum(r['repair'].before.closed for r in fixed)} before, "
          f"{len([r for r in fixed if r['repair'].after.closed])} after, of {len(fixed)}; not closed after: "
          f"{', '.join(r['part'] for r in fixed if not r['repair'].after.closed) or 'none'}")
    print(f"degenerate triangles: {sum(r['repair'].before.degenerate for r in fixed)} before, "
          f"{sum(r['repair'].after.degenerate for r in fixed)} after")
    for label, group, limit in (("closed after repair, within 0.5 %", closed, TARGETS["closed_rel"]),
                                ("every mesh after repair, within 5 %", checked, TARGETS["all_rel"])):
        errs = [(abs(_rel(r["volume_mm3"], r["published_mm3"])), r["part"]) for r in group]
        out = [p for e, p in errs if e > limit]
        print(f"{label}: {len(group) - len(out)} of {len(group)}" + (f" (not: {', '.join(out)})" if out else ""))


def write_real_parts_job(rows: list[dict], path: Path, *, plates: Path, repair: bool = False) -> Path:
    """A job planning every usable part once, in PA12 on two powder cells (for the plan checker)."""
    usable = [r for r in rows if r["status"] == "planned"]
    lines = [f"      - {{mesh: '{Path(r['file']).resolve()}', part: part-{r['part']}, quantity: 1, material: PA12}}"
             for r in usable]
    roots = sorted({str(Path(r["file"]).resolve().parent) for r in usable})
    text = "\n".join([
        "# Written by `packer bench intake --job`: every usable part of the real-parts data set once.",
        "name: real-parts", "start: 2026-12-07T07:00", *(["repair: true"] if repair else []),
        f"plates_folder: '{Path(plates).resolve()}'",
        "mesh_roots:", *[f"  - '{root}'" for root in roots],
        "fleet:", "  - {name: cell-a, profile: powder-cell-331}", "  - {name: cell-b, profile: powder-cell-331}",
        "orders:", "  - id: RP-1", "    due: 2026-12-09T17:00", "    lines:", *lines, ""])
    path.write_text(text, encoding="utf-8")
    return path


def bench_command(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(prog="packer bench intake", description=__doc__.split("\n\n")[0])
    ap.add_argument("folder", help="data set folder with parts.csv and the meshes it names")
    ap.add_argument("--job", help="also write a job planning every usable part once (YAML path)")
    ap.add_argument("--plates", default=str(Path(__file__).resolve().parents[2] / "plates"),
                    help="plate profiles for the job (default: the shipped plates/)")
    ap.add_argument("--repair", action="store_true", help="repair every part (as repair: true) and say what changed")
    args = ap.parse_args(argv)
    folder = Path(args.folder)
    started, cpu = time.perf_counter(), time.process_time()
    rows = intake_rows(folder, repair=args.repair)
    wall, cpu = time.perf_counter() - started, time.process_time() - cpu
    summary = _summary(rows, wall, cpu)
    _print(rows, summary, wall)
    if args.repair:
        _print_repair(rows)
    if args.job:
        print(f"job: {write_real_parts_job(rows, Path(args.job), plates=Path(args.plates), repair=args.repair)}")
    return 0 if all(ok for *_, ok in summary) else 1
