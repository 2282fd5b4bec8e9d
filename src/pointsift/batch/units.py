"""Expansion of a plan into units: a file, a layer, or a group of a layer, each screened on its own."""

from __future__ import annotations

import glob
import hashlib
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path

from ..config import ReportConfig, ScreenConfig, caller
from ..errors import PointsiftError
from ..io import list_layers, read_points
from .index import INDEX_STEM
from .plan import BatchPlan, InputSpec, suggest

__all__ = ["Unit", "DIRECTORY_SUFFIXES", "expand_units", "group_labels", "describe_failure", "with_origin", "read_key"]

#: File suffixes picked up when an input names a directory.
DIRECTORY_SUFFIXES = (".gpkg", ".shp", ".csv", ".parquet", ".geoparquet", ".geojson", ".fgb")


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
    report_config : ReportConfig
        How the report is drawn.
    command : {"screen", "campaigns"}
        What the unit runs.
    campaign : CampaignConfig or None
        The campaign options of a ``"campaigns"`` unit.
    problem : str or None
        Set when the unit failed already during expansion (unreadable file,
        missing layer or column); it is then recorded as failed.
    origin : str
        The plan entry it came from (e.g. ``"plan.toml line 12, [[input]] #2"``).
    words : str
        Whose words messages use (``"plan"``, ``"cli"``, ``"python"``).
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
    report_config: ReportConfig = ReportConfig()
    command: str = "screen"
    campaign: object = None
    problem: str | None = None
    origin: str = ""
    words: str = "plan"


_UNSAFE = re.compile(r"[^A-Za-z0-9._\-]+")


def _safe(text: str) -> str:
    cleaned = _UNSAFE.sub("_", text).strip("._") or "_"
    return cleaned[:80]


def _is_batch_output(path: Path) -> bool:
    """An output of an earlier batch: the index, or a GeoPackage with its run record beside it."""
    from .fingerprints import RECORD_SUFFIX

    return path.stem == INDEX_STEM or path.with_name(f"{path.stem}{RECORD_SUFFIX}").exists()


def _resolve_paths(spec: InputSpec, exclude: Path) -> list[Path]:
    """Input files of a spec. Folders and globs skip hidden files and the outputs of earlier
    batches in the output folder; a file named explicitly is always taken (never dropped silently)."""
    found: list[tuple[Path, bool]] = []  # (path, named explicitly)
    for text in spec.paths:
        full = Path(text) if Path(text).is_absolute() else spec.base_dir / text
        if glob.has_magic(text):
            matches = sorted(Path(p) for p in glob.glob(str(full), recursive=True))
        else:
            matches = [full]
        for match in matches:
            if match.is_dir():
                found.extend(
                    (p, False) for p in sorted(match.iterdir())
                    if p.is_file() and p.suffix.lower() in DIRECTORY_SUFFIXES and not p.name.startswith(".")
                )
            elif match.is_file():
                found.append((match, not glob.has_magic(text)))
    exclude = exclude.resolve()
    unique, seen = [], set()
    for path, named in found:
        resolved = path.resolve()
        if resolved in seen or (not named and resolved.is_relative_to(exclude) and _is_batch_output(path)):
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


def expand_units(plan: BatchPlan, layers_read: dict | None = None) -> list[Unit]:
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
    layers_read : dict, optional
        Filled with what expansion read to find the groups, so the runner
        hands each group its rows instead of reading and hashing the layer
        again per group: ``(path, layer, x, y, crs, thousands)`` ->
        ``(frame, source, labels)`` (the group label of each row).

    Returns
    -------
    list of Unit
    """
    drafts: list[tuple[tuple[str, ...], dict]] = []  # (name parts, unit fields)
    for spec in plan.inputs:
        with caller(spec.words):  # messages about this entry in its own words
            drafts.extend(_spec_drafts(spec, plan.out_dir, layers_read if layers_read is not None else {}))
    unique_drafts, identities = [], set()
    for parts, fields in drafts:
        identity = _identity(fields)
        if identity not in identities:  # the same file listed twice with the same settings
            identities.add(identity)
            unique_drafts.append((parts, fields))
    drafts = unique_drafts
    names = _unique_names(drafts)
    units = [Unit(name=name, **fields) for name, (_, fields) in zip(names, drafts)]
    _refuse_outputs_over_inputs(units, plan.out_dir)
    return units


def _refuse_outputs_over_inputs(units: list, out_dir: Path) -> None:
    """An unusable plan (exit 2): some unit's output would be one of the inputs' files."""
    from ..errors import ConfigError, OutputError
    from ..io import check_output_paths
    from .fingerprints import RECORD_SUFFIX

    inputs = sorted({unit.path for unit in units}, key=str)
    for unit in units:
        for target in (out_dir / f"{unit.name}.gpkg", out_dir / f"{unit.name}.html", out_dir / f"{unit.name}{RECORD_SUFFIX}"):
            try:
                check_output_paths([("output", target)], inputs)
            except OutputError:
                raise ConfigError(
                    f"The output {str(target)!r} of input {unit.display!r} would replace an input file; "
                    "an input is never written over. Choose an --out-dir (or out_dir) other than the inputs' folder."
                ) from None


def read_key(unit: Unit) -> tuple:
    """What identifies one read of a unit's layer (the arguments :func:`pointsift.io.read_points` gets)."""
    return (str(unit.path), unit.layer, unit.x, unit.y, unit.config.crs, unit.config.thousands)


