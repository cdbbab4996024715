"""What the ``packer`` command shows while it works: stage lines, progress bars, or nothing.

On a terminal, long stages get a live bar (rich): the mesh intake and the
plate files count up, the planning stage shows a spinner with its elapsed time
against the budget. Elsewhere (a log file, CI) each stage is one plain line on
standard error. ``quiet`` shows nothing. Progress never goes to standard
output, which stays for results (and ``--json``).
"""

from __future__ import annotations

import sys

from rich.console import Console
from rich.progress import (BarColumn, MofNCompleteColumn, Progress, SpinnerColumn, TextColumn,
                           TimeElapsedColumn)

__all__ = ["Reporter"]


class Reporter:
    """Stage messages and progress of one command run; use as a context manager."""

    def __init__(self, *, quiet: bool = False, live: bool | None = None) -> None:
        self.quiet = quiet
        self.console = Console(stderr=True)
        self.live = (self.console.is_terminal if live is None else live) and not quiet
        self._bar: Progress | None = None
        self._tasks: dict[str, int] = {}
        self._planning: int | None = None

    def __enter__(self) -> "Reporter":
        if self.live:
            self._bar = Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(),
                                 MofNCompleteColumn(), TimeElapsedColumn(), console=self.console, transient=False)
            self._bar.start()
        return self

    def __exit__(self, *exc) -> None:
        if self._bar is not None:
            self._bar.stop()

    def say(self, message: str) -> None:
        """A stage line (``planning plates over 5 printers (30 s budget)``)."""
        if self.quiet:
            return
        if self._bar is None:
            print(f"  {message}", file=sys.stderr, flush=True)
            return
        self._finish_planning()
        if message.startswith("planning plates"):
            self._planning = self._bar.add_task(message, total=None)
        else:
            self._bar.console.print(f"  {message}")

    def progress(self, stage: str, done: int, total: int) -> None:
        """Count ``done`` of ``total`` for ``stage`` (``meshes``, ``plate files``)."""
        if self._bar is None:
            return
        self._finish_planning()
        if stage not in self._tasks:
            self._tasks[stage] = self._bar.add_task(stage, total=total)
        self._bar.update(self._tasks[stage], completed=done, total=total)

    def _finish_planning(self) -> None:
        if self._planning is not None and self._bar is not None:
            self._bar.update(self._planning, total=1, completed=1)
            self._planning = None
