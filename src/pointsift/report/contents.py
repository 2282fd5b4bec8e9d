"""What the report says: every number of the page, computed once, as plain JSON values.

:func:`collect` gathers the run record, the exploratory description, the
local evidence, the lag pairs and the variogram into one dict (the
``--summary-json`` document, see ``summary.schema.json``) and draws the
figures. The HTML page is rendered from that dict alone
(:mod:`pointsift.report.html`), so the page and the JSON cannot disagree.
"""

from __future__ import annotations

import logging
import math
import os
import time
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from . import figures as fg

__all__ = ["SUMMARY_FORMAT", "SUMMARY_VERSION", "Collected", "collect", "plain", "flagged_rows"]

log = logging.getLogger(__name__)

#: ``format`` of the summary JSON document.
SUMMARY_FORMAT = "pointsift-summary"
#: ``format_version`` of the summary JSON document (bumped when a field changes meaning).
SUMMARY_VERSION = 1

#: Statuses listed in tables of flagged points, strongest first.
FLAGGED = ("suspect", "review")


def plain(value):
    """``value`` as plain JSON: numpy scalars to Python, non-finite floats to None, tuples to lists."""
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, str):
        return value
    return str(value)


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


def flagged_rows(status, score, row_order=None) -> np.ndarray:
    """Rows of ``suspect`` then ``review`` points, each group by score (largest first), then by row.

    Parameters
    ----------
    status : array_like of str
    score : array_like of float

    Returns
    -------
    ndarray of int
    """
    status = np.asarray(status, dtype=object)
    score = np.asarray(score, dtype=float)
    rows = np.flatnonzero(np.isin(status, FLAGGED))
    rank = np.where(status[rows] == "suspect", 0, 1)
    key = -np.nan_to_num(score[rows], nan=-np.inf)
    return rows[np.lexsort((rows, key, rank))]


def _section(summary: dict, key: str, title: str, available: bool, note: str = "") -> None:
    summary["sections"].append({"id": key, "title": title, "available": bool(available), "note": note})


def _histogram_record(fig, values, bin_width: float | None = None, max_bins: int = 200) -> dict:
    """Bin edges and counts of the histogram ``fig`` shows.

    The edges are :func:`pointsift.methods.summary.histogram_edges`, the same
    that :func:`~pointsift.methods.summary.plot_histogram` draws; reading them
    back from the bars would lose the last digits.
    """
    from ..methods.summary import histogram_edges

    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    edges, width, _ = histogram_edges(x, bin_width, max_bins)
    counts, _ = np.histogram(x, bins=edges)
    drawn = [int(round(p.get_height())) for p in fig.axes[0].patches]
    if drawn != counts.tolist():  # the figure's rule changed: say so rather than report other numbers
        log.warning("histogram bins of the report differ from the figure's; report the figure's counts")
        counts = np.asarray(drawn)
    return {"edges": edges.tolist(), "counts": counts.tolist(), "bin_width": float(width), "title": fig.axes[0].get_title()}


def _summary_figures(s) -> dict:
    return plain(s.as_dict())


def _with_units(fig, value_label: str, unit_of: str | None = None):
    """Put units on axis labels of figures drawn by the method modules (separations are metres)."""
    for ax in fig.axes:
        x, y = ax.get_xlabel(), ax.get_ylabel()
        if x == "separation":
            ax.set_xlabel("separation (m)")
        if y == "semivariance":
            ax.set_ylabel(f"semivariance (squared units of {unit_of or value_label})")
        for side, text in (("x", x), ("y", y)):
            if text in ("value at tail", "value at head"):
                new = f"{text.replace('value', value_label)}"
                (ax.set_xlabel if side == "x" else ax.set_ylabel)(new)
    return fig


@dataclass
class _LightDescription:
    """The parts of :class:`pointsift.explore.Description` a screen's report needs."""

    summary: object
    shift: object
    unscreened: dict
    stem_leaf: object
    strips: object
    trend_info: dict
    trend: object = None
    figures: dict = field(default_factory=dict)


