"""Batch screening: many files, layers and groups, unattended and resumable.

A batch is described by a *plan*: a TOML file (or the equivalent command-line
arguments) listing inputs and the screen options for each. The plan is
validated completely before any work starts. Each input is then expanded into
*units*, the things that are screened on their own and give one output
GeoPackage each:

* a file (CSV, Shapefile, GeoParquet, ...): one unit;
* a GeoPackage: one unit per layer (all layers, or the layers named);
* a layer split by a column (``by = "network_id"``): one unit per distinct
  value of that column.

Outputs go to one directory: ``<unit>.gpkg`` per unit (plus ``<unit>.html``
when reports are asked for and available), a small ``<unit>.batch.json`` beside each output
recording how it was made, and the batch index ``batch-index.csv`` /
``batch-index.gpkg`` listing every unit with its outcome.

A unit is skipped (``skipped-up-to-date``) when its output and record exist
and the record's fingerprint (SHA-256 of the input content, the effective
options and the pointsift version) matches the current one. A unit that
fails is recorded with its message and the batch carries on.

Exit codes (see :func:`run_batch` and ``docs/batch.md``): 0 every unit done or
up to date, 3 some units failed, 2 unusable plan, 130 stopped by Ctrl-C.
"""

from __future__ import annotations

import concurrent.futures as cf
import difflib
import glob
import hashlib
import json
import logging
import math
import multiprocessing
import os
import re
import shutil
import signal
import sys
import threading
import time
import tomllib
import types
import typing
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from .config import ScreenConfig, parse_length
from .errors import ConfigError, PointsiftError

__all__ = [
    "EXIT_OK",
    "EXIT_SOME_FAILED",
    "EXIT_BAD_PLAN",
    "EXIT_INTERRUPTED",
    "OUTCOMES",
    "INDEX_COLUMNS",
    "InputSpec",
    "BatchPlan",
    "Unit",
    "UnitOutcome",
    "BatchResult",
    "load_plan",
    "parse_plan",
    "plan_from_args",
    "expand_units",
    "group_labels",
    "unit_fingerprint",
    "run_batch",
    "index_frame",
    "write_index",
    "make_progress",
    "run_command",
    "LineProgress",
    "RichProgress",
    "SilentProgress",
]

logger = logging.getLogger(__name__)
logger.addHandler(logging.NullHandler())

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

_STATUSES = ("suspect", "review", "ok", "unscreened")

#: Columns of the batch index, in order (the GeoPackage layer adds ``geometry``).
INDEX_COLUMNS = (
    "unit",
    "input",
    "layer",
    "group_by",
    "group",
    "outcome",
    "message",
    "points",
    "suspect",
    "review",
    "ok",
    "unscreened",
    "seconds",
    "output",
    "report",
    "input_sha256",
    "fingerprint",
    "input_crs",
)

INDEX_STEM = "batch-index"
INDEX_LAYER = "batch_index"
RECORD_SUFFIX = ".batch.json"
_STAGING_PREFIX = ".batch-staging-"

#: File suffixes picked up when an input names a directory.
DIRECTORY_SUFFIXES = (".gpkg", ".shp", ".csv", ".parquet", ".geoparquet", ".geojson", ".fgb")

# Keys of an [[input]] table that are not screen options.
_INPUT_KEYS = ("path", "layers", "by", "x", "y", "name", "report")
# Of those, the ones [defaults] may also set (path and name are per input).
_DEFAULTABLE_INPUT_KEYS = ("layers", "by", "x", "y", "report")
_BATCH_KEYS = ("out_dir", "jobs", "report")
_TOP_KEYS = ("batch", "defaults", "input")
# Options that take a length ("5km") as well as a number of metres.
_LENGTH_OPTIONS = ("within", "max_distance", "coincident_tolerance")


# ---------------------------------------------------------------------------
# plan


@dataclass(frozen=True)
class InputSpec:
    """One validated ``[[input]]`` entry of a plan.

    Attributes
    ----------
    paths : tuple of str
        Files, globs or directories as written (relative to ``base_dir``).
    config : ScreenConfig
        Effective screen options (defaults updated by the entry's own).
    layers : tuple of str or None
        GeoPackage layers to screen; None screens every layer.
    by : str or None
        Column splitting each layer into groups screened on their own.
    x, y : str or None
        Coordinate columns of tables without geometry (CSV).
    name : str or None
        Output name used instead of the file's stem (layer and group parts
        are still appended).
    report : bool
        Write a report beside each output.
    where : str
        Place in the plan, for messages (e.g. ``"plan.toml line 12, [[input]] #2"``).
    base_dir : Path
        Directory that relative paths are resolved against.
    """

    paths: tuple[str, ...]
    config: ScreenConfig
    layers: tuple[str, ...] | None = None
    by: str | None = None
    x: str | None = None
    y: str | None = None
    name: str | None = None
    report: bool = False
    where: str = ""
    base_dir: Path = Path(".")


@dataclass(frozen=True)
class BatchPlan:
    """A validated batch plan.

    Attributes
    ----------
    inputs : tuple of InputSpec
        The entries, in plan order.
    out_dir : Path
        Directory receiving every output and the index.
    jobs : int
        Worker processes (1 runs everything in this process).
    source : str
        Where the plan came from (file name or ``"command line"``).
    """

    inputs: tuple[InputSpec, ...]
    out_dir: Path
    jobs: int = 1
    source: str = "command line"


class _PlanErrors:
    """Collects every problem of a plan so they are reported together."""

    def __init__(self, source: str, locator: "_KeyLocator | None") -> None:
        self.source = source
        self.locator = locator
        self.messages: list[str] = []

    def place(self, table: str | tuple, key: str | None = None) -> str:
        line = self.locator.line_of(table, key) if self.locator else None
        name = _table_label(table)
        where = f"{self.source}"
        if line is not None:
            where += f" line {line}"
        where += f", {name}"
        if key is not None:
            where += f", key '{key}'"
        return where

    def add(self, table: str | tuple, key: str | None, text: str) -> None:
        self.messages.append(f"{self.place(table, key)}: {text}")

    def raise_if_any(self) -> None:
        if self.messages:
            raise ConfigError("The batch plan cannot be used:\n  - " + "\n  - ".join(self.messages))


def _table_label(table: str | tuple) -> str:
    if isinstance(table, tuple):
        return f"[[{table[0]}]] #{table[1] + 1}"
    if table == "":
        return "top level"
    return f"[{table}]"


