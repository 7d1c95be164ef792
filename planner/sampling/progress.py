"""Progress of a sweep on stderr: a live bar on a terminal, whole lines in a log."""

from __future__ import annotations

import time
from collections.abc import Sequence

import sinter
from rich.console import Console
from rich.progress import (
    BarColumn,
    Progress,
    TaskProgressColumn,
    TextColumn,
    TimeRemainingColumn,
)

from planner.sampling.work import WorkItem
from planner.sweep import StoppingRule

#: seconds between progress lines when stderr is a log file or a pipe, not a terminal
LOG_PROGRESS_EVERY_S = 15.0


class SweepProgress:
    """Progress on stderr: fraction of the stopping rule reached, summed over tasks.

    On a terminal a live bar; in a log (stderr not a terminal) a whole line every
    :data:`LOG_PROGRESS_EVERY_S` seconds and one at the end, never cut to the console width.
    """

    def __init__(self, items: Sequence[WorkItem], rule: StoppingRule, console: Console) -> None:
        self.rule = rule
        self.console = console
        self.start = {it.strong_id: (rule.max_shots - it.shots_left, rule.max_errors - it.errors_left)
                      for it in items}
        self.now = dict(self.start)
        self.total = len(items)
        self.shots = 0
        self.errors = 0
        self.t0 = time.monotonic()
        self._live = console.is_terminal and not console.quiet
        self._logged = self.t0
        self._bar = Progress(TextColumn("[bold]sampling[/]"), BarColumn(), TaskProgressColumn(),
                             TextColumn("{task.fields[counts]}"), TimeRemainingColumn(),
                             console=console, disable=not self._live, transient=False)
        self._id = self._bar.add_task("sweep", total=float(len(items)), counts="",
                                      completed=self._done())

    def _counts(self) -> str:
        rate = self.shots / max(time.monotonic() - self.t0, 1e-9)
        left = sum(1 for s, e in self.now.values() if self._fraction(s, e) < 1.0)
        return (f"{self.shots:,} shots, {self.errors:,} errors, {rate:,.0f} shots/s, "
                f"{left} tasks left")

    def log_line(self) -> str:
        """The progress as one plain line (for logs)."""
        share = self._done() / self.total if self.total else 1.0
        return f"sampling: {100 * share:.0f}% of the budget, {self._counts()}"

    def _log(self) -> None:
        self._logged = time.monotonic()
        if not self.console.quiet:
            self.console.print(self.log_line(), soft_wrap=True, markup=False, highlight=False)

    def _fraction(self, shots: int, errors: int) -> float:
        return min(1.0, max(shots / self.rule.max_shots, errors / self.rule.max_errors))

    def _done(self) -> float:
        return sum(self._fraction(s, e) for s, e in self.now.values())

    def add(self, stats: sinter.TaskStats) -> None:
        s, e = self.now.get(stats.strong_id, (0, 0))
        self.now[stats.strong_id] = (s + stats.shots, e + stats.errors)
        self.shots += stats.shots
        self.errors += stats.errors
        if self._live:
            self._bar.update(self._id, completed=self._done(), counts=self._counts())
        elif time.monotonic() - self._logged >= LOG_PROGRESS_EVERY_S:
            self._log()

    def __enter__(self) -> SweepProgress:
        if self._live:
            self._bar.start()
        return self

    def __exit__(self, exc_type: object, *exc: object) -> None:
        if self._live:
            self._bar.stop()
        elif exc_type is None and self.shots:
            self._log()
