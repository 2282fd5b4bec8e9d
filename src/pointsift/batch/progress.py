"""Progress reporters of a batch run: silent, plain lines, or a bar on a terminal."""

from __future__ import annotations

import sys
import time

from ..vocabulary import STATUSES
from .outcomes import DONE, FAILED, OUTCOMES, SKIPPED, UnitOutcome

__all__ = ["SilentProgress", "LineProgress", "RichProgress", "make_progress"]


class SilentProgress:
    """Progress reporter that says nothing (``-q``)."""

    def start(self, total: int) -> None:
        """Called once with the number of units."""

    def advance(self, outcome: UnitOutcome) -> None:
        """Called once per finished unit."""

    def note(self, text: str) -> None:
        """A message for the user (e.g. how Ctrl-C is handled)."""

    def close(self) -> None:
        """Called at the end."""


class LineProgress(SilentProgress):
    """One plain log line per unit, for logs and pipes."""

    def __init__(self, stream=None) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.total = 0
        self.count = 0
        self.started = time.perf_counter()

    def start(self, total: int) -> None:
        self.total = total
        self.started = time.perf_counter()
        self._write(f"pointsift batch: {total} units")

    def advance(self, outcome: UnitOutcome) -> None:
        self.count += 1
        unit = outcome.unit
        text = f"[{self.count}/{self.total}] {outcome.outcome} {unit.name}"
        if outcome.outcome in (DONE, SKIPPED) and outcome.counts:
            text += " (" + ", ".join(f"{outcome.counts.get(s, 0)} {s}" for s in STATUSES) + ")"
        if outcome.outcome == DONE:
            text += f" {outcome.seconds:.2f} s"
        if outcome.message:
            text += f": {outcome.message}"
        self._write(text)

    def note(self, text: str) -> None:
        self._write(text)

    def _write(self, text: str) -> None:
        print(text, file=self.stream, flush=True)


class RichProgress(SilentProgress):
    """A progress bar with counts per outcome and the rate, for terminals."""

    def __init__(self, stream=None) -> None:
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeElapsedColumn,
            TimeRemainingColumn,
        )

        self.console = Console(file=stream if stream is not None else sys.stderr)
        self.progress = Progress(
            TextColumn("[bold]batch"),
            BarColumn(),
            MofNCompleteColumn(),
            TextColumn("{task.fields[tally]}"),
            TextColumn("{task.fields[rate]}"),
            TimeElapsedColumn(),
            TimeRemainingColumn(),
            console=self.console,
            transient=False,
        )
        self.tally = {word: 0 for word in OUTCOMES}
        self.task = None
        self.started = time.perf_counter()

    def _fields(self) -> dict:
        elapsed = max(time.perf_counter() - self.started, 1e-9)
        finished = sum(self.tally.values())
        return {
            "tally": f"{self.tally[DONE]} done, {self.tally[SKIPPED]} up to date, {self.tally[FAILED]} failed",
            "rate": f"{finished / elapsed:.1f}/s",
        }

    def start(self, total: int) -> None:
        self.started = time.perf_counter()
        self.progress.start()
        self.task = self.progress.add_task("batch", total=total, **self._fields())

    def advance(self, outcome: UnitOutcome) -> None:
        self.tally[outcome.outcome] += 1
        if outcome.outcome == FAILED:
            self.console.print(f"[red]failed[/red] {outcome.unit.name}: {outcome.message}", markup=True,
                               highlight=False)
        self.progress.update(self.task, advance=1, **self._fields())

    def note(self, text: str) -> None:
        self.console.print(text, markup=False, highlight=False)

    def close(self) -> None:
        self.progress.stop()


def make_progress(quiet: bool = False, stream=None) -> SilentProgress:
    """Choose a progress reporter: silent, a bar on a terminal, else plain lines.

    Parameters
    ----------
    quiet : bool
        Say nothing.
    stream : file, optional
        Where to write (standard error by default).
    """
    if quiet:
        return SilentProgress()
    stream = stream if stream is not None else sys.stderr
    if getattr(stream, "isatty", lambda: False)():
        return RichProgress(stream)  # rich is a dependency: no fallback needed
    return LineProgress(stream)