class _KeyLocator:
    """Line numbers of tables and keys in TOML text.

    :mod:`tomllib` gives no positions for valid documents, so the text is
    scanned here: table headers, ``[[array]]`` entries and ``key =`` lines at
    the start of a statement (strings, comments and multi-line arrays are
    skipped so their content is never taken for a key).
    """

    _HEADER = re.compile(r"\s*(\[\[|\[)\s*([^\]]+?)\s*(\]\]|\])\s*(#.*)?$")
    _KEY = re.compile(r"""\s*("(?:[^"\\]|\\.)*"|'[^']*'|[A-Za-z0-9_\-]+(?:\s*\.\s*[A-Za-z0-9_\-]+)*)\s*=""")

    def __init__(self, text: str) -> None:
        self.tables: dict[object, int] = {}
        self.keys: dict[tuple[object, str], int] = {}
        arrays: dict[str, int] = {}
        current: object = ""
        depth = 0  # open brackets / braces of a value spanning lines
        in_multiline: str | None = None
        for number, line in enumerate(text.splitlines(), start=1):
            if in_multiline is not None:
                end = line.find(in_multiline)
                if end < 0:
                    continue
                line = line[end + 3 :]
                in_multiline = None
                depth, in_multiline = self._scan(line, depth)
                continue
            if depth == 0:
                header = self._HEADER.match(line)
                if header:
                    name = header.group(2).strip().strip("\"'")
                    if header.group(1) == "[[":
                        index = arrays.get(name, -1) + 1
                        arrays[name] = index
                        current = (name, index)
                    else:
                        current = name
                    self.tables.setdefault(current, number)
                    continue
                key = self._KEY.match(line)
                if key:
                    name = key.group(1).strip().strip("\"'")
                    self.keys.setdefault((current, name), number)
                    line = line[key.end() :]
            depth, in_multiline = self._scan(line, depth)

    @staticmethod
    def _scan(line: str, depth: int) -> tuple[int, str | None]:
        """Follow brackets outside strings; report an unclosed multi-line string."""
        i = 0
        while i < len(line):
            char = line[i]
            if char == "#":
                break
            if line.startswith('"""', i) or line.startswith("'''", i):
                quote = line[i : i + 3]
                end = line.find(quote, i + 3)
                if end < 0:
                    return depth, quote
                i = end + 3
                continue
            if char in "\"'":
                j = i + 1
                while j < len(line) and line[j] != char:
                    j += 2 if (char == '"' and line[j] == "\\") else 1
                i = j + 1
                continue
            if char in "[{":
                depth += 1
            elif char in "]}":
                depth = max(depth - 1, 0)
            i += 1
        return depth, None

    def line_of(self, table: object, key: str | None = None) -> int | None:
        """Line of ``key`` in ``table`` (or of the table header when key is None)."""
        if key is not None and (table, key) in self.keys:
            return self.keys[(table, key)]
        return self.tables.get(table)


def _suggest(word: str, choices: Iterable[str]) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" Did you mean '{close[0]}'?" if close else ""


def _option_types() -> dict[str, str]:
    hints = typing.get_type_hints(ScreenConfig)
    kinds = {}
    for name in ScreenConfig.option_names():
        hint = hints[name]
        args = typing.get_args(hint) if typing.get_origin(hint) in (typing.Union, types.UnionType) else ()
        optional = type(None) in args
        base = ([a for a in args if a is not type(None)] or [hint])[0]
        if typing.get_origin(base) is tuple:
            kind = "numbers"
        elif base is bool:
            kind = "bool"
        elif base is int:
            kind = "int"
        elif base is float:
            kind = "float"
        else:
            kind = "str"
        kinds[name] = kind + ("?" if optional else "")
    return kinds


def _check_option(name: str, value: object, kind: str) -> tuple[object, str | None]:
    """Convert a plan value for option ``name``; return (value, problem)."""
    base = kind.rstrip("?")
    if base == "str":
        if isinstance(value, str) and value:
            return value, None
        return None, f"expects text (a quoted string), got {value!r}."
    if base == "bool":
        if isinstance(value, bool):
            return value, None
        return None, f"expects true or false, got {value!r}."
    if base == "int":
        if isinstance(value, int) and not isinstance(value, bool):
            return value, None
        return None, f"expects a whole number, got {value!r}."
    if base == "numbers":
        items = value if isinstance(value, list) else None
        if items is not None and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in items):
            return tuple(float(v) for v in items), None
        return None, f"expects a list of numbers such as [-9999, -999], got {value!r}."
    # float
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value), None
    if name in _LENGTH_OPTIONS and isinstance(value, str):
        try:
            return parse_length(value, name), None
        except ConfigError as exc:
            return None, str(exc)
    unit_hint = " or a length such as \"5km\"" if name in _LENGTH_OPTIONS else ""
    return None, f"expects a number{unit_hint}, got {value!r}."


# Options whose valid range depends on another option; checked only together.
_JOINT_OPTIONS = ("review_z", "suspect_z")


def _check_option_alone(name: str, value: object) -> str | None:
    """Validate one option on its own, so several wrong values are all reported."""
    if name in _JOINT_OPTIONS or name == "value":
        return None
    # A distance band with a width makes k and min_neighbours independent.
    neutral = {"value": "_", "graph": "band", "within": 1.0}
    neutral[name] = value
    try:
        ScreenConfig(**neutral)
    except ConfigError as exc:
        return str(exc)
    except (TypeError, ValueError) as exc:
        return f"{value!r} is not usable for {name}: {exc}"
    return None


def _check_input_key(key: str, value: object) -> tuple[object, str | None]:
    if key == "path":
        if isinstance(value, str) and value:
            return (value,), None
        if isinstance(value, list) and value and all(isinstance(v, str) and v for v in value):
            return tuple(value), None
        return None, f"expects a file, glob or directory, or a list of them, got {value!r}."
    if key == "layers":
        if value == "all":
            return None, None
        if isinstance(value, list) and value and all(isinstance(v, str) and v for v in value):
            return tuple(value), None
        return None, f'expects "all" or a list of layer names such as ["wells"], got {value!r}.'
    if key == "report":
        if isinstance(value, bool):
            return value, None
        return None, f"expects true or false, got {value!r}."
    if isinstance(value, str) and value:
        if key == "name" and not re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9._\-]*", value):
            return None, (
                f"{value!r} is not usable as a file name; use letters, digits, '.', '_' and '-' "
                "(starting with a letter or digit)."
            )
        return value, None
    return None, f"expects text (a quoted string), got {value!r}."


def _first_key_in(message: str, keys: Iterable[str]) -> str | None:
    found = [(message.find(k), k) for k in keys if re.search(rf"\b{re.escape(k)}\b", message)]
    return min(found)[1] if found else None


