"""The planner's budget: the work clock, the layout calls it pays for, the solver time it gives.

One :class:`Budget` is made per plan once the per-call allowance is known and handed to
every step that asks the layout engine or a CP-SAT model for anything. Every budget
decision reads the work clock (:mod:`packer.fleet.clock`), never the wall clock, so the
same day and budget give the same plan on any machine; the steps a decision shortened
are recorded in ``cuts``.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field

from packer.fleet.clock import WorkClock
from packer.fleet.records import PlannerSettings
from packer.fleet.schedule import ScheduleSettings
from packer.layouts import LayoutService

__all__ = ["Budget", "CPSAT_WALL_PER_DET", "wall_net"]

#: Work-clock seconds charged per unit of CP-SAT deterministic time. Its wall time per
#: unit was 1.5-5 s on the two-core development machine (model loading and presolve
#: count little in deterministic time), so the work clock follows the wall clock there.
CPSAT_WALL_PER_DET = 2.5


def wall_net(limit_s: float, det_limit: float) -> float:
    """Wall-clock limit of a CP-SAT solve: a safety net far above its deterministic limit.

    The solve stops on its deterministic time; the wall clock only stops it on a
    machine many times slower than the one the efforts were set on.
    """
    return max(limit_s, 12.0 * det_limit + 2.0)


@dataclass
class Budget:
    """Work clock, layout service and allowances of one plan.

    ``fit_allowance``: seconds each layout call may use (None: the calls are not told);
    ``hard_end``: work-clock time of the whole budget. ``fits_calls`` and ``fits_s`` count
    the layout calls and their wall seconds (statistics; ``fits_calls`` also estimates the
    cost of a call), ``cuts`` the budget decisions that shortened a step. ``rates``: profile
    name -> work per copy of its last layout call, by which :meth:`affords` predicts what the
    next call costs (a powder packing is charged per body whatever its allowance, so a call
    on a whole build can cost many allowances).
    """

    settings: PlannerSettings
    layouts: LayoutService
    clock: WorkClock = field(default_factory=WorkClock)
    fit_allowance: float | None = None
    hard_end: float = math.inf
    fits_calls: int = 0
    fits_s: float = 0.0
    cuts: list = field(default_factory=list)
    rates: dict = field(default_factory=dict)

    def past(self, deadline: float, what: str) -> bool:
        """True once the work clock passed ``deadline`` (seconds of planning work); the
        step it shortened (``what``) is recorded in ``cuts``."""
        if self.clock.past(deadline):
            if what not in self.cuts:
                self.cuts.append(what)
            return True
        return False

    def predict(self, printer, n: int) -> float:
        """Work (s) a layout call of ``n`` copies on ``printer`` is expected to cost: ``n`` x the
        work per copy of the last call on its profile (0 before any call)."""
        return self.rates.get(printer.profile.name, 0.0) * n

    def affords(self, printer, n: int, deadline: float, what: str) -> bool:
        """True when a layout call of ``n`` copies on ``printer`` is expected to end by
        ``deadline`` on the work clock (:meth:`predict`); else False, recorded in ``cuts`` as
        ``what``. So a call that cannot finish in its share is not started."""
        if self.clock.now() + self.predict(printer, n) <= deadline:
            return True
        self.past(-math.inf, what)
        return False

    def timed_fill(self, printer, copies, must: int):
        """Ask the pool fill with the same allowance as a ``fits`` call; (layout, kept) or None."""
        allow = self._allowance()
        got = self._layout_call(printer, len(copies), lambda: self.layouts.fill(printer, copies, must=must,
                                                                                 seconds=allow))
        return None if got.layout is None else (got.layout, list(got.chosen))

    def timed_fits(self, printer, copies):
        """Ask the layout service for a layout of every copy, telling it the seconds it may use.

        The allowance is fixed from the budget before any call; when the work clock
        leaves less than ``fits_reserve_calls`` allowances before the end of the
        budget, it is cut to share what is left (recorded in ``cuts``). Returns the
        layout or None.
        """
        allow = None if self.fit_allowance is None else self._allowance()
        return self._layout_call(printer, len(copies), lambda: self.layouts.fits(printer, copies, seconds=allow)).layout

    def _allowance(self) -> float:
        """Seconds one layout call may use: fixed by the budget, cut near its end."""
        allow = self.fit_allowance if self.fit_allowance is not None else self.settings.min_fit_s
        left = self.hard_end - self.clock.now()
        reserve = self.settings.fits_reserve_calls
        if left < reserve * allow:
            self.past(-math.inf, "fits allowance cut near the end of the budget")
            # not below half the allowance: a layout given too little time fails and
            # leaves an under-filled plate, which costs more than the seconds saved
            allow = max(self.settings.min_fit_s, 0.5 * allow, left / reserve)
        return allow

    def _layout_call(self, printer, n: int, call):
        """Run one layout call (``fits`` or the pool fill) of ``n`` copies on ``printer``: count
        it, time it, charge the work clock the work the answer reports and learn its work per copy."""
        t = _time.monotonic()
        self.fits_calls += 1
        got = call()
        self.fits_s += _time.monotonic() - t
        self.clock.charge_layout(got.work_s)
        self.rates[printer.profile.name] = got.work_s / max(1, n)
        return got

    def solver_settings(self, budget_s: float, det_limit: float, seed: int) -> ScheduleSettings:
        """CP-SAT settings for a solve that may use ``budget_s`` work-clock seconds and at
        most ``det_limit`` deterministic units; the wall clock is only a far safety net."""
        det = min(det_limit, budget_s / CPSAT_WALL_PER_DET)
        return ScheduleSettings(time_limit_s=wall_net(budget_s, det), deterministic_limit=det,
                                workers=self.settings.workers, seed=seed, log=self.settings.log)

    def charge_solve(self, ans, solver: ScheduleSettings) -> None:
        """Charge a solve's deterministic time (its whole limit when it gave no answer)."""
        used = ans.det_s if ans is not None else solver.deterministic_limit
        self.clock.charge(CPSAT_WALL_PER_DET * used)
