"""An independent check of a fleet plan (:func:`check_plan`): it trusts nothing the planner did."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

from packer.errors import PackerError
from packer.fleet.calendar import is_open
from packer.fleet.records import CopyRef, PlannedPlate, copy_key
from packer.intake.job import Calendar, Printer

__all__ = ["check_plan"]


def check_plan(plates: Sequence[PlannedPlate], unplaced: Sequence[tuple[CopyRef, str]],
               copies: Sequence[CopyRef], printers: Sequence[Printer], *,
               calendar: Calendar, start: datetime) -> None:
    """Check a fleet plan independently of how it was made.

    Every copy exactly once (on a plate or unplaced with a reason); each plate
    of one material its printer runs, starting inside a shift, no earlier than
    ``start`` and its printer's availability, cleared inside one shift, and no
    two plates overlapping on a printer (from start to free).

    Raises
    ------
    PackerError
        Naming the first broken rule (a planner bug).
    """
    seen: dict = {}
    for p in plates:
        for c in p.copies:
            seen[copy_key(c)] = seen.get(copy_key(c), 0) + 1
    for c, reason in unplaced:
        if not reason:
            raise PackerError(f"unplaced copy {copy_key(c)} has no reason")
        seen[copy_key(c)] = seen.get(copy_key(c), 0) + 1
    want = {copy_key(c) for c in copies}
    if set(seen) != want or any(v != 1 for v in seen.values()):
        extra = sorted(k for k, v in seen.items() if v != 1 or k not in want)[:3]
        missing = sorted(want - set(seen))[:3]
        raise PackerError(f"copies not placed exactly once: repeated/unknown {extra}, missing {missing}")
    by_name = {p.name: p for p in printers}
    per_printer: dict = {}
    for p in plates:
        pr = by_name.get(p.printer)
        if pr is None:
            raise PackerError(f"plate {p.id} on unknown printer {p.printer}")
        if any(c.material != p.material for c in p.copies) or p.material not in pr.materials:
            raise PackerError(f"plate {p.id}: material mix or a material {p.printer} does not run")
        if not is_open(calendar, p.start):
            raise PackerError(f"plate {p.id} starts at {p.start}, outside the shifts")
        if p.start < max(start, pr.available_from) or p.end < p.start:
            raise PackerError(f"plate {p.id} starts before its printer is available")
        clear_at = p.free - timedelta(seconds=p.time.clear_s)
        last = p.free - timedelta(microseconds=1) if p.time.clear_s > 0 else clear_at
        if clear_at < p.end or not is_open(calendar, clear_at) or not is_open(calendar, last) \
                or last.date() != clear_at.date():
            raise PackerError(f"plate {p.id} is cleared outside a shift")
        per_printer.setdefault(p.printer, []).append(p)
    for name, ps in per_printer.items():
        ps.sort(key=lambda p: p.start)
        for a, b in zip(ps, ps[1:]):
            if b.start < a.free:
                raise PackerError(f"plates {a.id} and {b.id} overlap on printer {name}")