def parse_plan(
    data: dict,
    *,
    base_dir: str | os.PathLike = ".",
    source: str = "command line",
    text: str | None = None,
    out_dir: str | os.PathLike | None = None,
    jobs: int | None = None,
) -> BatchPlan:
    """Validate a plan given as a dict (the parsed TOML) and return a :class:`BatchPlan`.

    Every problem is collected and reported in one :class:`ConfigError`, each
    naming its place (file, line, table, key) and, for a wrong key or choice,
    the valid ones.

    Parameters
    ----------
    data : dict
        Tables ``batch`` (``out_dir``, ``jobs``, ``report``), ``defaults``
        (any screen option plus ``layers``, ``by``, ``x``, ``y``, ``report``)
        and ``input`` (a list of tables, each with ``path`` and optional
        overrides).
    base_dir : path
        Directory that relative paths (inputs, ``out_dir``) are resolved against.
    source : str
        Name of the plan for messages.
    text : str, optional
        The TOML text, used to find line numbers.
    out_dir, jobs : optional
        Command-line values that take precedence over the plan's.

    Returns
    -------
    BatchPlan
    """
    base = Path(base_dir)
    errors = _PlanErrors(source, _KeyLocator(text) if text is not None else None)
    option_names = ScreenConfig.option_names()
    option_kinds = _option_types()

    for key in data:
        if key not in _TOP_KEYS:
            errors.add("", key, f"unknown table or key '{key}'.{_suggest(key, _TOP_KEYS)} "
                       f"Valid: {', '.join(_TOP_KEYS)}.")

    # [batch]
    batch = data.get("batch", {})
    plan_out_dir = plan_jobs = None
    if not isinstance(batch, dict):
        errors.add("", "batch", "must be a table: write [batch] on its own line.")
        batch = {}
    for key, value in batch.items():
        if key not in _BATCH_KEYS:
            errors.add("batch", key, f"unknown key.{_suggest(key, _BATCH_KEYS)} Valid keys: {', '.join(_BATCH_KEYS)}.")
        elif key == "out_dir":
            if isinstance(value, str) and value:
                plan_out_dir = value
            else:
                errors.add("batch", key, f"expects a directory name, got {value!r}.")
        elif key == "jobs":
            if isinstance(value, int) and not isinstance(value, bool) and value >= 1:
                plan_jobs = value
            else:
                errors.add("batch", key, f"expects a whole number of worker processes, 1 or more, got {value!r}.")
        elif key == "report" and not isinstance(value, bool):
            errors.add("batch", key, f"expects true or false, got {value!r}.")
    batch_report = batch.get("report", False) is True

    # [defaults]
    defaults = data.get("defaults", {})
    if not isinstance(defaults, dict):
        errors.add("", "defaults", "must be a table: write [defaults] on its own line.")
        defaults = {}
    default_options: dict = {}
    defaults_bad = False
    default_inputs: dict = {"report": batch_report}
    valid_default_keys = sorted(option_names) + sorted(_DEFAULTABLE_INPUT_KEYS)
    for key, value in defaults.items():
        if key in option_names:
            converted, problem = _check_option(key, value, option_kinds[key])
            problem = problem or _check_option_alone(key, converted)
            if problem:
                errors.add("defaults", key, problem)
                defaults_bad = True
            else:
                default_options[key] = converted
        elif key in _DEFAULTABLE_INPUT_KEYS:
            converted, problem = _check_input_key(key, value)
            if problem:
                errors.add("defaults", key, problem)
            else:
                default_inputs[key] = converted
        else:
            hint = " ('path' and 'name' belong in each [[input]].)" if key in ("path", "name") else ""
            errors.add("defaults", key, f"unknown key.{_suggest(key, valid_default_keys)}{hint} "
                       f"Valid keys: {', '.join(valid_default_keys)}.")

    # [[input]]
    entries = data.get("input", [])
    if isinstance(entries, dict):
        entries = [entries]
        errors.add("", "input", "write each input as an [[input]] table (double brackets), not [input].")
    if not isinstance(entries, list) or not entries:
        errors.add("", None, "the plan lists no inputs: add at least one [[input]] table with a path, "
                   'e.g. an [[input]] line followed by path = "data/*.gpkg".')
        entries = []
    valid_input_keys = sorted(option_names) + sorted(_INPUT_KEYS)
    specs = []
    for number, entry in enumerate(entries):
        table = ("input", number)
        if not isinstance(entry, dict):
            errors.add(table, None, f"expects a table with at least a path, got {entry!r}.")
            continue
        options = dict(default_options)
        settings = dict(default_inputs)
        entry_ok = True
        for key, value in entry.items():
            if key in option_names:
                converted, problem = _check_option(key, value, option_kinds[key])
                problem = problem or _check_option_alone(key, converted)
                if problem:
                    errors.add(table, key, problem)
                    entry_ok = False
                else:
                    options[key] = converted
            elif key in _INPUT_KEYS:
                converted, problem = _check_input_key(key, value)
                if problem:
                    errors.add(table, key, problem)
                    entry_ok = False
                else:
                    settings[key] = converted
            else:
                errors.add(table, key, f"unknown key.{_suggest(key, valid_input_keys)} "
                           f"Valid keys: {', '.join(valid_input_keys)}.")
                entry_ok = False
        if "path" not in entry:
            errors.add(table, None, 'has no path: add path = "file.gpkg" (a file, glob or directory).')
            entry_ok = False
        elif "path" in settings:
            problem = _check_paths(settings["path"], base)
            if problem:
                errors.add(table, "path", problem)
                entry_ok = False
        if (settings.get("x") is None) != (settings.get("y") is None):
            errors.add(table, "x" if "x" in entry else "y", "x and y name the coordinate columns together: set both.")
            entry_ok = False
        if "value" not in options and "value" not in defaults:
            errors.add(table, None, "no value column: set value = \"<column>\" in [defaults] or in this [[input]].")
            entry_ok = False
        if not entry_ok or defaults_bad:
            continue
        if options.get("within") is not None and "graph" not in options:
            options["graph"] = "band"  # as on the command line: a band width means a distance band
        try:
            config = ScreenConfig(**options)
        except ConfigError as exc:
            key = _first_key_in(str(exc), [k for k in entry if k in option_names])
            if key is None:
                key_default = _first_key_in(str(exc), [k for k in defaults if k in option_names])
                if key_default is not None:
                    message = f"{errors.place('defaults', key_default)}: {exc}"
                    if message not in errors.messages:
                        errors.messages.append(message)
                    continue
            errors.add(table, key, str(exc))
            continue
        paths = settings["path"]
        line = errors.locator.line_of(table, None) if errors.locator else None
        where = f"{source}{f' line {line}' if line else ''}, [[input]] #{number + 1}"
        specs.append(
            InputSpec(
                paths=paths,
                config=config,
                layers=settings.get("layers"),
                by=settings.get("by"),
                x=settings.get("x"),
                y=settings.get("y"),
                name=settings.get("name"),
                report=bool(settings.get("report", False)),
                where=where,
                base_dir=base,
            )
        )

    if any(spec.report for spec in specs) and not _reports_available():
        errors.add("batch" if batch_report else "defaults", "report",
                   "reports are not available in this version of pointsift; set report = false.")
    chosen_out = out_dir if out_dir is not None else plan_out_dir
    if chosen_out is None:
        errors.add("batch", "out_dir", 'no output directory: set out_dir = "screened" in [batch] or pass --out-dir.')
    chosen_jobs = jobs if jobs is not None else (plan_jobs or 1)
    if not (isinstance(chosen_jobs, int) and chosen_jobs >= 1):
        errors.add("batch", "jobs", f"expects a whole number of worker processes, 1 or more, got {chosen_jobs!r}.")
    errors.raise_if_any()
    out_path = Path(chosen_out)
    if not out_path.is_absolute() and out_dir is None:
        out_path = base / out_path
    if out_path.exists() and not out_path.is_dir():
        raise ConfigError(f"Output directory {str(out_path)!r} is a file. Choose a directory for out_dir.")
    return BatchPlan(inputs=tuple(specs), out_dir=out_path, jobs=chosen_jobs, source=source)


