"""Outcome words, exit codes and the result records of a batch run."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the unit type, for annotations only (units imports this module's words)
    from .units import Unit

__all__ = [
    "EXIT_OK",
    "EXIT_SOME_FAILED",
    "EXIT_BAD_PLAN",
    "EXIT_INTERRUPTED",
    "DONE",
    "SKIPPED",
    "FAILED",
    "NOT_RUN",
    "OUTCOMES",
    "UnitOutcome",
    "BatchResult",
]

#: Every unit done or already up to date.
EXIT_OK = 0
#: The batch finished but at least one unit failed (see the index).
EXIT_SOME_FAILED = 3
#: The plan cannot be used (same code as any usage error).
EXIT_BAD_PLAN = 2
#: Stopped by Ctrl-C; finished outputs are kept (128 + SIGINT, common practice).
EXIT_INTERRUPTED = 130

DONE = "done"
SKIPPED = "skipped-up-to-date"
FAILED = "failed"
NOT_RUN = "not-run"
#: Outcome words written to the index.
OUTCOMES = (DONE, SKIPPED, FAILED, NOT_RUN)


@dataclass
class UnitOutcome:
    """What happened to one unit; one row of the batch index."""

    unit: Unit
    outcome: str
    message: str = ""
    counts: dict = field(default_factory=dict)
    points: int | None = None
    seconds: float = 0.0
    screen_seconds: float | None = None
    output: str = ""
    report: str = ""
    input_sha256: str = ""
    fingerprint: str = ""
    input_crs: str = ""
    extent_lonlat: tuple[float, float, float, float] | None = None


@dataclass
class BatchResult:
    """Outcome of a batch run.

    Attributes
    ----------
    outcomes : list of UnitOutcome
        One per unit, in plan order.
    seconds : float
        Wall-clock time of the whole run.
    index_csv, index_gpkg : Path
        The batch index files.
    interrupted : bool
        True when Ctrl-C stopped the run.
    """

    outcomes: list[UnitOutcome]
    seconds: float
    index_csv: Path | None = None
    index_gpkg: Path | None = None
    interrupted: bool = False

    def tally(self) -> dict[str, int]:
        """Number of units per outcome word."""
        tally = {word: 0 for word in OUTCOMES}
        for item in self.outcomes:
            tally[item.outcome] += 1
        return tally

    @property
    def exit_code(self) -> int:
        """0 all done or up to date, 3 some failed, 130 interrupted."""
        if self.interrupted:
            return EXIT_INTERRUPTED
        return EXIT_SOME_FAILED if any(o.outcome == FAILED for o in self.outcomes) else EXIT_OK

    def summary(self) -> str:
        """One line saying what happened."""
        tally = self.tally()
        parts = [f"{tally[w]} {w}" for w in OUTCOMES if tally[w] or w in (DONE, FAILED)]
        text = f"{len(self.outcomes)} units: {', '.join(parts)} in {self.seconds:.1f} s"
        if self.index_csv is not None:
            text += f"; index: {self.index_csv}"
        if self.interrupted:
            text += " (stopped by Ctrl-C)"
        return text
