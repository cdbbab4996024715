"""Writing a finished plan: plan.json, plate files, pictures and reports, all or nothing.

Every plan (and every replanned version) is written into a temporary folder
beside its target, ``.NAME.partial``, and moved into place in one rename when
it is complete (:class:`StagedFolder`); an older plan in the target is replaced
only then, by an atomic exchange of the two folders where the system offers
one (Linux ``renameat2``). A run killed at any moment leaves the target holding
the complete old plan or the complete new one.

Meshes repaired on request are written into the same folder, ``meshes/<stem>-repaired.3mf``
(:func:`write_repaired`), before the plate files that carry them; plan.json names them there.

Each written folder carries ``manifest.json``, the list of files packer wrote
there. When a plan is replaced, packer deletes exactly those files (and the
replanned versions ``vN/`` and the ``latest`` pointer beside them); files
someone else put into the folder are moved into the new plan's folder, never
deleted.
"""

from __future__ import annotations

import ctypes
import hashlib
import json
import os
import re
import shutil
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Callable

import numpy as np
import trimesh

from packer import __version__
from packer.errors import InputError
from packer.output.export import write_plate_file
from packer.intake.mesh.repair import DECIMALS
from packer.intake.cache import CACHE_DIR, store_parts
from packer.intake.parts import load_mesh
from packer.output.plan import write_plan_json
from packer.output.threemf import MeshObject, package_3mf
from packer.output.report import write_reports
from packer.output.report.views import plate_views

__all__ = ["write_outputs", "folder_name", "StagedFolder", "check_target", "remove_written", "MANIFEST",
           "repaired_meshes", "write_repaired", "mesh_source", "PlateFiles", "write_plate_files", "write_run_json"]

MANIFEST = "manifest.json"
_MARKER = ".packer-partial"          # inside a staging folder until it is complete
#: What packer writes into an output folder, for folders from before manifests were kept.
_LEGACY = re.compile(r"(plan\.json|run\.json|report\.html|report\.md|picklist\.csv|changes\.md"
                     r"|[^/]+-handover\.zip|operator-sheets\.(html|csv)|plates/[^/]+\.(3mf|stl)|views/[^/]+\.svg)")
_VERSION = re.compile(r"v\d+")


def folder_name(job_name: str, *, limit: int = 80) -> str:
    """A file-system-safe folder name for a job name: never a path, never hidden.

    Letters, digits, ``.``, ``_`` and ``-`` are kept, anything else becomes ``-``;
    a name that had to change gets 8 hex digits of its SHA-256 appended, so two
    different names never share a folder.
    """
    safe = re.sub(r"[^A-Za-z0-9._-]+", "-", job_name).strip(".-_")[:limit] or "job"
    if safe != job_name:
        safe += "-" + hashlib.sha256(job_name.encode("utf-8", "surrogatepass")).hexdigest()[:8]
    return safe


def _packer_files(folder: Path) -> list[str] | None:
    """Files (relative, posix) packer wrote in ``folder``; None if it shows no sign of packer."""
    manifest = folder / MANIFEST
    if manifest.is_file() and not manifest.is_symlink():
        try:
            data = json.loads(manifest.read_text(encoding="utf-8"))
            files = [str(f) for f in data["files"]]
        except (OSError, ValueError, KeyError, TypeError):
            return None
        return [f for f in files if _is_inside(f)] + [MANIFEST]
    plan = folder / "plan.json"
    try:
        legacy = plan.is_file() and {"plates", "unplaced"} <= set(json.loads(plan.read_text(encoding="utf-8")))
    except (OSError, ValueError, TypeError):
        legacy = False
    if not legacy:
        return None
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*")
                  if (p.is_file() or p.is_symlink()) and _LEGACY.fullmatch(p.relative_to(folder).as_posix()))


def _is_inside(rel: str) -> bool:
    parts = Path(rel).parts
    return bool(parts) and not Path(rel).is_absolute() and ".." not in parts


