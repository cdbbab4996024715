"""What each step of a replan cost: work-clock seconds (deterministic) and wall seconds (figures only)."""

from __future__ import annotations

import time as _time

__all__ = ["Ledger"]


class Ledger:
    """Work-clock seconds per step of a replan (what the steps' layout calls and solvers report;
    the same for the same events, seed and budget), the steps whose solver a wall-clock safety
    net stopped, and wall seconds per step (figures only: no choice reads them)."""

    def __init__(self) -> None:
        self.t0 = self.t = _time.monotonic()
        self.work: dict = {}
        self.wall: dict = {}
        self.nets: list = []

    def step(self, name: str, what=None) -> None:
        """Close step ``name``; ``what``: a :class:`~packer.replan.sequence.Sequenced`, the fleet planner's figures (``work_clock_s``, ``deterministic``)
        or layout work in seconds."""
        now = _time.monotonic()
        self.wall[name] = self.wall.get(name, 0.0) + now - self.t
        self.t = now
        if isinstance(what, dict):
            work, det = what.get("work_clock_s", 0.0), what.get("deterministic", True)
        elif what is None or isinstance(what, (int, float)):
            work, det = float(what or 0.0), True
        else:
            work, det = what.work_s, what.deterministic
        self.work[name] = self.work.get(name, 0.0) + work
        if not det and name not in self.nets:
            self.nets.append(name)

    def total(self) -> float:
        return _time.monotonic() - self.t0
