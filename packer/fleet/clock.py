"""Planning time counted by the work done, not read off the wall clock.

Every decision the planner takes against its budget (how many ``fits`` calls a
plate gets, whether the runner-up fill rule is built, when merging stops, how
long the CP-SAT steps may run) reads this clock. It advances only by charges
that depend on the day and the budget:

- a ``fits`` call is charged what the layout engine reports through the
  ``work_meter`` the caller passes (deterministic seconds: the nesting engine's
  work units over their fixed rate), plus a fixed overhead per copy for the
  geometry around it; without a meter, the call is charged its allowance;
- a CP-SAT solve is charged the solver's deterministic time.

So the same job, seed and budget give the same plan on a fast or a busy
machine; only the wall time differs. The overhead constants are calibrated so
that the clock and the wall clock agree on an idle development machine
(``packer bench day`` prints both).
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["WorkClock", "WorkMeter"]

#: Deterministic seconds of work the planner's callables have done so far.
WorkMeter = Callable[[], float]


class WorkClock:
    """Seconds of planning work, charged step by step.

    Parameters
    ----------
    meter : callable, optional
        Deterministic seconds done by the callables (``fits``) so far; its
        advance is added to the clock.

    Examples
    --------
    >>> clock = WorkClock()
    >>> clock.charge(1.5)
    >>> clock.charge(0.25)
    >>> clock.now()
    1.75
    """

    def __init__(self, meter: WorkMeter | None = None) -> None:
        self._meter = meter
        self._base = float(meter()) if meter is not None else 0.0
        self._charged = 0.0

    @property
    def metered(self) -> bool:
        """True when the callables report their own work."""
        return self._meter is not None

    def charge(self, seconds: float) -> None:
        """Add ``seconds`` (>= 0) of work."""
        self._charged += max(0.0, float(seconds))

    def now(self) -> float:
        """Seconds of work since the clock was made."""
        extra = float(self._meter()) - self._base if self._meter is not None else 0.0
        return self._charged + extra

    def past(self, limit: float) -> bool:
        """True once ``limit`` seconds of work are done."""
        return self.now() > limit