def _check_paths(paths: Sequence[str], base: Path) -> str | None:
    for text in paths:
        full = Path(text) if Path(text).is_absolute() else base / text
        if glob.has_magic(text):
            if not glob.glob(str(full), recursive=True):
                return f"the pattern {text!r} matches no file (looked in {str(full.parent)!r})."
        elif not full.exists():
            return f"{text!r} does not exist (looked for {str(full)!r}). Check the path or quote a glob."
    return None


def load_plan(
    path: str | os.PathLike,
    *,
    out_dir: str | os.PathLike | None = None,
    jobs: int | None = None,
) -> BatchPlan:
    """Read and validate a TOML batch plan.

    Relative paths in the plan are relative to the plan's directory.

    Parameters
    ----------
    path : path
        The ``.toml`` plan.
    out_dir, jobs : optional
        Command-line values that take precedence over the plan's.

    Returns
    -------
    BatchPlan

    Raises
    ------
    ConfigError
        The file is missing, is not valid TOML, or holds unknown keys or
        invalid values; the message names each place and the valid choices.

    Examples
    --------
    A plan screening every layer of two GeoPackages and one CSV::

        [batch]
        out_dir = "screened"
        jobs = 2

        [defaults]
        value = "level_m"
        k = 12

        [[input]]
        path = "networks/*.gpkg"

        [[input]]
        path = "springs.csv"
        x = "easting"
        y = "northing"
        crs = "EPSG:27700"
        value = "head_m"
    """
    plan_path = Path(path)
    try:
        text = plan_path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"Plan {str(plan_path)!r} does not exist. Check the path.") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"Plan {str(plan_path)!r} cannot be read: {exc}") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{plan_path.name} is not valid TOML: {exc}. Fix the syntax at that place.") from None
    return parse_plan(
        data, base_dir=plan_path.parent, source=plan_path.name, text=text, out_dir=out_dir, jobs=jobs
    )


def plan_from_args(
    inputs: Sequence[str],
    *,
    out_dir: str | os.PathLike,
    options: dict,
    layers: Sequence[str] | None = None,
    by: str | None = None,
    x: str | None = None,
    y: str | None = None,
    report: bool = False,
    jobs: int = 1,
) -> BatchPlan:
    """Build a plan from command-line arguments (the direct form of ``pointsift batch``).

    Parameters
    ----------
    inputs : sequence of str
        Files, globs or directories.
    out_dir : path
        Output directory.
    options : dict
        Screen options (at least ``value``), as :class:`ScreenConfig` keywords.
    layers, by, x, y, report, jobs
        As in an ``[[input]]`` table of a plan.

    Returns
    -------
    BatchPlan
    """
    entry: dict = {"path": list(inputs)}
    for key, value in (("layers", list(layers) if layers else None), ("by", by), ("x", x), ("y", y)):
        if value is not None:
            entry[key] = value
    defaults = {k: (list(v) if isinstance(v, tuple) else v) for k, v in options.items() if v is not None}
    data = {"batch": {"report": bool(report)}, "defaults": defaults, "input": [entry]}
    return parse_plan(data, base_dir=Path.cwd(), source="command line", out_dir=out_dir, jobs=jobs)


# ---------------------------------------------------------------------------
# expansion into units


@dataclass(frozen=True)
class Unit:
    """One thing screened on its own: a file, a layer, or a group of a layer.

    Attributes
    ----------
    name : str
        Output name (file stem), unique within the batch.
    path : Path
        Input file.
    display : str
        Input path as shown in messages and the index.
    config : ScreenConfig
        Effective options.
    layer : str or None
        Layer of a multi-layer file.
    by : str or None
        Grouping column.
    group : str or None
        Group label (the column value as text); None with ``by`` set means
        rows where the column is empty.
    x, y : str or None
        Coordinate columns of tables without geometry.
    report : bool
        Write a report.
    problem : str or None
        Set when the unit failed already during expansion (unreadable file,
        missing layer or column); it is then recorded as failed.
    origin : str
        The plan entry it came from (e.g. ``"plan.toml line 12, [[input]] #2"``).
    """

    name: str
    path: Path
    display: str
    config: ScreenConfig
    layer: str | None = None
    by: str | None = None
    group: str | None = None
    x: str | None = None
    y: str | None = None
    report: bool = False
    problem: str | None = None
    origin: str = ""


_UNSAFE = re.compile(r"[^A-Za-z0-9._\-]+")


def _safe(text: str) -> str:
    cleaned = _UNSAFE.sub("_", text).strip("._") or "_"
    return cleaned[:80]


def _resolve_paths(spec: InputSpec, exclude: Path) -> list[Path]:
    found: list[Path] = []
    for text in spec.paths:
        full = Path(text) if Path(text).is_absolute() else spec.base_dir / text
        if glob.has_magic(text):
            matches = sorted(Path(p) for p in glob.glob(str(full), recursive=True))
        else:
            matches = [full]
        for match in matches:
            if match.is_dir():
                found.extend(
                    sorted(p for p in match.iterdir() if p.is_file() and p.suffix.lower() in DIRECTORY_SUFFIXES)
                )
            elif match.is_file():
                found.append(match)
    exclude = exclude.resolve()
    unique, seen = [], set()
    for path in found:
        resolved = path.resolve()
        if resolved in seen or resolved.is_relative_to(exclude):
            continue
        if path.name.endswith(".gpkg-journal") or path.name.endswith(".gpkg-wal") or path.name.endswith(".gpkg-shm"):
            continue
        seen.add(resolved)
        unique.append(path)
    return unique


def _display(path: Path) -> str:
    try:
        return os.path.relpath(path)
    except ValueError:  # other drive on Windows
        return str(path)


def _list_layers(path: Path) -> list[str]:
    try:
        from . import io as pio

        if hasattr(pio, "list_layers"):
            return list(pio.list_layers(path))
    except ImportError:
        pass
    import pyogrio

    return [str(name) for name, _ in pyogrio.list_layers(path)]


def group_labels(values) -> list[str | None]:
    """Text labels of a grouping column: one per row, None where empty.

    Date-times become ISO dates (``2026-03-15``) when every value is at
    midnight, ISO date-times otherwise; whole floats lose their ``.0``.
    """
    import numpy as np
    import pandas as pd

    series = pd.Series(values)
    missing = series.isna().to_numpy()
    if pd.api.types.is_datetime64_any_dtype(series):
        stamps = series.dropna()
        midnight = bool((stamps == stamps.dt.normalize()).all())
        text = series.dt.strftime("%Y-%m-%d" if midnight else "%Y-%m-%dT%H:%M:%S")
    elif pd.api.types.is_float_dtype(series) and np.all(np.mod(series.dropna().to_numpy(), 1) == 0):
        text = series.map(lambda v: str(int(v)) if v == v else None)
    else:
        text = series.map(lambda v: v.isoformat() if hasattr(v, "isoformat") else str(v))
    return [None if miss else str(t) for t, miss in zip(text.tolist(), missing)]