def remove_written(folder: Path) -> list[Path]:
    """Delete what packer wrote in ``folder`` (by its manifest); return what is left.

    Also removes replanned versions ``vN/`` (by their own manifests) and the
    ``latest`` pointer. Folders left empty are removed, ``folder`` too.
    """
    folder = Path(folder)
    for rel in _packer_files(folder) or []:
        p = folder / rel
        if p.is_symlink() or p.is_file():
            p.unlink()
    for sub in sorted(folder.iterdir()) if folder.is_dir() else []:
        if _VERSION.fullmatch(sub.name) and sub.is_dir() and not sub.is_symlink():
            remove_written(sub)
        elif sub.name == "latest" and _is_pointer(sub):
            sub.unlink()
    for d in sorted((p for p in folder.rglob("*") if p.is_dir() and not p.is_symlink()), reverse=True):
        if not any(d.iterdir()):
            d.rmdir()
    if folder.is_dir() and not any(folder.iterdir()):
        folder.rmdir()
        return []
    return sorted(folder.rglob("*")) if folder.is_dir() else []


def _is_pointer(p: Path) -> bool:
    """``latest``: a link to ``.`` or ``vN``, or the small text file that stands in for one."""
    if p.is_symlink():
        return os.readlink(p) in (".",) or bool(_VERSION.fullmatch(os.readlink(p)))
    try:
        return p.is_file() and p.stat().st_size < 64 and bool(
            re.fullmatch(r"(\.|v\d+)\n?", p.read_text(encoding="utf-8")))
    except (OSError, UnicodeDecodeError):
        return False


def check_target(target: Path, *, replace: bool) -> None:
    """Refuse a target folder packer must not write into.

    Raises
    ------
    InputError
        The target is a link or a file, holds a plan and ``replace`` is off, or
        holds files packer did not write (and no plan).
    """
    target = Path(target)
    if target.is_symlink() or (target.exists() and not target.is_dir()):
        raise InputError(f"{target}: not a folder (a file or a link); give -o a new or empty folder")
    if not target.is_dir() or not any(target.iterdir()):
        return
    if (target / "plan.json").exists() and not replace:
        raise InputError(f"{target}: a plan is already there; use --force to replace it or -o for another folder")
    if _packer_files(target) is None:
        raise InputError(f"{target}: holds files packer did not write; give -o a new or empty folder")


def _exchange(a: Path, b: Path) -> bool:
    """Swap two folders in one atomic step (Linux renameat2 RENAME_EXCHANGE); False if not offered."""
    try:
        fn = ctypes.CDLL(None, use_errno=True).renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    return fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0