def _light_description(prepared, suspect_mask, trend_info: dict) -> _LightDescription:
    from ..methods.stemleaf import stem_and_leaf_table
    from ..methods.summary import global_summary, summary_shift

    usable = prepared.usable
    values = _usable_values(prepared)
    mask = np.asarray(suspect_mask, dtype=bool)
    return _LightDescription(
        summary=global_summary(values[usable]),
        shift=summary_shift(values[usable], mask[usable]),
        unscreened=dict(Counter(str(r) for r in prepared.unscreened_reason[~usable]).most_common()),
        stem_leaf=stem_and_leaf_table(values[usable]),
        strips=_LazyStrips(prepared, values),
        trend_info=dict(trend_info),
    )


class _LazyStrips:
    """Strips with the default settings, computed only when the screen did not bring its own."""

    def __init__(self, prepared, values):
        self._args = (prepared.xy[:, 0], prepared.xy[:, 1], values)
        self._result = None

    def __getattr__(self, name):
        if name.startswith("_"):
            raise AttributeError(name)
        if self._result is None:
            from ..methods.strips import strip_summary

            self._result = strip_summary(*self._args)
        return getattr(self._result, name)


def _usable_values(prepared):
    return np.where(prepared.usable, prepared.values, np.nan)


def _trend_residuals(result, description, prepared):
    """Values with the regional trend removed, as the screen's cluster statistics used them."""
    if result is not None and "detrended" in result.artefacts:
        info = result.run_info.get("trend", {})
        values = np.where(prepared.usable, np.asarray(result.artefacts["detrended"], dtype=float), np.nan)
        return values, info.get("method", "none")
    if description is not None and description.trend is not None:
        return np.where(prepared.usable, np.asarray(description.trend.residual, dtype=float), np.nan), \
            description.trend_info.get("method", "trend")
    return _usable_values(prepared), "none"


