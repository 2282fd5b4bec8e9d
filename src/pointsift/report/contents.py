"""What the report says: the run's :class:`~pointsift.findings.Findings` shaped into one JSON document, and its figures.

:func:`collect` computes nothing: every number comes from the findings the
screen (or ``describe``) made, and every figure is drawn from them. The HTML
page is rendered from the document alone (:mod:`pointsift.report.html`), so
the page, the JSON and the GeoPackage cannot disagree. One function per
section; each returns its part of the document and its figures.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field

import numpy as np

from ..findings import flagged_rows, plain
from . import charts
from . import figures as fg

__all__ = ["SUMMARY_FORMAT", "SUMMARY_VERSION", "Collected", "collect", "plain", "flagged_rows"]

#: ``format`` of the summary JSON document.
SUMMARY_FORMAT = "pointsift-summary"
#: ``format_version`` of the summary JSON document (bumped when a field changes meaning).
SUMMARY_VERSION = 2

#: Out-of-line lag pairs listed in the page and the JSON, farthest out first (all are in the GeoPackage).
PAIRS_LISTED = 100

#: Flagged points shown with a neighbourhood view at the top of the page (the table lists all).
NEIGHBOURHOOD_VIEWS = 60


@dataclass
class Collected:
    """The report's content.

    Attributes
    ----------
    summary : dict
        The summary document (plain JSON values).
    figures : dict
        ``{name: {"uri": data URI, "alt": text}}`` for the page.
    """

    summary: dict
    figures: dict = field(default_factory=dict)


def _section(summary: dict, key: str, title: str, available: bool, note: str = "") -> None:
    summary["sections"].append({"id": key, "title": title, "available": bool(available), "note": note})


def _figure(fig, alt: str) -> dict:
    return {"uri": fg.figure_data_uri(fig), "alt": alt}


def _head(findings, run_info: dict, title: str | None, versions: dict, caution: str) -> dict:
    from .._version import __version__

    where = os.path.basename(run_info.get("input_path") or "") or "the layer"
    if run_info.get("input_layer"):
        where = f"{where} (layer {run_info['input_layer']})"
    value = findings.value_column
    default_title = (f"Screening report: {value} in {where}" if findings.command == "screen"
                     else f"Description of {value} in {where}")
    work = findings.map.work_crs
    return {
        "format": SUMMARY_FORMAT,
        "format_version": SUMMARY_VERSION,
        "command": findings.command,
        "title": title or default_title,
        "created": run_info.get("created"),
        "pointsift_version": __version__,
        "input": {
            "path": run_info.get("input_path"), "layer": run_info.get("input_layer"),
            "format": run_info.get("input_format"), "sha256": run_info.get("input_sha256"),
            "rows": int(len(findings.map.values)), "value_column": value, "id_column": run_info.get("id_column"),
            "output_path": run_info.get("output_path"),
        },
        "crs": {"input": run_info.get("input_crs"), "work": run_info.get("work_crs", work.to_string() if work else None),
                "work_name": run_info.get("work_crs_name", work.name if work else None)},
        "counts": plain(findings.counts),
        "thresholds": plain(findings.thresholds),
        "parameters": plain(run_info.get("parameters", {})),
        "settings": plain({k: run_info[k] for k in ("graph", "trend", "local_autocorrelation", "predictor", "strip_widths_m",
                                                   "context", "judged_scale", "repairs")
                           if k in run_info}),
        "versions": plain(run_info.get("versions") or versions),
        "caution": run_info.get("caution") or caution,
        "notes": plain(list(run_info.get("notes", []))),
        "sections": [],
    }


def _map_part(findings, summary: dict, max_points: int, max_labels: int) -> dict:
    m = findings.map
    usable = np.isfinite(m.values) & np.isfinite(m.xy).all(axis=1)
    centre = np.nanmedian(m.xy[usable], axis=0) if usable.any() else np.array([np.nan, np.nan])
    north = fg.grid_north_offset(m.work_crs, float(centre[0]), float(centre[1])) if np.isfinite(centre).all() else None
    summary["crs"]["grid_north_offset_deg"] = plain(north)
    fig, drawn = fg.plot_status_map(m, crs_label=summary["crs"]["work"], value_label=findings.value_column,
                                    north_offset=north, max_points=max_points, max_labels=max_labels)
    summary["map"] = {"screened": m.status is not None, **drawn}
    _section(summary, "map", "Map", True)
    return {"status_map": _figure(fig, "Map of the points: values shaded, statuses by colour and shape")}


def _flagged_part(findings, summary: dict) -> dict:
    flagged = findings.flagged
    summary["flagged"] = flagged
    if flagged is None:
        _section(summary, "flagged", "Points to check", False,
                 "This layer was described, not screened: there are no statuses. Run 'pointsift screen' "
                 "or 'pointsift describe --with-screen' for the points to check.")
    else:
        summary["flagged_views"] = min(flagged["count"], NEIGHBOURHOOD_VIEWS) if flagged["neighbourhoods"] else 0
        _section(summary, "flagged", "Points to check", True)
    return {}


def _distribution_part(findings, summary: dict) -> dict:
    d = findings.distribution
    summary["distribution"] = d
    fig = charts.plot_histogram(d["histogram"], label=findings.value_column)
    _section(summary, "distribution", "Distribution", True)
    return {"histogram": _figure(fig, "Histogram of the values, far values listed apart")}


def _strips_part(findings, summary: dict) -> dict:
    summary["strips"] = findings.strips
    _section(summary, "strips", "Strips", True)
    fig = charts.plot_strip_profiles(findings.strips, label=findings.value_column)
    return {"strips": _figure(fig, "Strip means and medians across the area")}


def _local_part(findings, summary: dict, max_points: int, seed: int) -> dict:
    local = findings.local
    if local is None:
        summary["local_evidence"] = {"available": False}
        why = ("This layer was screened before; the residual map and the neighbour scatter are made with the screen "
               "itself: run 'pointsift screen --report' on the original input." if findings.counts is not None else
               "The residual map and the neighbour scatter need a screen: run 'pointsift screen' or "
               "'pointsift describe --with-screen'.")
        _section(summary, "local", "Local evidence", False, why)
        return {}
    m = findings.map
    fig, drawn = fg.plot_residual_map(m.xy, m.residual_z, m.status, crs_label=summary["crs"]["work"],
                                      limit=findings.thresholds["suspect_z"],
                                      north_offset=summary["crs"].get("grid_north_offset_deg"),
                                      max_points=max_points, seed=seed)
    fig2, drawn2 = fg.plot_neighbour_scatter(m.standardized, m.neighbour_mean, m.status,
                                             quadrant_counts=local["quadrant_counts"], slope=local["slope"],
                                             max_points=max_points, seed=seed)
    summary["local_evidence"] = {**local, "residual_map": drawn,
                                 "neighbour_scatter": {"points": local["points"], "quadrant_counts": local["quadrant_counts"],
                                                       "significant_counts": local["significant_counts"],
                                                       "fdr": local["fdr"], "slope": local["slope"], **drawn2}}
    _section(summary, "local", "Local evidence", True)
    return {"residual_map": _figure(fig, "Map of the standardized local residuals"),
            "neighbour_scatter": _figure(fig2, "Each standardized value against the mean of its neighbours")}


def _lag_pairs_part(findings, summary: dict) -> dict:
    lp = findings.lag_pairs
    if lp is None:
        summary["lag_pairs"] = {"available": False}
        _section(summary, "lag_pairs", "Lag pairs", False, "Not available: no lag-pair screen was made.")
        return {}
    # the page and the JSON list the farthest-out pairs; every one is in the GeoPackage's lag_pairs layer
    pairs = lp["flagged_pairs"]
    listed = sorted(range(len(pairs)), key=lambda i: (-abs(pairs[i]["pair_z"] or 0.0), i))[:PAIRS_LISTED]
    summary["lag_pairs"] = {**lp, "flagged_pairs": [pairs[i] for i in sorted(listed)],
                            "flagged_pairs_listed": len(listed)}
    _section(summary, "lag_pairs", "Lag pairs", True)
    out = {}
    for panel in findings.drawing.get("lag_panels", []):
        fig = charts.plot_lag_panels(panel, label=findings.value_column, detrended=lp["values"] != "values")
        out[f"lag_pairs_{panel['direction']}"] = _figure(fig, f"Lag pairs, {panel['name']}")
    return out


def _variogram_part(findings, summary: dict) -> dict:
    v = findings.variogram or {"available": False, "reason": "not computed"}
    summary["variogram"] = v
    if not v.get("available"):
        _section(summary, "variogram", "Variogram", False, f"Not available: {v.get('reason')}.")
        return {}
    _section(summary, "variogram", "Variogram", True)
    fig = charts.plot_variogram(v, findings.drawing.get("variogram", {}), label=findings.value_column)
    return {"variogram": _figure(fig, "Semivariograms with the fitted model")}


def collect(findings, *, run_info: dict, max_points: int = 50_000, max_labels: int = 80, seed: int = 0,
            title: str | None = None, versions: dict | None = None, caution: str = "") -> Collected:
    """Shape the findings into the summary document and draw the figures.

    Parameters
    ----------
    findings : Findings
        From ``ScreenResult.findings`` or ``Description.findings``.
    run_info : dict
        The run record (provenance, parameters, versions, caution).
    max_points : int
        Maps and clouds draw at most about this many points (seeded sample
        or density shading beyond; stated). Tables keep every row.
    max_labels : int
        Suspects labelled on the map (strongest first).
    seed : int
        Seed of the drawing samples.
    title : str, optional
        Page title.
    versions, caution : optional
        Used when the run record has none.

    Returns
    -------
    Collected
    """
    started = time.perf_counter()
    timings: dict[str, float] = {}
    summary = _head(findings, run_info, title, versions or {}, caution)
    figs: dict = {}
    parts = (("map", lambda: _map_part(findings, summary, max_points, max_labels)),
             ("flagged", lambda: _flagged_part(findings, summary)),
             ("distribution", lambda: _distribution_part(findings, summary)),
             ("strips", lambda: _strips_part(findings, summary)),
             ("local", lambda: _local_part(findings, summary, max_points, seed)),
             ("lag_pairs", lambda: _lag_pairs_part(findings, summary)),
             ("variogram", lambda: _variogram_part(findings, summary)))
    for name, part in parts:
        t = time.perf_counter()
        figs.update(part())
        timings[f"{name}_s"] = time.perf_counter() - t
    timings["total_s"] = time.perf_counter() - started
    summary["report_timings_s"] = {k: round(v, 3) for k, v in timings.items()}
    summary["run_timings_s"] = plain(run_info.get("timings_s", {}))
    summary["figures"] = sorted(figs)
    return Collected(summary=summary, figures=figs)