class StagedFolder:
    """A folder written beside its target and moved into place in one rename.

    ``work`` is where to write; :meth:`commit` lists the files in
    ``manifest.json`` and puts the folder in place, replacing an older packer
    folder there (``replace``); :meth:`abort` removes the work folder.
    """

    def __init__(self, target: Path, *, replace: bool = False) -> None:
        self.target = Path(target)
        check_target(self.target, replace=replace)
        self.work = self.target.with_name(f".{self.target.name}.partial")
        self.old = self.target.with_name(f".{self.target.name}.old")
        self._recover()
        self.work.mkdir(parents=True)
        (self.work / _MARKER).write_text("packer is writing here\n", encoding="utf-8")

    def _recover(self) -> None:
        """Clear what a killed run left beside the target (only what packer wrote)."""
        if self.old.is_dir() and not self.target.exists():
            os.rename(self.old, self.target)        # killed between the two renames of a fallback swap
        for stale in (self.work, self.old):
            if not stale.is_dir() or stale.is_symlink():
                continue
            if (stale / _MARKER).is_file():
                shutil.rmtree(stale)                # an unfinished plan: all of it is packer's
            elif remove_written(stale):
                raise InputError(f"{stale}: left by an interrupted run and holds files packer did not write; "
                                 "move them away")

    def commit(self) -> Path:
        """Write the manifest and move the folder into place; returns the target."""
        (self.work / _MARKER).unlink()
        files = sorted(p.relative_to(self.work).as_posix() for p in self.work.rglob("*")
                       if p.is_file() and not p.is_symlink())
        (self.work / MANIFEST).write_text(json.dumps({"written_by": f"packer {__version__}", "files": files},
                                                     indent=1) + "\n", encoding="utf-8")
        self.target.parent.mkdir(parents=True, exist_ok=True)
        if not self.target.exists():
            os.rename(self.work, self.target)
            return self.target
        if _exchange(self.work, self.target):
            old = self.work
        else:
            os.rename(self.target, self.old)
            os.rename(self.work, self.target)
            old = self.old
        self._carry_over(old)
        remove_written(old)
        return self.target

    def _carry_over(self, old: Path) -> None:
        """Move files someone else put into the old folder to the same place in the new one."""
        ours = set(_packer_files(old) or [])
        for p in sorted(old.rglob("*")):
            rel = p.relative_to(old)
            top = rel.parts[0]
            if p.is_dir() and not p.is_symlink() or rel.as_posix() in ours:
                continue
            if (_VERSION.fullmatch(top) and (old / top).is_dir()) or (top == "latest" and _is_pointer(old / top)):
                continue
            dest = self.target / rel
            if not dest.exists() and not dest.is_symlink():
                dest.parent.mkdir(parents=True, exist_ok=True)
                os.rename(p, dest)

    def abort(self) -> None:
        if self.work.is_dir() and (self.work / _MARKER).is_file():
            shutil.rmtree(self.work)


def repaired_meshes(parts: dict) -> dict[Path, trimesh.Trimesh]:
    """The repaired meshes of a plan's parts (mm), by their file relative to the plan's folder."""
    return {Path(key[0]): trimesh.Trimesh(vertices=np.array(part.repair.vertices), faces=np.array(part.repair.faces),
                                          process=False)
            for key, part in parts.items() if part.repair is not None and not Path(key[0]).is_absolute()}


def write_repaired(meshes: dict[Path, trimesh.Trimesh], work: Path) -> list[Path]:
    """Write each repaired mesh as a 3MF file (mm; 3MF keeps the vertex indices, so the
    closed mesh stays closed as written) into ``work``, confined to ``work/meshes/``."""
    out = []
    inside = (Path(work) / "meshes").resolve()
    for rel, mesh in sorted(meshes.items(), key=lambda kv: str(kv[0])):
        target = Path(work) / rel
        if target.resolve().parent != inside:
            raise InputError(f"{rel}: a repaired mesh must be written into the plan's meshes/ folder")
        target.parent.mkdir(parents=True, exist_ok=True)
        meta = {"Title": f"repaired mesh {rel.stem}", "Application": f"packer {__version__}"}
        target.write_bytes(package_3mf([MeshObject(1, rel.stem, mesh.vertices, mesh.faces, decimals=DECIMALS)], meta))
        out.append(target)
    return out


def mesh_source(meshes: dict[Path, trimesh.Trimesh], root: Path | None = None) -> Callable[[Path], trimesh.Trimesh]:
    """The mesh a placed copy's ``mesh`` names: a repaired one from ``meshes``, else the file
    (a relative path from ``root``, the plan's folder), read once."""
    load = lru_cache(maxsize=None)(load_mesh)

    def mesh_of(path: Path) -> trimesh.Trimesh:
        path = Path(path)
        if path in meshes:
            return meshes[path]
        return load(path if path.is_absolute() or root is None else Path(root) / path)
    return mesh_of


