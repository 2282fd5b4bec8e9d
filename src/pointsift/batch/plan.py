"""Batch plans: a TOML file (or command-line arguments) validated completely before any work starts."""

from __future__ import annotations

import difflib
import glob
import os
import re
import tomllib
import types
import typing
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

from ..config import ScreenConfig, parse_length
from ..errors import ConfigError
from .toml_lines import KeyLocator

__all__ = ["InputSpec", "BatchPlan", "parse_plan", "load_plan", "plan_from_args", "suggest"]

# Keys of an [[input]] table that are not screen options.
_INPUT_KEYS = ("path", "layers", "by", "x", "y", "name", "report")
# Of those, the ones [defaults] may also set (path and name are per input).
_DEFAULTABLE_INPUT_KEYS = ("layers", "by", "x", "y", "report")
_BATCH_KEYS = ("out_dir", "jobs", "report")
_TOP_KEYS = ("batch", "defaults", "input")
# Options that take a length ("5km") as well as a number of metres.
_LENGTH_OPTIONS = ("within", "max_distance", "coincident_tolerance")


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

    def __init__(self, source: str, locator: "KeyLocator | None") -> None:
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


def suggest(word: str, choices: Iterable[str]) -> str:
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
    errors = _PlanErrors(source, KeyLocator(text) if text is not None else None)
    option_names = ScreenConfig.option_names()
    option_kinds = _option_types()

    for key in data:
        if key not in _TOP_KEYS:
            errors.add("", key, f"unknown table or key '{key}'.{suggest(key, _TOP_KEYS)} "
                       f"Valid: {', '.join(_TOP_KEYS)}.")

    # [batch]
    batch = data.get("batch", {})
    plan_out_dir = plan_jobs = None
    if not isinstance(batch, dict):
        errors.add("", "batch", "must be a table: write [batch] on its own line.")
        batch = {}
    for key, value in batch.items():
        if key not in _BATCH_KEYS:
            errors.add("batch", key, f"unknown key.{suggest(key, _BATCH_KEYS)} Valid keys: {', '.join(_BATCH_KEYS)}.")
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
            errors.add("defaults", key, f"unknown key.{suggest(key, valid_default_keys)}{hint} "
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
                errors.add(table, key, f"unknown key.{suggest(key, valid_input_keys)} "
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
