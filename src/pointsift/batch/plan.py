"""Batch plans: a TOML file (or command-line arguments) validated completely before any work starts."""

from __future__ import annotations

import difflib
import glob
import os
import re
import tomllib
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

from ..config import (OPTIONS, OptionError, ReportConfig, ScreenConfig, caller, convert, current_caller, plan_keys,
                      spell)
from ..errors import ConfigError
from .toml_lines import KeyLocator

__all__ = ["InputSpec", "BatchPlan", "parse_plan", "load_plan", "plan_from_args", "suggest"]

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
    report_config : ReportConfig
        How those reports are drawn.
    command : {"screen", "campaigns"}
        What the entry runs (plan key ``command``).
    campaign : CampaignConfig or None
        The campaign options when ``command`` is ``"campaigns"``.
    where : str
        Place in the plan, for messages (e.g. ``"plan.toml line 12, [[input]] #2"``).
    base_dir : Path
        Directory that relative paths are resolved against.
    words : {"plan", "cli", "python"}
        Whose words messages about this entry use (:func:`pointsift.config.caller`).
    """

    paths: tuple[str, ...]
    config: ScreenConfig
    layers: tuple[str, ...] | None = None
    by: str | None = None
    x: str | None = None
    y: str | None = None
    name: str | None = None
    report: bool = False
    report_config: ReportConfig = ReportConfig()
    command: str = "screen"
    campaign: object = None
    where: str = ""
    base_dir: Path = Path(".")
    words: str = "plan"


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


_TOP_KEYS = ("batch", "defaults", "input")
#: Plan tables and the keys each accepts, from the option table.
_TABLE_KEYS = {table: plan_keys(table) for table in ("batch", "defaults", "input")}
_FILE_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._\-]*")


def _plan_value(key: str, value):
    """A plan value converted by the option table; plan-only rules for layers and name."""
    if key == "layers" and value == "all":
        return None
    if key == "layers" and not isinstance(value, list):
        raise OptionError("", option=key, problem=f'expects "all" or a list of layer names such as ["wells"], got {value!r}.')
    converted = convert(key, value)
    if key == "name" and not _FILE_NAME.fullmatch(converted):
        raise OptionError("", option=key, problem=(
            f"{value!r} is not usable as a file name; use letters, digits, '.', '_' and '-' "
            "(starting with a letter or digit)."))
    return converted


def _read_table(errors: _PlanErrors, table, entry: dict, allowed: tuple[str, ...]) -> tuple[dict, bool]:
    """Check every key of one plan table: (values by the config holding them, all fine).

    The one check for ``[batch]``, ``[defaults]`` and each ``[[input]]``; the
    keys each accepts and their kinds come from the option table. Values are
    grouped by ``Option.config``: ``"screen"``, ``"report"``, ``"campaign"``, and None for the
    settings the batch reads itself (paths, layers, out_dir...).
    """
    values: dict = {"screen": {}, "report": {}, "campaign": {}, None: {}}
    fine = True
    for key, value in entry.items():
        if key not in allowed:
            elsewhere = [name for name, keys in _TABLE_KEYS.items() if key in keys and name != table]
            hint = f" ('{key}' belongs in {_table_label(elsewhere[0]) if elsewhere[0] != 'input' else 'each [[input]]'}.)" if elsewhere else ""
            errors.add(table, key, f"unknown key.{suggest(key, allowed)}{hint} Valid keys: {', '.join(sorted(allowed))}.")
            fine = False
            continue
        try:
            converted = _plan_value(key, value)
        except OptionError as exc:
            errors.add(table, key, exc.problem)
            fine = False
            continue
        values[OPTIONS[key].config][key] = converted
    return values, fine


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
    the valid ones. The keys and their checks come from the option table
    (:data:`pointsift.config.OPTIONS`): the same checks as on the command line
    and in Python, with options named as the plan writes them.

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
    with caller("plan"):
        return _parse_plan(data, Path(base_dir), source, text, out_dir, jobs)


def _parse_plan(data, base: Path, source, text, out_dir, jobs) -> BatchPlan:
    """The body of :func:`parse_plan`; one pass over the tables, collecting every problem."""
    errors = _PlanErrors(source, KeyLocator(text) if text is not None else None)
    for key in data:
        if key not in _TOP_KEYS:
            errors.add("", key, f"unknown table or key '{key}'.{suggest(key, _TOP_KEYS)} "
                       f"Valid: {', '.join(_TOP_KEYS)}.")
    tables = {}
    for name in ("batch", "defaults"):
        table = data.get(name, {})
        if not isinstance(table, dict):
            errors.add("", name, f"must be a table: write [{name}] on its own line.")
            table = {}
        tables[name] = table
    batch_settings = _read_table(errors, "batch", tables["batch"], _TABLE_KEYS["batch"])[0][None]
    default_values, defaults_fine = _read_table(errors, "defaults", tables["defaults"], _TABLE_KEYS["defaults"])
    default_values[None] = {"report": batch_settings.get("report", False), **default_values[None]}

    entries = data.get("input", [])
    if isinstance(entries, dict):
        entries = [entries]
        errors.add("", "input", "write each input as an [[input]] table (double brackets), not [input].")
    if not isinstance(entries, list) or not entries:
        errors.add("", None, "the plan lists no inputs: add at least one [[input]] table with a path, "
                   'e.g. an [[input]] line followed by path = "data/*.gpkg".')
        entries = []
    specs = []
    for number, entry in enumerate(entries):
        spec = _input_spec(errors, ("input", number), entry, default_values, tables["defaults"], defaults_fine, base,
                           source)
        if spec is not None:
            specs.append(spec)

    chosen_out = out_dir if out_dir is not None else batch_settings.get("out_dir")
    if chosen_out is None:
        errors.add("batch", "out_dir", f"no output directory: set out_dir = \"screened\" in [batch] or pass "
                   f"{'--out-dir' if source == 'command line' else 'out_dir'}.")
    chosen_jobs = jobs if jobs is not None else batch_settings.get("jobs", 1)
    if not (isinstance(chosen_jobs, int) and chosen_jobs >= 1):
        errors.add("batch", "jobs", f"expects a whole number of worker processes, 1 or more, got {chosen_jobs!r}.")
    errors.raise_if_any()
    out_path = Path(chosen_out)
    if not out_path.is_absolute() and out_dir is None:
        out_path = base / out_path
    if out_path.exists() and not out_path.is_dir():
        raise ConfigError(f"Output directory {str(out_path)!r} is a file. Choose a directory for out_dir.")
    return BatchPlan(inputs=tuple(specs), out_dir=out_path, jobs=chosen_jobs, source=source)


def _input_spec(errors, table, entry, default_values, defaults, defaults_fine, base, source):
    """One ``[[input]]`` entry as an :class:`InputSpec`, or None (its problems recorded)."""
    if not isinstance(entry, dict):
        errors.add(table, None, f"expects a table with at least a path, got {entry!r}.")
        return None
    own, fine = _read_table(errors, table, entry, _TABLE_KEYS["input"])
    values = {config: {**default_values[config], **own[config]} for config in own}
    options, settings = values["screen"], values[None]
    if "path" not in entry:
        errors.add(table, None, 'has no path: add path = "file.gpkg" (a file, glob or directory).')
        fine = False
    elif "path" in settings:
        problem = _check_paths(settings["path"], base)
        if problem:
            errors.add(table, "path", problem)
            fine = False
    if (settings.get("x") is None) != (settings.get("y") is None):
        errors.add(table, "x" if "x" in entry else "y", "x and y name the coordinate columns together: set both.")
        fine = False
    if "value" not in options and "value" not in defaults:
        errors.add(table, None, "no value column: set value = \"<column>\" in [defaults] or in this [[input]].")
        fine = False
    if not fine or not defaults_fine:
        return None
    command = settings.get("command") or "screen"
    if command != "campaigns" and values["campaign"]:
        for key in values["campaign"]:
            errors.add(table, key, 'is a campaign key: set command = "campaigns" in this entry (or in [defaults]) '
                       "to screen repeated campaigns, or remove it.")
        return None
    if command == "campaigns" and settings.get("by") is not None:
        errors.add(table, "by", 'does not apply with command = "campaigns": the campaigns come from date or '
                   "campaign; remove by.")
        return None
    try:
        config = ScreenConfig(**options)
        report_config = ReportConfig(**values["report"])
        campaign = None
        if command == "campaigns":
            from ..campaigns import CampaignConfig

            campaign = CampaignConfig(screen=config, **values["campaign"])
    except OptionError as exc:
        _joint_problem(errors, table, entry, defaults, exc)
        return None
    line = errors.locator.line_of(table, None) if errors.locator else None
    return InputSpec(
        paths=settings["path"],
        config=config,
        layers=settings.get("layers"),
        by=settings.get("by"),
        x=settings.get("x"),
        y=settings.get("y"),
        name=settings.get("name"),
        report=bool(settings.get("report", False)),
        report_config=report_config,
        command=command,
        campaign=campaign,
        where=f"{source}{f' line {line}' if line else ''}, [[input]] #{table[1] + 1}",
        base_dir=base,
    )


def _joint_problem(errors: _PlanErrors, table, entry: dict, defaults: dict, exc: OptionError) -> None:
    """Record a rule joining options (``review_z`` below ``suspect_z``) at the key to change: the entry's
    own key, or once for all entries the ``[defaults]`` key it inherits."""
    names = exc.names or (exc.option,)
    own = [name for name in names if name in entry]
    if not own and any(name in defaults for name in names):
        message = f"{errors.place('defaults', next(n for n in names if n in defaults))}: {exc.problem}"
        if message not in errors.messages:  # one wrong default, reported once for all entries
            errors.messages.append(message)
        return
    errors.add(table, own[0] if own else None, exc.problem)


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
    config: ScreenConfig | None = None,
    options: dict | None = None,
    layers: Sequence[str] | None = None,
    by: str | None = None,
    x: str | None = None,
    y: str | None = None,
    report: bool = False,
    jobs: int = 1,
    report_config: ReportConfig | None = None,
) -> BatchPlan:
    """Build a plan from arguments (the direct form of ``pointsift batch``, or Python).

    Parameters
    ----------
    inputs : sequence of str
        Files, globs or directories.
    out_dir : path
        Output directory.
    config : ScreenConfig, optional
        The screen options, as built by the command line.
    options : dict, optional
        Or the screen options as :class:`ScreenConfig` keywords (at least ``value``).
    layers, by, x, y, report, jobs
        As in an ``[[input]]`` table of a plan.
    report_config : ReportConfig, optional
        How the reports are drawn (its defaults when omitted).

    Returns
    -------
    BatchPlan

    Raises
    ------
    ConfigError
        An input that does not exist, x without y, an invalid option.
    """
    if (config is None) == (options is None):
        raise ConfigError("Give the screen options once: config=ScreenConfig(...) or options={...}.")
    if config is None:
        config = ScreenConfig(**options)
    paths = tuple(str(p) for p in inputs)
    if not paths:
        raise ConfigError("Give input files, globs or folders (or a PLAN.toml).")
    base = Path.cwd()
    problem = _check_paths(paths, base)
    if problem:
        raise ConfigError(f"Input {problem}")
    if (x is None) != (y is None):
        raise ConfigError(f"Name the coordinate columns together: {spell('x', 'COLUMN')} and {spell('y', 'COLUMN')}.")
    if not (isinstance(jobs, int) and not isinstance(jobs, bool) and jobs >= 1):
        raise ConfigError(f"{spell('jobs')} must be a whole number of worker processes, 1 or more, got {jobs!r}.")
    out_path = Path(out_dir)
    if out_path.exists() and not out_path.is_dir():
        raise ConfigError(f"Output directory {str(out_path)!r} is a file. Choose a directory for {spell('out_dir')}.")
    spec = InputSpec(paths=paths, config=config, layers=tuple(layers) if layers else None, by=by, x=x, y=y,
                     report=bool(report), report_config=report_config or ReportConfig(), where="command line",
                     base_dir=base, words=current_caller())
    return BatchPlan(inputs=(spec,), out_dir=out_path, jobs=jobs, source="command line")