def _spec_drafts(spec: InputSpec, out_dir: Path, layers_read: dict) -> list[tuple[tuple[str, ...], dict]]:
    """(name parts, unit fields) of every unit of one plan entry; problems become fields, never exceptions."""
    drafts: list[tuple[tuple[str, ...], dict]] = []
    files = _resolve_paths(spec, out_dir)
    for path in files:
        base_fields = dict(
            path=path, display=_display(path), config=spec.config, by=spec.by, x=spec.x, y=spec.y,
            report=spec.report, report_config=spec.report_config, command=spec.command, campaign=spec.campaign,
            origin=spec.where, words=spec.words,
        )
        layers: list[str | None] = [None]
        layer_in_name = False
        if path.suffix.lower() == ".gpkg":
            try:
                available = list_layers(path)
            except Exception as exc:  # corrupt or unreadable file: recorded, batch continues
                drafts.append(((spec.name or path.stem,), dict(base_fields, problem=describe_failure(exc, path))))
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
                            f"{', '.join(available) or '(none)'}.{suggest(name, available)}")))
            layers = [name for name in layers if name not in missing]
        for layer in layers:
            stem = (spec.name or path.stem,) + ((layer,) if layer_in_name and layer else ())
            fields = dict(base_fields, layer=layer)
            if spec.by is None:
                drafts.append((stem, fields))
                continue
            try:
                frame, source = read_points(path, layer=layer, x=spec.x, y=spec.y, crs=spec.config.crs,
                                            thousands=spec.config.thousands)
            except Exception as exc:
                drafts.append((stem, dict(fields, problem=describe_failure(exc, path))))
                continue
            if spec.by not in frame.columns:
                columns = [c for c in frame.columns if c != frame.geometry.name]
                drafts.append((stem, dict(fields, problem=(
                    f"grouping column {spec.by!r} is not in {path.name}"
                    f"{f' layer {layer!r}' if layer else ''}; its columns are: {', '.join(map(str, columns))}."
                    f"{suggest(spec.by, map(str, columns))}"))))
                continue
            labels = group_labels(frame[spec.by])
            layers_read[(str(path), layer, spec.x, spec.y, spec.config.crs, spec.config.thousands)] = (
                frame, source, labels)
            present = sorted({label for label in labels if label is not None})
            if any(label is None for label in labels):
                present.append(None)
            for label in present:
                part = f"{spec.by}-{label if label is not None else 'missing'}"
                drafts.append((stem + (part,), dict(fields, group=label)))
    return drafts


def _identity(fields: dict) -> str:
    config = fields["config"]
    return json.dumps(
        [str(Path(fields["path"]).resolve()), fields.get("layer"), fields.get("by"), fields.get("group"),
         fields.get("x"), fields.get("y"), config.as_record(), fields.get("command", "screen"),
         fields["campaign"].as_record() if fields.get("campaign") is not None else None],
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


def with_origin(message: str, unit: Unit) -> str:
    """Point a data problem at the plan entry to fix (the message already names options as the plan does)."""
    if unit.words != "plan" or not unit.origin:
        return message
    return f"{message} (plan entry: {unit.origin})"


def describe_failure(exc: BaseException, path: Path) -> str:
    """Message for a failed unit: ours as written, others with the file named."""
    if isinstance(exc, PointsiftError):
        return str(exc)
    text = str(exc).strip() or type(exc).__name__
    if str(path) in text or path.name in text:
        return f"{type(exc).__name__}: {text}"
    return f"{path.name} could not be read or screened ({type(exc).__name__}: {text})."
