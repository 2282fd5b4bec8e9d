"""Read a file, screen it, write the GeoPackage: the step the CLI and the batch runner share."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field
from pathlib import Path

from .config import ScreenConfig
from .io import SCREENED_LAYER, read_points, run_info_table, write_geopackage
from .pipeline import ScreenResult, screen_frame

__all__ = ["RunResult", "screen_file", "write_screen"]


@dataclass(frozen=True)
class RunResult:
    """Outcome of :func:`screen_file`.

    Attributes
    ----------
    input_path, layer, output_path : str
        What was read and written.
    counts : dict
        Rows per status.
    seconds : float
        Wall time of read, screen and write.
    input_sha256 : str
        Hash of the input file.
    result : ScreenResult
        The full result (frames and method outputs).
    """

    input_path: str
    layer: str | None
    output_path: str
    counts: dict
    seconds: float
    input_sha256: str
    result: ScreenResult = field(repr=False)
    extra_outputs: dict = field(default_factory=dict)


def write_screen(result: ScreenResult, out_path, *, overwrite: bool = False, protect: tuple[str, ...] = ()) -> Path:
    """Write a screen's layer, extra layers and ``run_info`` to one GeoPackage (atomically).

    Parameters
    ----------
    result : ScreenResult
        From :func:`pointsift.pipeline.screen_frame`.
    out_path : path-like
        Target ``.gpkg``.
    overwrite : bool
        Replace an existing file.
    protect : tuple of str
        Input paths that must never be written.

    Returns
    -------
    pathlib.Path
    """
    layers = {SCREENED_LAYER: result.frame}
    layers.update(result.tables)
    layers["run_info"] = run_info_table(result.run_info)
    # the caution travels with the layer itself (the GeoPackage's gpkg_contents.description)
    caution = result.run_info.get("caution")
    descriptions = {SCREENED_LAYER: caution} if caution else None
    return write_geopackage(out_path, layers, overwrite=overwrite, protect=protect, descriptions=descriptions)


def screen_file(
    input_path,
    out_path,
    config: ScreenConfig,
    *,
    layer: str | None = None,
    x: str | None = None,
    y: str | None = None,
    overwrite: bool = False,
    frame_filter=None,
    source_note: str | None = None,
    report_path=None,
    summary_json_path=None,
    read=None,
    report_config=None,
) -> RunResult:
    """Read ``input_path``, screen it with ``config`` and write ``out_path``.

    Parameters
    ----------
    input_path : path-like
        GeoPackage, shapefile, CSV or GeoParquet.
    out_path : path-like
        Output GeoPackage (written atomically, never over the input).
    config : ScreenConfig
        Options.
    layer, x, y : str, optional
        Layer of a multi-layer file; coordinate columns of a table.
    overwrite : bool
        Replace an existing output.
    frame_filter : callable, optional
        Applied to the frame after reading (the batch runner selects a
        group with it); must return a GeoDataFrame.
    source_note : str, optional
        Recorded in ``run_info`` (for example the group screened).
    report_path : path-like, optional
        Also write the self-contained HTML report here (after the GeoPackage).
    summary_json_path : path-like, optional
        Also write the JSON summary (the report's numbers) here.
    read : tuple of (GeoDataFrame, SourceInfo), optional
        The rows already read from ``input_path`` (with these ``layer``,
        ``x``, ``y`` and the config's ``crs`` and ``thousands``) and their
        provenance: the batch runner passes each group its rows, read and
        hashed once per layer. ``frame_filter`` still applies.
    report_config : ReportConfig, optional
        How the report is drawn (its defaults when omitted).

    Returns
    -------
    RunResult
    """
    started = time.perf_counter()
    if read is None:
        frame, source = read_points(input_path, layer=layer, x=x, y=y, crs=config.crs, thousands=config.thousands)
    else:
        frame, source = read
    if frame_filter is not None:
        frame = frame_filter(frame)
    result = screen_frame(frame, config, source=source)
    if source_note:
        result.run_info["group"] = source_note
    result.run_info["output_path"] = str(out_path)
    written = write_screen(result, out_path, overwrite=overwrite, protect=(os.fspath(input_path),))
    extra = {}
    if report_path is not None or summary_json_path is not None:
        from .report import build_report

        extra = build_report(result, config=report_config).write(report_path, summary_json_path, protect=(os.fspath(input_path), str(written)))
    return RunResult(
        input_path=os.fspath(input_path),
        layer=source.layer,
        output_path=str(written),
        counts=result.counts,
        seconds=time.perf_counter() - started,
        input_sha256=source.sha256,
        result=result,
        extra_outputs=extra,
    )
