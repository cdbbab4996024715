"""Planning time counted by the work done, not read off the wall clock.

Every decision the planner takes against its budget (how many ``fits`` calls a
plate gets, whether the runner-up fill rule is built, when merging stops, how
long the CP-SAT steps may run) reads this clock. It advances only by charges
that depend on the day and the budget:

- a layout call is charged the work its answer reports (``Attempt.work_s`` of
  the layout service, :mod:`packer.layouts`: deterministic seconds, the nesting
  engine's work units over their fixed rate plus a fixed overhead per call and
  per copy for the geometry around it);
- a CP-SAT solve is charged the solver's deterministic time.

So the same job, seed and budget give the same plan on a fast or a busy
machine; only the wall time differs. The overhead constants are calibrated so
that the clock and the wall clock agree on an idle development machine
(``packer bench day`` prints both).
"""

from __future__ import annotations

__all__ = ["WorkClock"]


class WorkClock:
    """Seconds of planning work, charged step by step.

    Layout work (:meth:`charge_layout`) and solver work (:meth:`charge`) are summed
    apart and added when read.

    Examples
    --------
    >>> clock = WorkClock()
    >>> clock.charge(1.5)
    >>> clock.charge(0.25)
    >>> clock.now()
    1.75
    """

    def __init__(self) -> None:
        self._charged = 0.0
        self._layout = 0.0

    def charge(self, seconds: float) -> None:
        """Add ``seconds`` (>= 0) of work."""
        self._charged += max(0.0, float(seconds))

    def charge_layout(self, seconds: float) -> None:
        """Add the work of one layout call (``Attempt.work_s``)."""
        self._layout += float(seconds)

    def now(self) -> float:
        """Seconds of work since the clock was made."""
        return self._charged + self._layout

    def past(self, limit: float) -> bool:
        """True once ``limit`` seconds of work are done."""
        return self.now() > limit