def write_outputs(outcome, outdir: Path, *, say: Callable[[str], None] = lambda s: None,
                  progress: Callable[[str, int, int], None] | None = None, replace: bool = False,
                  extras: Callable[[Path], dict[str, Path]] | None = None) -> dict[str, Path]:
    """Write every output of a plan into ``outdir``, all at once (see the module docstring).

    ``replace``: an older plan in ``outdir`` (and its replanned versions) may be replaced.
    ``progress("plate files", done, total)``, when given, is called after each plate.
    ``extras(work)``, when given, writes more files into the staged folder before it is
    moved into place, and returns their paths by name.
    """
    outdir = Path(outdir)
    staged = StagedFolder(outdir, replace=replace)
    try:
        files = _write_all(outcome, staged.work, say=say, progress=progress)
        if extras is not None:
            files.update(extras(staged.work))
        staged.commit()
    except BaseException:
        staged.abort()
        raise
    return {k: outdir / Path(v).relative_to(staged.work) for k, v in files.items()}


@dataclass(frozen=True)
class PlateFiles:
    """What :func:`write_plate_files` wrote: views per plate id, repaired meshes written, and of
    the plates copied from an earlier version, how many and how many came out different."""

    views: dict
    repaired: tuple
    copied: int = 0
    rewritten: int = 0


def write_plate_files(plan, work: Path, *, parts: dict, printers, copy_from: dict | None = None,
                      progress: Callable[[str, int, int], None] | None = None) -> PlateFiles:
    """Plate files, repaired meshes and plate views of ``plan`` into the staged folder ``work``.

    ``parts``: Part per :class:`~packer.intake.identity.PartId`; ``copy_from``: plate id ->
    the file of an earlier version to copy byte for byte instead of exporting (a replanned
    plate whose contents did not change). ``progress("plate files", done, total)`` after each.
    """
    (work / "plates").mkdir(parents=True, exist_ok=True)
    repaired = repaired_meshes(parts)
    written = write_repaired(repaired, work)
    mesh_of = mesh_source(repaired)
    footprint_of = lambda c: (parts[c.part_id].footprint, parts[c.part_id].to_print)  # noqa: E731
    profiles = {p.name: p.profile for p in printers}
    views, copied, rewritten = {}, 0, 0
    for plate in plan.plates:
        src = (copy_from or {}).get(plate.id)
        if src is not None:
            shutil.copyfile(src, work / plate.file)
            copied += 1
            rewritten += (work / plate.file).read_bytes() != Path(src).read_bytes()
        else:
            write_plate_file(plate, work / plate.file, mesh_of, version=plan.version)
        views[plate.id] = plate_views(plate, profiles[plate.printer], [o.order for o in plan.orders],
                                      footprint_of=footprint_of, mesh_of=mesh_of)
        if progress is not None:
            progress("plate files", len(views), len(plan.plates))
    return PlateFiles(views, tuple(written), copied, rewritten)


def write_run_json(run: dict, work: Path) -> Path | None:
    """Wall-clock figures of the run beside plan.json (never in it: plan.json depends on nothing
    but the job, the seed and the budget)."""
    if not run:
        return None
    (work / "run.json").write_text(json.dumps(run, indent=1, sort_keys=True) + "\n", encoding="utf-8")
    return work / "run.json"


def _write_all(outcome, work: Path, *, say: Callable[[str], None],
               progress: Callable[[str, int, int], None] | None) -> dict[str, Path]:
    plan, job = outcome.plan, outcome.job
    got = write_plate_files(plan, work, parts=outcome.parts, printers=outcome.printers, progress=progress)
    written = got.repaired
    say(f"wrote {len(plan.plates)} plate files" + (f" and {len(written)} repaired meshes" if written else ""))
    files = {"plan": write_plan_json(plan, work)}
    files.update({f"repaired:{p.name}": p for p in written})
    files.update(write_reports(plan, work, views=got.views, printers=[p.name for p in outcome.printers],
                               calendar=job.calendar))
    run = write_run_json(outcome.run, work)
    if run is not None:
        files["run"] = run
    store_parts(work / CACHE_DIR, outcome.parts.values())     # read back by a replan instead of examined again
    return files
