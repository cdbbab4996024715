"""Hint-only trials beyond the fill rules, run on the best fill rule's list schedule: the
printers with the largest plate alone, and material choice by scarcity
(:mod:`packer.fleet.scarcity`). Each is a list schedule on capacity-hint plates (no layout
calls), judged against the best fill rule's, and decides how the plates are built."""

from __future__ import annotations

from datetime import datetime

from packer.fleet.builder import Built, build_plates
from packer.fleet.lowfill import plate_area
from packer.fleet.records import copy_key
from packer.fleet.scoring import score_plan
from packer.fleet.view import FleetView

__all__ = ["largest_plates_trial", "spare_trial"]


def spare_trial(view: FleetView, part, best: Built, mode: str, banded: bool) -> tuple[bool, list]:
    """(whether to build with material choice by scarcity, the hint plates later trials are
    compared with).

    ``best`` is the best fill rule's list schedule on hint plates; the same rule is run again
    with the scarcity rule and taken when it scores better by (weighted lateness, finish,
    plates) with no more copies unplaced. Where all the technology's printers run the same
    materials the rule cannot differ, so it is not tried; nor without ``PlannerSettings.scarcity``."""
    idx = {i for c in part for i in view.eligible[copy_key(c)]}
    if not view.settings.scarcity or len({frozenset(view.printers[i].materials) for i in idx}) < 2:
        return False, best.plates
    trial = build_plates(view, None, part, banded=banded, mode=mode, spare=True)
    if score_plan(trial.plates, view.start) < score_plan(best.plates, view.start) and \
            len(trial.unplaced) <= len(best.unplaced):
        return True, trial.plates
    return False, best.plates


def largest_plates_trial(view: FleetView, tech: str, part, best, mode: str, banded: bool, cap: datetime,
                         spare: bool = False) -> frozenset | None:
    """The printers of ``tech`` with the largest plate, when list scheduling on them alone (each
    copy they can print) gives fewer plates than ``best`` (hint plates) with no more weighted
    lateness and a finish within ``cap`` (``finish_slack`` x the finishing bound) or no later
    than on every printer, on hint-only plates: the smaller plates then only add plates."""
    idx = [i for i, p in enumerate(view.printers) if p.profile.technology == tech]
    area = {i: plate_area(view.printers[i].profile) for i in idx}
    top = max(area.values(), default=0.0)
    only = frozenset(i for i in idx if area[i] >= top - 1e-6)
    if not view.settings.largest_plates or len(only) == len(idx):
        return None
    trial = build_plates(view, None, part, banded=banded, mode=mode, only=only, spare=spare)
    lat, fin, n = score_plan(trial.plates, view.start)
    lat0, fin0, n0 = score_plan(best, view.start)
    cap_s = (cap - view.start).total_seconds()
    return only if lat <= lat0 and fin <= max(fin0, cap_s) and n < n0 \
        and not trial.unplaced else None