def collect(
    *,
    prepared,
    run_info: dict,
    command: str,
    result=None,
    description=None,
    status=None,
    score=None,
    expected=None,
    lag_pairs=None,
    variogram=None,
    strips=None,
    bin_width: float | None = None,
    max_points: int = 50_000,
    max_labels: int = 40,
    seed: int = 0,
    title: str | None = None,
) -> Collected:
    """Compute every number and figure of the report.

    Parameters
    ----------
    prepared : Prepared
        The prepared layer (work-CRS coordinates, values, ids).
    run_info : dict
        The run record (``ScreenResult.run_info`` or the describe record).
    command : {"screen", "describe"}
        What made the report.
    result : ScreenResult, optional
        The screen (local evidence needs its neighbour graph).
    description : Description, optional
        The exploratory description (computed here when omitted).
    status, score, expected : array_like, optional
        Status, score and expected value per row when there is no ``result``
        (a layer screened before); None for an unscreened layer.
    lag_pairs : LagPairScreen or False, optional
        A lag-pair screen already made; computed here when None; False to leave the section out.
    variogram : VariogramAnalysis or False, optional
        Likewise for the variogram.
    strips : StripResult, optional
        Strips already computed (the screen's, written to its GeoPackage);
        the description's otherwise.
    bin_width : float, optional
        Histogram bin width the description's figure was drawn with
        (Freedman-Diaconis when None).
    max_points : int
        Maps and clouds draw at most about this many points (seeded sample
        or density shading beyond; stated). Tables keep every row.
    max_labels : int
        Suspects labelled on the map (strongest first).
    seed : int
        Seed of the drawing samples.
    title : str, optional
        Page title.

    Returns
    -------
    Collected
    """
    from .. import __version__

    timings: dict[str, float] = {}
    started = time.perf_counter()
    n = int(prepared.n)
    ids = np.asarray(prepared.ids, dtype=object)
    frame = result.frame if result is not None else prepared.frame
    if result is not None:
        status = frame["screen_status"].to_numpy(dtype=object)
        score = frame["screen_score"].to_numpy(dtype=float)
        expected = frame["expected_value"].to_numpy(dtype=float)
    screened = status is not None
    value_column = run_info.get("value_column")
    where = os.path.basename(run_info.get("input_path") or "") or "the layer"
    if run_info.get("input_layer"):
        where = f"{where} (layer {run_info['input_layer']})"
    summary: dict = {
        "format": SUMMARY_FORMAT,
        "format_version": SUMMARY_VERSION,
        "command": command,
        "title": title or f"Screening report: {value_column} in {where}",
        "created": run_info.get("created"),
        "pointsift_version": __version__,
        "input": {
            "path": run_info.get("input_path"),
            "layer": run_info.get("input_layer"),
            "format": run_info.get("input_format"),
            "sha256": run_info.get("input_sha256"),
            "rows": n,
            "value_column": value_column,
            "id_column": run_info.get("id_column"),
            "output_path": run_info.get("output_path"),
        },
        "crs": {
            "input": run_info.get("input_crs", prepared.input_crs.to_string()),
            "work": run_info.get("work_crs", prepared.work_crs.to_string()),
            "work_name": run_info.get("work_crs_name", prepared.work_crs.name),
        },
        "counts": None,
        "parameters": plain(run_info.get("parameters", {})),
        "settings": plain({k: run_info[k] for k in ("graph", "trend", "local_autocorrelation", "predictor", "strip_widths_m")
                           if k in run_info}),
        "versions": plain(run_info.get("versions") or _versions()),
        "caution": run_info.get("caution") or _caution(),
        "notes": plain(list(run_info.get("notes", []))),
        "sections": [],
    }
    if screened:
        status = np.asarray(status, dtype=object)
        summary["counts"] = {s: int((status == s).sum()) for s in ("suspect", "review", "ok", "unscreened")}

    # ------------------------------------------------------------------ map
    xy = np.asarray(prepared.xy, dtype=float)
    centre = np.nanmedian(xy[prepared.usable], axis=0) if prepared.usable.any() else np.array([np.nan, np.nan])
    north = fg.grid_north_offset(prepared.work_crs, float(centre[0]), float(centre[1])) if np.isfinite(centre).all() else None
    summary["crs"]["grid_north_offset_deg"] = plain(north)
    crs_label = summary["crs"]["work"]
    figs: dict = {}
    t = time.perf_counter()
    map_status = status if screened else np.where(prepared.usable, "ok", "unscreened").astype(object)
    map_score = score if screened else np.full(n, np.nan)
    fig, drawn = fg.plot_status_map(
        xy, map_status, ids, map_score, crs_label=crs_label, north_offset=north, max_points=max_points,
        max_labels=max_labels,
        words=None if screened else {"ok": "has a value", "unscreened": "no usable value"},
        title="Points by screening status" if screened else "Points (described, not screened)",
    )
    figs["status_map"] = {"uri": fg.figure_data_uri(fig), "alt": "Map of the points coloured and shaped by status"}
    summary["map"] = {"screened": screened, **drawn}
    _section(summary, "map", "Map", True)
    timings["map_s"] = time.perf_counter() - t

    # ------------------------------------------------------------------ flagged table
    if screened:
        rows = flagged_rows(status, score)
        reasons = frame["screen_reasons"].to_numpy(dtype=object) if "screen_reasons" in frame else np.full(n, "", dtype=object)
        values = np.asarray(prepared.values, dtype=float)
        exp = np.asarray(expected, dtype=float) if expected is not None else np.full(n, np.nan)
        summary["flagged"] = {
            "count": int(rows.size),
            "order": "suspect before review, then score (largest first), then input row",
            "rows": [
                {
                    "row": int(r),
                    "id": str(ids[r]),
                    "status": str(status[r]),
                    "value": plain(values[r]),
                    "expected_value": plain(exp[r]),
                    "score": plain(score[r]),
                    "reasons": str(reasons[r]),
                }
                for r in rows
            ],
        }
        _section(summary, "flagged", "Points to check", True)
    else:
        summary["flagged"] = None
        _section(summary, "flagged", "Points to check", False,
                 "This layer was described, not screened: there are no statuses. Run 'pointsift screen' "
                 "or 'pointsift describe --with-screen' for the table of points to check.")

    # ------------------------------------------------------------------ distribution and strips
    t = time.perf_counter()
    if description is None and result is not None:
        # a screen has its trend, strips, lag pairs and variogram already: only the cheap summaries are left
        description = _light_description(prepared, status == "suspect", run_info.get("trend", {"method": "none"}))
    elif description is None:
        from ..explore import describe

        mask = (status == "suspect") if screened else None
        description = describe(prepared, suspect_mask=mask, trend=run_info.get("parameters", {}).get("detrend", "auto"),
                               figures=False, value_label=value_column or "value")
    if variogram is None and getattr(description, "variogram", None) is not None:
        variogram = description.variogram  # describe computed it on the trend residuals already
    timings["describe_s"] = time.perf_counter() - t
    t = time.perf_counter()
    s = description.summary
    shift = description.shift
    if "histogram" in description.figures:
        hist_fig = description.figures["histogram"]
    else:
        from ..methods.summary import plot_histogram

        hist_fig = plot_histogram(_usable_values(prepared)[prepared.usable], bin_width, label=value_column or "value")
    stem = description.stem_leaf
    summary["distribution"] = {
        "all": _summary_figures(s),
        "without_suspects": _summary_figures(shift.without_suspects) if shift is not None else None,
        "n_suspects": int(shift.n_suspects) if shift is not None else None,
        "shift": plain({
            "mean": shift.mean_shift, "sd": shift.sd_shift, "median": shift.median_shift,
            "mean_in_sd": shift.mean_shift_in_sd, "sd_ratio": shift.sd_shift_ratio,
        }) if shift is not None else None,
        "unscreened_reasons": plain(description.unscreened),
        "histogram": _histogram_record(hist_fig, _usable_values(prepared)[prepared.usable], bin_width),
        "stem_leaf": {
            "text": stem.text(),
            "leaf_unit": plain(stem.leaf_unit),
            "stem_unit": plain(stem.stem_unit),
            "split": int(stem.split),
            "lines": [
                {"stem": ln.stem, "leaf_low": int(ln.leaf_low), "leaf_high": int(ln.leaf_high), "leaves": ln.leaves,
                 "count": int(ln.count)}
                for ln in stem.lines
            ],
        },
        "trend": plain(description.trend_info),
    }
    figs["histogram"] = {"uri": fg.figure_data_uri(hist_fig), "alt": "Histogram of the values"}
    summary["distribution"]["histogram_without_suspects"] = None
    if shift is not None and shift.n_suspects > 0 and shift.without_suspects.n > 0:
        # a few wild values squeeze the first histogram; the second shows the bulk
        from ..methods.summary import plot_histogram

        kept = prepared.usable & ~np.asarray(status == "suspect", dtype=bool) if screened else prepared.usable
        kept_values = np.asarray(prepared.values, dtype=float)[kept]
        kept_fig = plot_histogram(kept_values, bin_width, label=value_column or "value")
        summary["distribution"]["histogram_without_suspects"] = _histogram_record(kept_fig, kept_values, bin_width)
        figs["histogram_without_suspects"] = {"uri": fg.figure_data_uri(kept_fig),
                                              "alt": "Histogram of the values without the suspects"}
    _section(summary, "distribution", "Distribution", True)

    strips_from_screen = strips is not None
    strips = strips if strips is not None else description.strips
    table = strips.table
    extreme = table["extreme_row"].to_numpy()
    strip_rows = []
    for rec, ex in zip(table.drop(columns=["geometry"]).to_dict("records"), extreme):
        strip_rows.append(plain({
            "direction": rec["direction"], "strip": rec["strip"], "n": rec["n"], "mean": rec["mean"],
            "median": rec["median"], "sd": rec["sd"], "iqr": rec["iqr"], "mean_minus_median": rec["mean_minus_median"],
            "u": rec["u"], "flagged": rec["flagged"], "note": rec["note"],
            "extreme_id": str(ids[ex]) if ex >= 0 else None, "extreme_value": rec["extreme_value"],
            "across_from": rec["across_from"], "across_to": rec["across_to"],
        }))
    summary["strips"] = {
        "flag_u": plain(strips.flag_u),
        "min_n": int(strips.min_n),
        "widths_m": {f"{d:g}": plain(w) for d, w in strips.widths.items()},
        "flagged": int(table["flagged"].sum()),
        "from_screen": strips_from_screen,
        "rows": strip_rows,
    }
    if "strip_profiles" in description.figures and not strips_from_screen:
        strip_fig = description.figures["strip_profiles"]
    else:
        from ..methods.strips import plot_strip_profiles

        strip_fig = plot_strip_profiles(table, label=value_column or "value", flag_u=strips.flag_u)
    figs["strips"] = {"uri": fg.figure_data_uri(strip_fig), "alt": "Strip means and medians across the area"}
    _section(summary, "strips", "Strips", True)
    timings["distribution_figures_s"] = time.perf_counter() - t

    # ------------------------------------------------------------------ local evidence
    t = time.perf_counter()
    residual_values, trend_method = _trend_residuals(result, description, prepared)
    basis_label = f"{value_column or 'value'} (trend removed)" if trend_method != "none" else (value_column or "value")
    local: dict = {"available": False}
    if result is not None and result.graph is not None:
        z_res = frame["local_residual_z"].to_numpy(dtype=float)
        limits = summary["parameters"]
        fig, drawn = fg.plot_residual_map(xy, z_res, status, crs_label=crs_label, limit=float(limits.get("suspect_z", 4.0)),
                                          north_offset=north, max_points=max_points, seed=seed)
        figs["residual_map"] = {"uri": fg.figure_data_uri(fig), "alt": "Map of the standardized local residuals"}
        finite = z_res[np.isfinite(z_res)]
        min_nb = int(run_info.get("graph", {}).get("min_neighbours", limits.get("min_neighbours", 4)))
        judged = prepared.usable & (result.graph.counts >= min_nb)
        detrended = np.asarray(result.artefacts.get("detrended", prepared.values), dtype=float)
        zs, lag = fg.neighbour_mean_scatter(np.where(judged, detrended, np.nan), result.graph.indices, judged)
        on_page = (status != "unscreened") & np.isfinite(lag)
        zs = np.where(on_page, zs, np.nan)
        lag = np.where(on_page, lag, np.nan)
        quadrant_words = frame["local_moran_quadrant"].to_numpy(dtype=object)
        counts = Counter(str(q) for q in quadrant_words[on_page] if q)
        quadrant_counts = {w: int(counts.get(w, 0)) for w in ("high among high", "low among high", "low among low", "high among low")}
        ok = np.isfinite(zs) & np.isfinite(lag)
        denom = float((zs[ok] ** 2).sum())
        slope = float((zs[ok] * lag[ok]).sum() / denom) if denom > 0 else math.nan
        fig, drawn_scatter = fg.plot_neighbour_scatter(zs, lag, status, quadrant_counts=quadrant_counts, slope=slope,
                                                       max_points=max_points, seed=seed)
        figs["neighbour_scatter"] = {"uri": fg.figure_data_uri(fig), "alt": "Each standardized value against the mean of its neighbours"}
        p_adj = frame["local_moran_p_adjusted"].to_numpy(dtype=float)
        fdr = float(limits.get("fdr", 0.05))
        significant = on_page & np.isfinite(p_adj) & (p_adj <= fdr)
        sig_counts = Counter(str(q) for q in quadrant_words[significant] if q)
        local = {
            "available": True,
            "values": f"values with the regional trend removed ({trend_method})",
            "residual_z": plain({
                "judged": int(finite.size),
                "min": finite.min() if finite.size else None,
                "max": finite.max() if finite.size else None,
                "beyond_review_z": int((np.abs(finite) >= float(limits.get("review_z", 3.0))).sum()),
                "beyond_suspect_z": int((np.abs(finite) >= float(limits.get("suspect_z", 4.0))).sum()),
            }),
            "residual_map": drawn,
            "neighbour_scatter": {
                "points": int(ok.sum()),
                "quadrant_counts": quadrant_counts,
                "significant_counts": {w: int(sig_counts.get(w, 0)) for w in quadrant_counts},
                "fdr": fdr,
                "slope": plain(slope),
                "drawn": drawn_scatter["drawn"],
                "sample_seed": drawn_scatter["sample_seed"],
                "beyond_frame": drawn_scatter["beyond_frame"],
            },
        }
        _section(summary, "local", "Local evidence", True)
    elif screened:
        _section(summary, "local", "Local evidence", False,
                 "This layer was screened before; the residual map and the neighbour scatter are made with the "
                 "screen itself: run 'pointsift screen --report' on the original input.")
    else:
        _section(summary, "local", "Local evidence", False,
                 "The residual map and the neighbour scatter need a screen: run 'pointsift screen' or "
                 "'pointsift describe --with-screen'.")
    summary["local_evidence"] = local
    timings["local_s"] = time.perf_counter() - t

    # ------------------------------------------------------------------ lag pairs
    t = time.perf_counter()
    summary["lag_pairs"] = {"available": False}
    if lag_pairs is not False:
        try:
            from ..methods.lagpairs import DIRECTION_NAMES, direction_label, plot_lag_pairs, screen_lag_pairs

            made_here = lag_pairs is None
            if made_here:
                lag_pairs = screen_lag_pairs(xy, residual_values, ids=ids, seed=seed)
            record = plain(lag_pairs.record)
            classes = plain(lag_pairs.classes.to_dict("records"))
            culprit_rows = np.flatnonzero(lag_pairs.points["lagpair_culprit"].to_numpy(dtype=bool))
            pairs_table = lag_pairs.pair_table(flagged_only=True)
            figures_lp = []
            for d in lag_pairs.directions:
                fig = _with_units(plot_lag_pairs(lag_pairs, d, max_points=min(max_points, 5000), seed=seed), basis_label)
                key = f"lag_pairs_{direction_label(d)}"
                figs[key] = {"uri": fg.figure_data_uri(fig),
                             "alt": f"Lag pairs, {DIRECTION_NAMES.get(d, direction_label(d))}"}
                figures_lp.append({"figure": key, "direction": direction_label(d),
                                   "name": DIRECTION_NAMES.get(d, f"azimuth {direction_label(d)}")})
            summary["lag_pairs"] = {
                "available": True,
                "computed_for_report": bool(made_here),
                "values": f"values with the regional trend removed ({trend_method})" if trend_method != "none" else "values",
                **record,
                "classes": classes,
                "culprit_ids": [str(ids[r]) for r in culprit_rows],
                "flagged_pairs": plain(pairs_table[["tail_id", "head_id", "tail_value", "head_value", "difference",
                                                     "separation", "direction", "lag", "pair_z", "culprit_id"]]
                                       .to_dict("records")),
                "figures": figures_lp,
            }
            _section(summary, "lag_pairs", "Lag pairs", True)
        except Exception as exc:  # a method failing must not cost the user the rest of the report
            log.warning("lag pairs left out of the report: %s", exc)
            summary["lag_pairs"] = {"available": False, "reason": f"{type(exc).__name__}: {exc}"}
            _section(summary, "lag_pairs", "Lag pairs", False, f"Not available: the lag-pair screen failed ({exc}).")
    else:
        _section(summary, "lag_pairs", "Lag pairs", False, "Not available: left out of this report.")
    timings["lag_pairs_s"] = time.perf_counter() - t

    # ------------------------------------------------------------------ variogram
    t = time.perf_counter()
    summary["variogram"] = {"available": False}
    if variogram is not False:
        try:
            from ..methods.variogram import analyse_variogram, plot_variogram

            made_here = variogram is None
            if made_here:
                variogram = analyse_variogram(xy, residual_values, seed=seed)
            fig = _with_units(plot_variogram(variogram), basis_label, value_column)
            figs["variogram"] = {"uri": fg.figure_data_uri(fig), "alt": "Semivariograms with the fitted model"}
            summary["variogram"] = {
                "available": True,
                "computed_for_report": bool(made_here),
                "values": f"values with the regional trend removed ({trend_method})" if trend_method != "none" else "values",
                **plain(variogram.run_info()),
                "table": plain(variogram.table.to_dict("records")),
            }
            _section(summary, "variogram", "Variogram", True)
        except Exception as exc:  # as above
            log.warning("variogram left out of the report: %s", exc)
            summary["variogram"] = {"available": False, "reason": f"{type(exc).__name__}: {exc}"}
            _section(summary, "variogram", "Variogram", False, f"Not available: the variogram failed ({exc}).")
    else:
        why = (run_info.get("variogram") or {}).get("note") or "left out of this report"
        summary["variogram"] = {"available": False, "reason": str(why)}
        _section(summary, "variogram", "Variogram", False, f"Not available: {why}.")
    timings["variogram_s"] = time.perf_counter() - t

    timings["total_s"] = time.perf_counter() - started
    summary["report_timings_s"] = {k: round(v, 3) for k, v in timings.items()}
    summary["run_timings_s"] = plain(run_info.get("timings_s", {}))
    summary["figures"] = sorted(figs)
    return Collected(summary=summary, figures=figs)


def _versions() -> dict:
    from ..pipeline import _library_versions

    return _library_versions()


def _caution() -> str:
    from ..pipeline import CAUTION

    return CAUTION
