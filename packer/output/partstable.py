"""The parts table: what intake found in each mesh, why a part sits on a plate as it does.

One row per mesh file (a plain, JSON-ready dict): format and unit, triangles,
shells, every defect with its class, count and what packer did about it, size
as modelled and as laid flat, volume and the method that gave it, footprint
area, the chosen orientation, and the plate profiles the part fits. ``packer
inspect`` prints it, the plan's report shows it and ``plan.json`` carries it as
``parts``. A refused file has a row too, with the reason.
"""

from __future__ import annotations

from dataclasses import asdict
from pathlib import Path
from typing import Iterable

import numpy as np

from packer.layouts.nested import PlateRule, fits_empty_plate
from packer.intake.mesh.volume import METHODS
from packer.intake.orders import part_key, repaired_files
from packer.intake.parts import Part
from packer.intake.profile import PlateProfile

__all__ = ["part_row", "repair_row", "refused_row", "fitting_profiles", "orientation_of", "parts_table"]


def _mm(values) -> list[float]:
    return [round(float(v), 3) for v in values]


def orientation_of(part: Part, locked: bool) -> str:
    """The pose in words: as modelled, or which way of the file's frame points down."""
    if locked:
        return "as modelled (orientation locked)"
    r = np.asarray(part.to_print, dtype=float)[:3, :3]
    down = r.T @ np.array([0.0, 0.0, -1.0])
    down /= np.linalg.norm(down)
    d = ", ".join(f"{v + 0.0:.3g}" if abs(v) > 5e-4 else "0" for v in down)
    return f"laid flat: the file's direction ({d}) points down"


def fitting_profiles(part: Part, profiles: Iterable[PlateProfile], *, rotations=(0.0, 90.0, 180.0, 270.0),
                     locked: bool = False) -> list[str]:
    """Names of the profiles an empty plate (or volume) of which takes one copy, at their own
    spacing and margin."""
    out = []
    for prof in profiles:
        if prof.technology == "powder":
            inner = np.array(prof.build_volume, dtype=float) - 2 * prof.margin
            dims = np.asarray(part.mesh.extents, dtype=float)
            ok = (all(dims <= inner) or all(dims[[1, 0, 2]] <= inner)) if locked else \
                all(np.sort(dims) <= np.sort(inner))
        else:
            ok = part.height <= prof.build_volume[2] + 1e-9 and \
                fits_empty_plate(part.footprint, tuple(rotations), PlateRule(prof, prof.spacing, prof.margin))
        if ok:
            out.append(prof.name)
    return out


def repair_row(part: Part, repaired_file) -> dict:
    """What repair changed: counts before and after, the file the repaired mesh is written to."""
    fix = part.repair
    return {"file": None if repaired_file is None else Path(repaired_file).as_posix(),
            "changed": list(fix.changed), "left": list(fix.left), "closed": fix.after.closed,
            "holes_filled": fix.holes_filled, "shells_united": fix.united,
            "before": {k: (round(v, 3) if isinstance(v, float) else v) for k, v in asdict(fix.before).items()},
            "after": {k: (round(v, 3) if isinstance(v, float) else v) for k, v in asdict(fix.after).items()}}


def part_row(part: Part, *, profiles: Iterable[PlateProfile] = (), locked: bool = False,
             names: Iterable[str] = (), repaired_file=None) -> dict:
    """The table row of a part that intake accepted.

    ``repaired_file``: where a repaired part's mesh is written, relative to the plan's folder."""
    exam = part.exam
    row = {"file": str(part.source), "parts": sorted(set(names) or {part.name}), "status": "planned"}
    row.update({
        "format": exam.format, "unit": exam.unit, "unit_source": exam.unit_source,
        "mm_per_unit": exam.mm_per_unit, "triangles": exam.triangles, "shells": exam.topology.shells,
        "defects": [asdict(d) for d in exam.defects],
        "size_modelled_mm": _mm(exam.size_mm),
        "volume_method": exam.volume.method, "volume_method_text": METHODS[exam.volume.method],
        "volume_detail": exam.volume.detail, "shared_volume_mm3": round(exam.volume.shared_mm3, 3),
    })
    if part.repair is not None:
        row["status"] = "planned, repaired"
        row["repair"] = repair_row(part, repaired_file)
        row["volume_method"] = part.repair.after.volume_method
        row["volume_method_text"] = METHODS[part.repair.after.volume_method] + " (after repair)"
        for d in row["defects"]:
            d["action"] = "found in the file; the plate file carries the repaired mesh (see repair)"
    row.update({"size_laid_flat_mm": _mm(part.mesh.extents), "volume_mm3": round(part.volume, 3),
                "footprint_mm2": round(float(part.footprint.area), 3),
                "orientation": orientation_of(part, locked),
                "fits": fitting_profiles(part, profiles, locked=locked)})
    return row


def refused_row(path: Path | str, reason: str, *, names: Iterable[str] = ()) -> dict:
    """The table row of a file intake refused."""
    detail = reason.split(": ", 1)[1] if reason.startswith(f"{path}: ") else reason
    return {"file": str(path), "parts": sorted(set(names)), "status": "refused",
            "defects": [{"kind": "refused", "severity": "unusable", "count": 1, "detail": detail,
                         "action": "refused: its copies are not placed"}]}


def parts_table(job, parts: dict, failures: dict) -> tuple[dict, ...]:
    """Rows for every mesh of a job, in the order the job names them.

    Parameters
    ----------
    job
        The :class:`~packer.intake.job.Job`; its fleet's profiles are the ones tried for ``fits``.
    parts, failures
        From :func:`packer.pipeline.intake`: Part per :class:`~packer.intake.identity.PartId`,
        and the reason per ``PartId`` whose mesh was refused.
    """
    profiles = list({p.profile.name: p.profile for p in job.fleet}.values())
    files = repaired_files(job.orders, Path(job.file).parent)
    names: dict = {}
    sources: dict = {}
    strict_only: dict = {}
    for order in job.orders:
        for line in order.lines:
            key = part_key(line, files)
            names.setdefault(key, set()).add(line.part)
            sources[key] = line.mesh
            strict = line.meshes == "strict" and key in parts and bool(parts[key].exam.cautions)
            strict_only[key] = strict_only.get(key, True) and strict
    rows = []
    for key in names:
        if key in parts:
            row = part_row(parts[key], profiles=profiles, locked=key.locked, names=names[key],
                           repaired_file=key.mesh if parts[key].repair is not None else None)
            if strict_only[key]:
                row["status"] = "refused (meshes: strict)"
            rows.append(row)
        elif key in failures:
            rows.append(refused_row(sources[key], failures[key], names=names[key]))
    return tuple(rows)
