"""Fingerprints and per-unit records: what decides that an output is up to date."""

from __future__ import annotations

import hashlib
import json
import time
from pathlib import Path

from .._version import __version__
from ..io import write_text
from .outcomes import UnitOutcome
from .units import Unit

__all__ = ["RECORD_SUFFIX", "unit_fingerprint", "write_record", "read_record", "record_of"]

RECORD_SUFFIX = ".batch.json"


def unit_fingerprint(unit: Unit, input_sha256: str, version: str | None = None) -> str:
    """SHA-256 identifying what a unit's output was made from.

    It covers the input file's content hash, the layer, the grouping column
    and group, the coordinate columns, every effective screen option, whether
    a report is written and how it is drawn, and the pointsift version; it does not cover the
    input's path, so moving the data does not redo finished work.

    Parameters
    ----------
    unit : Unit
    input_sha256 : str
        SHA-256 of the input file's bytes.
    version : str, optional
        pointsift version (the installed one when omitted).

    Returns
    -------
    str
        64 hexadecimal digits.
    """
    record = {
        "input_sha256": input_sha256,
        "layer": unit.layer,
        "by": unit.by,
        "group": unit.group,
        "x": unit.x,
        "y": unit.y,
        "report": unit.report,
        "options": unit.config.as_record(),
        "pointsift": version if version is not None else __version__,
    }
    if unit.report:  # how a report is drawn matters only when one is written
        record["report_options"] = unit.report_config.as_record()
    if unit.command != "screen":
        record["command"] = unit.command
        record["campaign_options"] = unit.campaign.as_record()
    text = json.dumps(record, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def write_record(path: Path, record: dict) -> None:
    """Write a unit's record (``<unit>.batch.json``) atomically."""
    write_text(path, json.dumps(record, indent=2, sort_keys=True, default=str) + "\n")


def read_record(path: Path) -> dict | None:
    """A unit's record, or None when it is missing or unreadable (the unit is then redone)."""
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


def record_of(outcome: UnitOutcome, version: str) -> dict:
    unit = outcome.unit
    return {
        "fingerprint": outcome.fingerprint,
        "input": unit.display,
        "input_sha256": outcome.input_sha256,
        "layer": unit.layer,
        "by": unit.by,
        "group": unit.group,
        "options": unit.config.as_record(),
        "command": unit.command,
        "campaign_options": unit.campaign.as_record() if unit.campaign is not None else None,
        "pointsift": version,
        "counts": outcome.counts,
        "points": outcome.points,
        "screen_seconds": outcome.screen_seconds,
        "output": outcome.output,
        "report": outcome.report,
        "input_crs": outcome.input_crs,
        "extent_lonlat": list(outcome.extent_lonlat) if outcome.extent_lonlat else None,
        "finished_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    }
