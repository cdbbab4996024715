"""Writing a finished plan: plan.json, plate files, pictures and reports."""

from __future__ import annotations

import shutil
from functools import lru_cache
from pathlib import Path
from typing import Callable

from packer.export import write_plate_file
from packer.parts import load_mesh
from packer.plan import write_plan_json
from packer.report import write_reports
from packer.report.views import plate_views

__all__ = ["write_outputs"]


def write_outputs(outcome, outdir: Path, *, say: Callable[[str], None] = lambda s: None,
                  progress: Callable[[str, int, int], None] | None = None) -> dict[str, Path]:
    """Write every output of a plan into ``outdir`` (replacing an older plan there).

    ``progress("plate files", done, total)``, when given, is called after each plate.
    """
    outdir = Path(outdir)
    plan, job = outcome.plan, outcome.job
    # a new first plan replaces the old one and every replanned version of it
    for stale in ["plates", "views", *(p.name for p in outdir.glob("v[0-9]*"))]:
        if (outdir / stale).is_dir():
            shutil.rmtree(outdir / stale)
    for stale in ("latest", "changes.md"):
        if (outdir / stale).is_symlink() or (outdir / stale).is_file():
            (outdir / stale).unlink()
    (outdir / "plates").mkdir(parents=True, exist_ok=True)

    mesh_of = lru_cache(maxsize=None)(load_mesh)
    parts = outcome.parts
    footprint_of = lambda c: (parts[(c.mesh, c.locked)].footprint, parts[(c.mesh, c.locked)].to_print)  # noqa: E731
    profiles = {p.name: p.profile for p in outcome.printers}

    views = {}
    for plate in plan.plates:
        write_plate_file(plate, outdir / plate.file, mesh_of)
        views[plate.id] = plate_views(plate, profiles[plate.printer], [o.order for o in plan.orders],
                                      footprint_of=footprint_of, mesh_of=mesh_of)
        if progress is not None:
            progress("plate files", len(views), len(plan.plates))
    say(f"wrote {len(plan.plates)} plate files")
    files = {"plan": write_plan_json(plan, outdir)}
    files.update(write_reports(plan, outdir, views=views, printers=[p.name for p in outcome.printers],
                               calendar=job.calendar))
    return files

