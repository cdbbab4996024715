"""Extras for handing a plan over: one STL per plate, and a zip of every output.

The zip holds the output folder as written (plan.json, plate files, report,
operator sheets, pick list, pictures), paths relative to the folder, entries
sorted and dated to the plan's start so the same plan gives the same archive.
"""

from __future__ import annotations

import zipfile
from pathlib import Path

from packer.output.export import write_plate_file
from packer.output.write import folder_name, mesh_source
from packer.output.plan import Plan

__all__ = ["write_stl_plates", "write_handover_zip"]


def write_stl_plates(plan: Plan, outdir: Path) -> list[Path]:
    """``plates/<id>.stl`` beside each plate's 3MF: all copies of the plate as one STL mesh (mm)."""
    mesh_of = mesh_source({}, outdir)         # repaired meshes are read from the plan's meshes/ folder
    out = []
    for p in plan.plates:
        target = (Path(outdir) / p.file).with_suffix(".stl")
        out.append(write_plate_file(p, target, mesh_of))
    return out


def write_handover_zip(plan: Plan, outdir: Path) -> Path:
    """``<job>-handover.zip`` in ``outdir`` with every file of the folder (older zips, hidden files and
    the run's wall-clock figures left out); the job name is made file-system safe (:func:`folder_name`)."""
    outdir = Path(outdir)
    name = folder_name(plan.job)
    target = outdir / f"{name}-handover.zip"
    stamp = plan.start.timetuple()[:6]
    files = sorted(f for f in outdir.rglob("*") if f.is_file() and f.suffix != ".zip" and not f.is_symlink()
                   and not f.name.startswith(".") and f.name != "run.json")
    tmp = target.with_name(target.name + ".partial")
    with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_DEFLATED) as z:
        for f in files:
            info = zipfile.ZipInfo(f"{name}/{f.relative_to(outdir).as_posix()}", date_time=max(stamp, (1980, 1, 1, 0, 0, 0)))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, f.read_bytes())
    tmp.replace(target)
    return target