def _read_frame(path: Path, layer: str | None, x: str | None, y: str | None, crs: str | None):
    from . import io as pio

    return pio.read_points(path, layer=layer, x=x, y=y, crs=crs)


def expand_units(plan: BatchPlan) -> list[Unit]:
    """Expand a plan into units, in plan order; names are unique.

    Files are listed (directories non-recursively, globs sorted), GeoPackage
    layers listed, and grouped layers read to find their groups. A file that
    cannot be listed or read, a missing layer or a missing grouping column
    gives a unit with ``problem`` set rather than an exception, so one bad
    input never stops the batch. Files inside the output directory are never
    taken as inputs.

    Parameters
    ----------
    plan : BatchPlan

    Returns
    -------
    list of Unit
    """
    drafts: list[tuple[tuple[str, ...], dict]] = []  # (name parts, unit fields)
    for spec in plan.inputs:
        files = _resolve_paths(spec, plan.out_dir)
        for path in files:
            base_fields = dict(
                path=path, display=_display(path), config=spec.config, by=spec.by, x=spec.x, y=spec.y,
                report=spec.report, origin=spec.where,
            )
            layers: list[str | None] = [None]
            layer_in_name = False
            if path.suffix.lower() == ".gpkg":
                try:
                    available = _list_layers(path)
                except Exception as exc:  # corrupt or unreadable file: recorded, batch continues
                    drafts.append(((spec.name or path.stem,), dict(base_fields, problem=_describe(exc, path))))
                    continue
                if spec.layers is None:
                    layers = list(available)
                    layer_in_name = len(available) > 1
                else:
                    layers = list(spec.layers)
                    layer_in_name = True
                if not layers:
                    drafts.append(((spec.name or path.stem,), dict(
                        base_fields, problem=f"{path.name} holds no layers; there is nothing to screen.")))
                    continue
                missing = [name for name in layers if name not in available]
                for name in missing:
                    drafts.append(((spec.name or path.stem, name), dict(
                        base_fields, layer=name,
                        problem=f"layer {name!r} is not in {path.name}; its layers are: "
                                f"{', '.join(available) or '(none)'}.{_suggest(name, available)}")))
                layers = [name for name in layers if name not in missing]
            for layer in layers:
                stem = (spec.name or path.stem,) + ((layer,) if layer_in_name and layer else ())
                fields = dict(base_fields, layer=layer)
                if spec.by is None:
                    drafts.append((stem, fields))
                    continue
                try:
                    frame, _ = _read_frame(path, layer, spec.x, spec.y, spec.config.crs)
                except Exception as exc:
                    drafts.append((stem, dict(fields, problem=_describe(exc, path))))
                    continue
                if spec.by not in frame.columns:
                    columns = [c for c in frame.columns if c != frame.geometry.name]
                    drafts.append((stem, dict(fields, problem=(
                        f"grouping column {spec.by!r} is not in {path.name}"
                        f"{f' layer {layer!r}' if layer else ''}; its columns are: {', '.join(map(str, columns))}."
                        f"{_suggest(spec.by, map(str, columns))}"))))
                    continue
                labels = group_labels(frame[spec.by])
                present = sorted({label for label in labels if label is not None})
                if any(label is None for label in labels):
                    present.append(None)
                for label in present:
                    part = f"{spec.by}-{label if label is not None else 'missing'}"
                    drafts.append((stem + (part,), dict(fields, group=label)))
    unique_drafts, identities = [], set()
    for parts, fields in drafts:
        identity = _identity(fields)
        if identity not in identities:  # the same file listed twice with the same settings
            identities.add(identity)
            unique_drafts.append((parts, fields))
    drafts = unique_drafts
    names = _unique_names(drafts)
    return [Unit(name=name, **fields) for name, (_, fields) in zip(names, drafts)]


def _identity(fields: dict) -> str:
    config = fields["config"]
    return json.dumps(
        [str(Path(fields["path"]).resolve()), fields.get("layer"), fields.get("by"), fields.get("group"),
         fields.get("x"), fields.get("y"), config.as_record()],
        sort_keys=True, default=str,
    )


def _unique_names(drafts: list[tuple[tuple[str, ...], dict]]) -> list[str]:
    """Join name parts; make clashes unique by parent folder, then file suffix, then a short hash."""
    names = ["__".join(_safe(p) for p in parts) for parts, _ in drafts]

    def clash_groups(current: list[str]) -> list[list[int]]:
        seen: dict[str, list[int]] = {}
        for i, name in enumerate(current):
            seen.setdefault(name.lower(), []).append(i)
        return [group for key, group in seen.items() if len(group) > 1 or key == INDEX_STEM]

    for step in ("folder", "suffix", "hash"):
        for group in clash_groups(names):
            paths = [Path(drafts[i][1]["path"]) for i in group]
            for i, path in zip(group, paths):
                if step == "folder" and len({p.parent.resolve() for p in paths}) == len(paths):
                    names[i] = f"{_safe(path.parent.name)}__{names[i]}"
                elif step == "suffix" and len({p.suffix.lower() for p in paths}) == len(paths):
                    names[i] = f"{names[i]}_{_safe(path.suffix.lstrip('.'))}"
                elif step == "hash":
                    digest = hashlib.sha1(_identity(drafts[i][1]).encode()).hexdigest()[:8]
                    names[i] = f"{names[i]}-{digest}"
    return names


_FLAG_TO_KEY = {"neighbours": "k", "no-data": "sentinels", "layer": "layers", "duplicate-tolerance":
                "coincident_value_tolerance"}


def _with_origin(message: str, unit: Unit) -> str:
    """Point a data problem at the plan entry to fix; name plan keys for the flags a message mentions."""
    if not unit.origin or unit.origin.startswith("command line"):
        return message
    flags = sorted(set(re.findall(r"--([a-z][a-z\-]*)", message)))
    keys = [f"--{flag} is {_FLAG_TO_KEY.get(flag, flag.replace('-', '_'))} = ..." for flag in flags]
    hint = f"; in the plan, {', '.join(keys)}" if keys else ""
    return f"{message} (plan entry: {unit.origin}{hint})"


def _describe(exc: BaseException, path: Path) -> str:
    """Message for a failed unit: ours as written, others with the file named."""
    if isinstance(exc, PointsiftError):
        return str(exc)
    text = str(exc).strip() or type(exc).__name__
    if str(path) in text or path.name in text:
        return f"{type(exc).__name__}: {text}"
    return f"{path.name} could not be read or screened ({type(exc).__name__}: {text})."


# ---------------------------------------------------------------------------
# fingerprints and records


def _pointsift_version() -> str:
    try:
        from importlib.metadata import version

        return version("pointsift")
    except Exception:  # not installed (running from a source tree)
        return "unknown"


def unit_fingerprint(unit: Unit, input_sha256: str, version: str | None = None) -> str:
    """SHA-256 identifying what a unit's output was made from.

    It covers the input file's content hash, the layer, the grouping column
    and group, the coordinate columns, every effective screen option, whether
    a report is written, and the pointsift version; it does not cover the
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
        "pointsift": version if version is not None else _pointsift_version(),
    }
    text = json.dumps(record, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _file_sha256(path: Path) -> str:
    try:
        from . import io as pio

        if hasattr(pio, "file_sha256"):
            return pio.file_sha256(path)
    except ImportError:
        pass
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _write_json_atomic(path: Path, record: dict) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_text(json.dumps(record, indent=2, sort_keys=True, default=str) + "\n", encoding="utf-8")
    os.replace(tmp, path)


def _read_record(path: Path) -> dict | None:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


# ---------------------------------------------------------------------------
# outcomes


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


# ---------------------------------------------------------------------------
# the work of one unit (runs in a worker process when jobs > 1)


@dataclass(frozen=True)
class _Task:
    unit: Unit
    out_path: Path
    report_path: Path | None
    record_path: Path
    staging: Path
    fingerprint: str
    input_sha256: str
    version: str


def _group_filter(by: str, group: str | None):
    """Row selector for one group, by the same labels the expansion used."""

    def select(frame):
        if by not in frame.columns:
            from .errors import InputError

            raise InputError(f"grouping column {by!r} is no longer in the layer; it was there when the batch started.")
        labels = group_labels(frame[by])
        keep = [label == group for label in labels]
        return frame.loc[keep].copy()

    return select


def _lonlat_extent(bounds, crs) -> tuple[float, float, float, float] | None:
    if crs is None or bounds is None or not all(math.isfinite(float(b)) for b in bounds):
        return None
    from pyproj import CRS, Transformer

    source = CRS.from_user_input(crs)
    target = CRS.from_epsg(4326)
    if source == target:
        return tuple(float(b) for b in bounds)
    transformer = Transformer.from_crs(source, target, always_xy=True)
    return tuple(float(b) for b in transformer.transform_bounds(*bounds, densify_pts=21))


def _crs_text(crs) -> str:
    if crs is None:
        return ""
    try:
        from pyproj import CRS

        crs = CRS.from_user_input(crs)
        authority = crs.to_authority()
        return ":".join(authority) if authority else crs.name
    except Exception:
        return str(crs)


def _screen_unit(task: _Task) -> UnitOutcome:
    """Screen one unit into the staging folder, then move the files into place."""
    from .run import screen_file

    unit = task.unit
    started = time.perf_counter()
    staged_out = task.staging / task.out_path.name
    staged_report = task.staging / task.report_path.name if task.report_path else None
    try:
        run = screen_file(
            unit.path,
            staged_out,
            unit.config,
            layer=unit.layer,
            x=unit.x,
            y=unit.y,
            overwrite=True,
            frame_filter=_group_filter(unit.by, unit.group) if unit.by else None,
            source_note=f"{unit.by} = {unit.group if unit.group is not None else '(missing)'}" if unit.by else None,
            report_path=staged_report,
        )
        screened = run.result.frame
        prepared = getattr(run.result, "prepared", None)
        crs = getattr(prepared, "input_crs", None) or screened.crs
        bounds = screened.total_bounds if len(screened) else None
        counts = run.counts
        screen_seconds = run.seconds
        os.replace(staged_out, task.out_path)
        if staged_report is not None:
            os.replace(staged_report, task.report_path)
        outcome = UnitOutcome(
            unit=unit,
            outcome=DONE,
            counts={s: int(counts.get(s, 0)) for s in _STATUSES},
            points=int(len(screened)),
            screen_seconds=screen_seconds,
            output=task.out_path.name,
            report=task.report_path.name if task.report_path else "",
            input_sha256=task.input_sha256,
            fingerprint=task.fingerprint,
            input_crs=_crs_text(crs),
            extent_lonlat=_lonlat_extent(bounds, crs),
        )
        _write_json_atomic(task.record_path, _record_of(outcome, task.version))
    except Exception as exc:  # any failure of one unit is recorded; the batch continues
        logger.debug("unit %s failed", unit.name, exc_info=True)
        for leftover in (staged_out, staged_report):
            if leftover is not None and leftover.exists():
                leftover.unlink()
        outcome = UnitOutcome(
            unit=unit, outcome=FAILED, message=_with_origin(_describe(exc, unit.path), unit),
            input_sha256=task.input_sha256, fingerprint=task.fingerprint,
        )
    outcome.seconds = time.perf_counter() - started
    return outcome


def _reports_available() -> bool:
    import importlib.util

    return importlib.util.find_spec("pointsift.report") is not None


def _record_of(outcome: UnitOutcome, version: str) -> dict:
    unit = outcome.unit
    return {
        "fingerprint": outcome.fingerprint,
        "input": unit.display,
        "input_sha256": outcome.input_sha256,
        "layer": unit.layer,
        "by": unit.by,
        "group": unit.group,
        "options": unit.config.as_record(),
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


def _worker_init() -> None:
    # Ctrl-C reaches the whole process group; the parent decides how to stop,
    # so a worker always finishes (or is terminated by) the parent.
    signal.signal(signal.SIGINT, signal.SIG_IGN)


# ---------------------------------------------------------------------------
# progress


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
            text += " (" + ", ".join(f"{outcome.counts.get(s, 0)} {s}" for s in _STATUSES) + ")"
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
        try:
            return RichProgress(stream)
        except ImportError:
            pass
    return LineProgress(stream)


# ---------------------------------------------------------------------------
# running


class _StopRequest:
    """First Ctrl-C: finish the units in progress, start no new ones. Second: abandon them."""

    def __init__(self, progress: SilentProgress) -> None:
        self.requested = False
        self.progress = progress
        self._previous = None
        self._installed = False

    def __enter__(self) -> "_StopRequest":
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.getsignal(signal.SIGINT)
            signal.signal(signal.SIGINT, self._handle)
            self._installed = True
        return self

    def _handle(self, signum, frame) -> None:
        if self.requested:
            raise KeyboardInterrupt
        self.requested = True
        self.progress.note(
            "Stopping: finishing the inputs in progress, starting no new ones "
            "(Ctrl-C again abandons them; no partial file is left either way)."
        )

    def __exit__(self, *exc) -> None:
        if self._installed:
            signal.signal(signal.SIGINT, self._previous)


def _mp_context():
    """Worker processes that do not inherit the parent's threads or open files.

    ``forkserver`` (Linux) forks workers from a small server that has already
    imported the screening modules, so each worker starts in milliseconds;
    ``spawn`` elsewhere.
    """
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(["pointsift.batch", "pointsift.run", "pointsift.pipeline", "pointsift.io"])
        return context
    return multiprocessing.get_context("spawn")


def run_batch(
    plan: BatchPlan,
    *,
    jobs: int | None = None,
    force: bool = False,
    progress: SilentProgress | None = None,
) -> BatchResult:
    """Run a batch: expand, skip what is up to date, screen the rest, write the index.

    Parameters
    ----------
    plan : BatchPlan
        A validated plan (:func:`load_plan`, :func:`plan_from_args`).
    jobs : int, optional
        Worker processes; overrides ``plan.jobs``. Results do not depend on it.
    force : bool
        Redo every unit even when its output is up to date.
    progress : reporter, optional
        From :func:`make_progress`; silent when omitted.

    Returns
    -------
    BatchResult
        Outcomes in plan order; ``exit_code`` is 0 (all done or up to date),
        3 (some failed) or 130 (stopped by Ctrl-C).

    Notes
    -----
    Each unit is screened into a staging folder inside the output directory
    and moved into place only when complete, so an output is either whole or
    absent. The first Ctrl-C lets units in progress finish and starts no new
    ones; a second abandons them (their staged files are removed). Either way
    the index is written with the units not run marked ``not-run``.
    """
    progress = progress or SilentProgress()
    jobs = jobs if jobs is not None else plan.jobs
    if not (isinstance(jobs, int) and jobs >= 1):
        raise ConfigError(f"jobs must be a whole number of worker processes, 1 or more, got {jobs!r}.")
    started = time.perf_counter()
    out_dir = plan.out_dir
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        from .errors import OutputError

        raise OutputError(f"Cannot create the output directory {str(out_dir)!r}: {exc}") from None
    lock = _take_lock(out_dir)
    try:
        for stale in out_dir.glob(f"{_STAGING_PREFIX}*"):  # left by a run that was killed
            shutil.rmtree(stale, ignore_errors=True)
        staging = out_dir / f"{_STAGING_PREFIX}{os.getpid()}"
        staging.mkdir(exist_ok=True)
        try:
            units, outcomes, interrupted = _run_units(plan, out_dir, staging, jobs, force, progress)
        finally:
            shutil.rmtree(staging, ignore_errors=True)
            progress.close()
        if interrupted and not units:  # stopped while listing the inputs: keep the previous index
            raise KeyboardInterrupt
        final: list[UnitOutcome] = []
        for unit, outcome in zip(units, outcomes):
            if outcome is None:
                outcome = UnitOutcome(unit=unit, outcome=NOT_RUN, message="not run: the batch was stopped by Ctrl-C.")
            final.append(outcome)
        result = BatchResult(outcomes=final, seconds=0.0, interrupted=interrupted)
        result.index_csv, result.index_gpkg = write_index(final, out_dir)
    finally:
        lock.unlink(missing_ok=True)
    result.seconds = time.perf_counter() - started
    return result


_LOCK_NAME = ".batch.lock"


def _take_lock(out_dir: Path) -> Path:
    """Claim the output folder, so two batches (say, overlapping scheduled runs) never write it at once."""
    from .errors import OutputError

    lock = out_dir / _LOCK_NAME
    for _ in range(2):
        try:
            handle = os.open(lock, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
        except FileExistsError:
            try:
                holder = int(lock.read_text().strip() or "0")
            except (OSError, ValueError):
                holder = 0
            if holder and _alive(holder):
                raise OutputError(
                    f"Another batch (process {holder}) is writing to {str(out_dir)!r}. Wait for it to finish, "
                    f"or choose another --out-dir. If no batch is running, delete {str(lock)!r}."
                ) from None
            lock.unlink(missing_ok=True)  # left by a run that was killed
            continue
        with os.fdopen(handle, "w") as stream:
            stream.write(str(os.getpid()))
        return lock
    raise OutputError(f"Cannot claim {str(out_dir)!r} for the batch; delete {str(lock)!r} and run again.")


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists, owned by someone else
        return True
    return True


def _run_units(plan, out_dir, staging, jobs, force, progress):
    """Expand, check what is up to date, screen the rest; returns (units, outcomes, interrupted)."""
    version = _pointsift_version()
    units: list[Unit] = []
    outcomes: list[UnitOutcome | None] = []
    tasks: list[tuple[int, _Task]] = []
    hashes: dict[Path, str] = {}
    interrupted = False
    try:
        with _StopRequest(progress) as stop:
            units = expand_units(plan)
            outcomes = [None] * len(units)
            progress.start(len(units))
            for number, unit in enumerate(units):
                if stop.requested:
                    break
                tick = time.perf_counter()
                if unit.problem is not None:
                    outcomes[number] = UnitOutcome(unit=unit, outcome=FAILED, message=_with_origin(unit.problem, unit),
                                                   seconds=time.perf_counter() - tick)
                    progress.advance(outcomes[number])
                    continue
                try:
                    if unit.path not in hashes:
                        hashes[unit.path] = _file_sha256(unit.path)
                except OSError as exc:
                    outcomes[number] = UnitOutcome(unit=unit, outcome=FAILED, message=_describe(exc, unit.path))
                    progress.advance(outcomes[number])
                    continue
                sha = hashes[unit.path]
                fingerprint = unit_fingerprint(unit, sha, version)
                out_path = out_dir / f"{unit.name}.gpkg"
                report_path = out_dir / f"{unit.name}.html" if unit.report else None
                record_path = out_dir / f"{unit.name}{RECORD_SUFFIX}"
                record = None if force else _read_record(record_path)
                if (
                    record is not None
                    and record.get("fingerprint") == fingerprint
                    and out_path.exists()
                    and (report_path is None or report_path.exists())
                ):
                    extent = record.get("extent_lonlat")
                    outcomes[number] = UnitOutcome(
                        unit=unit, outcome=SKIPPED, counts=dict(record.get("counts") or {}),
                        points=record.get("points"), seconds=time.perf_counter() - tick,
                        screen_seconds=record.get("screen_seconds"), output=out_path.name,
                        report=report_path.name if report_path else "", input_sha256=sha,
                        fingerprint=fingerprint, input_crs=record.get("input_crs") or "",
                        extent_lonlat=tuple(extent) if extent else None,
                    )
                    progress.advance(outcomes[number])
                    continue
                tasks.append((number, _Task(unit, out_path, report_path, record_path, staging, fingerprint, sha,
                                            version)))
            if jobs == 1 or len(tasks) <= 1:
                for number, task in tasks:
                    if stop.requested:
                        break
                    outcomes[number] = _screen_unit(task)
                    progress.advance(outcomes[number])
            else:
                _run_pool(tasks, outcomes, jobs, stop, progress)
            interrupted = stop.requested
    except KeyboardInterrupt:
        interrupted = True
    return units, outcomes, interrupted


def _run_pool(tasks, outcomes, jobs, stop, progress) -> None:
    """Feed tasks to worker processes, a few at a time so a stop request takes effect quickly.

    A worker that dies (a crash in a compiled library, killed for memory)
    breaks the pool: every unit in flight is tried once more in a new pool,
    and a unit that breaks a pool twice is recorded as failed.
    """
    by_number = dict(tasks)
    pending = list(reversed(tasks))
    running: dict[cf.Future, int] = {}
    strikes: dict[int, int] = {}
    executor = None

    def collect(future) -> bool:
        """Record a finished future; False when its pool broke."""
        number = running.pop(future)
        try:
            outcomes[number] = future.result()
        except cf.process.BrokenProcessPool as exc:
            strikes[number] = strikes.get(number, 0) + 1
            if strikes[number] < 2:
                pending.append((number, by_number[number]))
                return False
            task = by_number[number]
            outcomes[number] = UnitOutcome(
                unit=task.unit, outcome=FAILED,
                message=f"the worker process stopped unexpectedly while screening this input, twice ({exc}).",
                input_sha256=task.input_sha256, fingerprint=task.fingerprint,
            )
            progress.advance(outcomes[number])
            return False
        progress.advance(outcomes[number])
        return True

    try:
        while pending or running:
            if executor is None:
                executor = cf.ProcessPoolExecutor(max_workers=min(jobs, len(pending) or 1),
                                                  mp_context=_mp_context(), initializer=_worker_init)
            while pending and not stop.requested and len(running) < 2 * jobs:
                number, task = pending.pop()
                running[executor.submit(_screen_unit, task)] = number
            if not running:
                break
            done, _ = cf.wait(running, return_when=cf.FIRST_COMPLETED)
            healthy = [collect(future) for future in done]
            if not all(healthy):
                # the rest of the broken pool fails the same way: collect them, then start afresh
                for future in cf.as_completed(list(running)):
                    collect(future)
                executor.shutdown(wait=True)
                executor = None
        if executor is not None:
            executor.shutdown(wait=True)
    except BaseException:
        # Abandon: stop the workers now; the caller removes the staging folder,
        # so nothing they were writing survives.
        if executor is not None:
            for process in list((getattr(executor, "_processes", None) or {}).values()):
                process.terminate()
            executor.shutdown(wait=False, cancel_futures=True)
        raise


# ---------------------------------------------------------------------------
# index


def index_frame(outcomes: Sequence[UnitOutcome]):
    """The batch index as a GeoDataFrame (extent polygons in EPSG:4326).

    Parameters
    ----------
    outcomes : sequence of UnitOutcome

    Returns
    -------
    geopandas.GeoDataFrame
        Columns :data:`INDEX_COLUMNS` plus ``geometry``: each unit's extent
        as a polygon in longitude/latitude (empty when unknown, e.g. failed).
    """
    import geopandas as gpd
    import pandas as pd
    from shapely.geometry import box

    rows = []
    geometries = []
    for item in outcomes:
        unit = item.unit
        rows.append(
            {
                "unit": unit.name,
                "input": unit.display,
                "layer": unit.layer or "",
                "group_by": unit.by or "",
                "group": (unit.group if unit.group is not None else ("(missing)" if unit.by else "")),
                "outcome": item.outcome,
                "message": item.message,
                "points": item.points,
                **{status: item.counts.get(status) if item.counts else None for status in _STATUSES},
                "seconds": round(item.seconds, 3),
                "output": item.output,
                "report": item.report,
                "input_sha256": item.input_sha256,
                "fingerprint": item.fingerprint,
                "input_crs": item.input_crs,
            }
        )
        geometries.append(box(*item.extent_lonlat) if item.extent_lonlat else None)
    frame = pd.DataFrame(rows, columns=list(INDEX_COLUMNS))
    for column in ("points", *_STATUSES):
        frame[column] = frame[column].astype("Int64")
    return gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(geometries, crs="EPSG:4326"))


def write_index(outcomes: Sequence[UnitOutcome], out_dir: str | os.PathLike) -> tuple[Path, Path]:
    """Write ``batch-index.csv`` and ``batch-index.gpkg`` (layer ``batch_index``) atomically.

    Parameters
    ----------
    outcomes : sequence of UnitOutcome
    out_dir : path

    Returns
    -------
    (Path, Path)
        The CSV and the GeoPackage.
    """
    out = Path(out_dir)
    frame = index_frame(outcomes)
    csv_path = out / f"{INDEX_STEM}.csv"
    gpkg_path = out / f"{INDEX_STEM}.gpkg"
    tmp_csv = out / f".{INDEX_STEM}.{os.getpid()}.csv.tmp"
    tmp_gpkg = out / f".{INDEX_STEM}.{os.getpid()}.tmp.gpkg"
    try:
        frame.drop(columns=frame.geometry.name).to_csv(tmp_csv, index=False, lineterminator="\n")
        if tmp_gpkg.exists():
            tmp_gpkg.unlink()
        frame.to_file(tmp_gpkg, layer=INDEX_LAYER, driver="GPKG", engine="pyogrio")
        os.replace(tmp_csv, csv_path)
        os.replace(tmp_gpkg, gpkg_path)
    finally:
        for tmp in (tmp_csv, tmp_gpkg):
            if tmp.exists():
                tmp.unlink()
    return csv_path, gpkg_path


# ---------------------------------------------------------------------------
# command line


def run_command(
    inputs: Sequence[str],
    *,
    out_dir: str | os.PathLike | None = None,
    jobs: int | None = None,
    force: bool = False,
    quiet: bool = False,
    report: bool = False,
    layers: Sequence[str] = (),
    by: str | None = None,
    x: str | None = None,
    y: str | None = None,
    options: dict | None = None,
    stream=None,
) -> BatchResult:
    """What ``pointsift batch`` does, without click: plan, run, summary.

    One argument ending in ``.toml`` is a plan; anything else is the direct
    form (files, globs, directories) and needs ``options["value"]`` and
    ``out_dir``. Screen options and ``layers``/``by``/``x``/``y`` belong in
    the plan when one is given.

    Returns
    -------
    BatchResult
        ``exit_code`` gives the process exit code (0, 3 or 130).

    Raises
    ------
    ConfigError
        The plan or arguments cannot be used (exit code 2).
    """
    options = {k: v for k, v in (options or {}).items() if v is not None and v != ()}
    if len(inputs) == 1 and str(inputs[0]).lower().endswith(".toml"):
        given = sorted(options) + [name for name, v in (("--layer", layers), ("--by", by), ("--x", x), ("--y", y),
                                                        ("--report", report)) if v]
        if given:
            raise ConfigError(
                f"With a plan, screen options belong in the plan; remove {', '.join(given)} from the command "
                "line or put them in [defaults] of the plan. Only --out-dir, --jobs, --force and -q apply."
            )
        plan = load_plan(inputs[0], out_dir=out_dir, jobs=jobs)
    else:
        if not inputs:
            raise ConfigError("Give a plan (PLAN.toml) or input files, globs or folders.")
        if "value" not in options:
            raise ConfigError("Name the value column with --value COLUMN (or give a PLAN.toml).")
        if out_dir is None:
            raise ConfigError("Name the output folder with --out-dir DIR (or give a PLAN.toml that sets out_dir).")
        plan = plan_from_args(list(inputs), out_dir=out_dir, options=options, layers=list(layers) or None, by=by,
                              x=x, y=y, report=report, jobs=jobs or 1)
    progress = make_progress(quiet, stream)
    result = run_batch(plan, force=force, progress=progress)
    if not quiet:
        print(result.summary(), file=stream if stream is not None else sys.stderr, flush=True)
    return result

