"""Findings: every number a report shows, taken from the run that made them.

:func:`screen_findings` (for :func:`pointsift.pipeline.screen_frame`) and
:func:`describe_findings` (for :func:`pointsift.explore.describe`) turn the
method results of one run into a frozen :class:`Findings`: plain JSON values
(counts, thresholds, summaries, histogram and stem-and-leaf with the far
values set aside, strips, lag pairs, variogram model and table, every flagged
row with its neighbourhood) plus the arrays the figures are drawn from. The
report package only shapes and draws a :class:`Findings`; it computes
nothing, so the page, the JSON and the GeoPackage agree by construction.

Far values: Tukey (1977, *Exploratory Data Analysis*, ch. 2) lists values
beyond the fences on separate ``LO`` and ``HI`` lines of a stem-and-leaf
display instead of stretching it; we set aside values beyond the far fences
``Q1 - 3 IQR`` and ``Q3 + 3 IQR`` ("far out") from both the display and the
histogram, and list them.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from .vocabulary import FLAGGED, STATUSES, direction_words

__all__ = ["Findings", "MapData", "FLAGGED", "FAR_FENCE", "plain", "flagged_rows", "far_fences",
           "screen_findings", "describe_findings", "distribution_findings"]

#: Statuses listed as points to check, strongest first.
#: Interquartile ranges beyond the quartiles where a value is "far out" (Tukey 1977).
FAR_FENCE = 3.0
#: Far values listed by value on a LO or HI line (the rest are counted).
MAX_LISTED = 40
#: Points drawn per lag-pair panel besides the flagged pairs (seeded sample beyond).
PANEL_POINTS = 1500


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


@dataclass(frozen=True)
class MapData:
    """Per-row arrays the maps and scatters are drawn from (work-CRS metres)."""

    xy: np.ndarray
    values: np.ndarray
    ids: np.ndarray
    status: np.ndarray | None = None
    score: np.ndarray | None = None
    residual_z: np.ndarray | None = None
    standardized: np.ndarray | None = None
    neighbour_mean: np.ndarray | None = None
    work_crs: object = None


@dataclass(frozen=True)
class Findings:
    """Everything a report shows, as computed by one run.

    Attributes
    ----------
    command : {"screen", "describe"}
    value_column : str
    counts : dict or None
        Rows per status (None for a layer that was never screened).
    thresholds : dict or None
        ``suspect_z``, ``review_z``, ``fdr``, ``min_neighbours``,
        ``permutations`` of the screen (None when unknown).
    distribution : dict
        Summaries (all, without suspects, shift), unscreened reasons,
        histogram and stem-and-leaf with the far values set aside, trend.
    strips : dict
    flagged : dict or None
        ``count``, ``order`` and ``rows``: every suspect and review row with
        its value, expected value, scale, score, reasons and (after a screen)
        its neighbours with their values, distances and offsets.
    local : dict or None
        Residual range and counts, Moran quadrant counts and slope.
    lag_pairs, variogram : dict or None
        As the screen (or describe) computed them; None when not computed.
    map : MapData
    drawing : dict
        Arrays only figures need: ``variogram_curves``, ``lag_panels``.
    """

    command: str
    value_column: str
    counts: dict | None
    thresholds: dict | None
    distribution: dict
    strips: dict
    flagged: dict | None
    local: dict | None
    lag_pairs: dict | None
    variogram: dict | None
    map: MapData
    drawing: dict = field(default_factory=dict, repr=False)


def flagged_rows(status, score) -> np.ndarray:
    """Rows of ``suspect`` then ``review`` points, each group by score (largest first), then by row.

    >>> flagged_rows(np.array(["ok", "review", "suspect"], dtype=object), np.array([0.1, 9.0, 4.5])).tolist()
    [2, 1]
    """
    status = np.asarray(status, dtype=object)
    score = np.asarray(score, dtype=float)
    rows = np.flatnonzero(np.isin(status, FLAGGED))
    rank = np.where(status[rows] == "suspect", 0, 1)
    key = -np.nan_to_num(score[rows], nan=-np.inf)
    return rows[np.lexsort((rows, key, rank))]


def far_fences(x) -> tuple[float, float]:
    """Tukey's far fences ``(Q1 - 3 IQR, Q3 + 3 IQR)``; infinite when the IQR is 0."""
    x = np.asarray(x, dtype=float)
    q1, q3 = np.percentile(x, [25, 75])
    iqr = q3 - q1
    if not iqr > 0:
        return -math.inf, math.inf
    return float(q1 - FAR_FENCE * iqr), float(q3 + FAR_FENCE * iqr)


def _listed(values: np.ndarray) -> dict:
    return {"n": int(values.size), "values": plain(values[:MAX_LISTED])}


def distribution_findings(values, usable, *, suspect=None, unscreened_reason=None, trend_info=None,
                          bin_width=None, stem_unit=None, split=None) -> dict:
    """Summaries, histogram and stem-and-leaf of the usable values, far values set aside on LO/HI lines."""
    from .methods.stemleaf import stem_and_leaf_table
    from .methods.summary import global_summary, histogram_edges, summary_shift

    usable = np.asarray(usable, dtype=bool)
    x = np.asarray(values, dtype=float)[usable]
    s = global_summary(x)
    shift = summary_shift(x, np.asarray(suspect, dtype=bool)[usable]) if suspect is not None else None
    lo, hi = far_fences(x)
    inner = x[(x >= lo) & (x <= hi)]
    low, high = np.sort(x[x < lo]), np.sort(x[x > hi])
    edges, width, rule = histogram_edges(inner, bin_width)
    counts, _ = np.histogram(inner, bins=edges)
    stem = stem_and_leaf_table(inner, stem_unit, split)
    decimals = stem.decimals
    lines = stem.text().split("\n")
    at = next((i for i, ln in enumerate(lines) if ln.rstrip().endswith("| leaves")), len(lines) - 1) + 1

    def listing(kind, v):
        # the values as recorded (not rounded to the leaf unit), as Tukey lists them
        shown = ", ".join(np.format_float_positional(t, precision=max(decimals, 6), trim="-") for t in v[:MAX_LISTED])
        more = f" (+{v.size - MAX_LISTED} more)" if v.size > MAX_LISTED else ""
        return f"{kind}: {shown}{more}"

    if low.size:
        lines.insert(at, listing("LO", low))
    if high.size:
        lines.append(listing("HI", high))
    unscreened = {}
    if unscreened_reason is not None:
        unscreened = dict(Counter(str(r) for r in np.asarray(unscreened_reason, dtype=object)[~usable]).most_common())
    return plain({
        "all": s.as_dict(),
        "without_suspects": shift.without_suspects.as_dict() if shift is not None else None,
        "n_suspects": int(shift.n_suspects) if shift is not None else None,
        "shift": {"mean": shift.mean_shift, "sd": shift.sd_shift, "median": shift.median_shift,
                  "mean_in_sd": shift.mean_shift_in_sd, "sd_ratio": shift.sd_shift_ratio} if shift is not None else None,
        "unscreened_reasons": unscreened,
        "far_fences": {"low": lo, "high": hi, "iqr_multiple": FAR_FENCE},
        "histogram": {"edges": edges, "counts": counts, "bin_width": float(width), "rule": rule,
                      "low": _listed(low), "high": _listed(high)},
        "stem_leaf": {
            "text": "\n".join(lines), "leaf_unit": stem.leaf_unit, "stem_unit": stem.stem_unit, "split": stem.split,
            "lines": [{"stem": ln.stem, "leaf_low": ln.leaf_low, "leaf_high": ln.leaf_high, "leaves": ln.leaves,
                       "count": ln.count} for ln in stem.lines],
            "low": _listed(low), "high": _listed(high),
        },
        "trend": dict(trend_info or {}),
    })


def _strip_findings(strips, ids) -> dict:
    table = strips.table
    rows = []
    for rec in table.drop(columns=["geometry"]).to_dict("records"):
        ex = int(rec["extreme_row"])
        rows.append({k: rec[k] for k in ("direction", "strip", "n", "mean", "median", "sd", "iqr", "p05", "p95",
                                          "mean_minus_median", "u", "flagged", "note", "extreme_value",
                                          "across_from", "across_to", "width")}
                    | {"extreme_id": str(ids[ex]) if ex >= 0 else None})
    return plain({"flag_u": strips.flag_u, "min_n": strips.min_n,
                  "widths_m": {f"{d:g}": w for d, w in strips.widths.items()},
                  "flagged": int(table["flagged"].sum()), "rows": rows})


def _variogram_findings(structure) -> tuple[dict, dict]:
    from .methods.variogram import MODELS

    v = structure.variogram
    if v is None:
        return {"available": False, "reason": str(structure.record["variogram"].get("note", "not computed"))}, {}
    record = {"available": True, **plain(structure.record["variogram"]), "table": plain(v.table.to_dict("records"))}
    h = np.linspace(0.0, float(v.empirical.edges[-1]), 120)[1:]
    curves = {}
    for label, fit in (("all", v.fit), *v.directional_fits.items()):
        if fit.model in MODELS and math.isfinite(fit.range_parameter):
            curves[label] = np.asarray(fit.gamma(h), dtype=float)
    return record, {"h": h, "curves": curves}


def _lag_findings(structure, ids, seed: int) -> tuple[dict | None, list]:

    screen = structure.lag_screen
    if screen is None:
        return None, []
    table = screen.pair_table(flagged_only=True)
    culprits = np.flatnonzero(screen.points["lagpair_culprit"].to_numpy(dtype=bool))
    record = {"available": True, "values": structure.basis, **plain(screen.record),
              "difference_scale": structure.record["lag_pairs"].get("difference_scale"),
              "classes": plain(screen.classes.to_dict("records")),
              "culprit_ids": [str(ids[r]) for r in culprits],
              "flagged_pairs": plain(table[["tail_id", "head_id", "tail_value", "head_value", "difference",
                                            "separation", "direction", "lag", "pair_z", "culprit_id"]]
                                     .to_dict("records"))}
    tail_v, head_v = screen.values[screen.pairs.tail], screen.values[screen.pairs.head]
    classes = screen.classes.set_index(["direction", "lag"])
    rng = np.random.default_rng(seed)
    panels = []
    for j, d in enumerate(screen.directions):
        label = direction_words(d, "label")
        lags = []
        for k, (low, high) in enumerate(screen.lag_edges):
            sel = np.flatnonzero(screen.direction_member[:, j] & (screen.lag_index == k))
            with np.errstate(invalid="ignore"):
                out = np.abs(screen.pair_z[sel, j]) > screen.threshold
            inside = sel[~out]
            if inside.size > PANEL_POINTS:
                inside = np.sort(rng.choice(inside, size=PANEL_POINTS, replace=False))
            row = classes.loc[(label, k + 1)]
            band = (float(row["band_centre"]), float(row["band_scale"])) if row["screened"] else None
            lags.append({"lag": k + 1, "low": float(low), "high": float(high), "pairs": int(sel.size),
                         "flagged": int(out.sum()), "drawn": int(inside.size),
                         "tail": tail_v[inside], "head": head_v[inside],
                         "tail_flagged": tail_v[sel[out]], "head_flagged": head_v[sel[out]], "band": band})
        panels.append({"direction": label, "name": direction_words(d, "abbrev"), "lags": lags,
                       "threshold": float(screen.threshold), "angle_tolerance": float(screen.angle_tolerance)})
    record["figures"] = [{"figure": f"lag_pairs_{p['direction']}", "direction": p["direction"], "name": p["name"]}
                         for p in panels]
    return record, panels


def _flagged(frame, prepared, value_column, graph=None) -> dict:
    status = frame["screen_status"].to_numpy(dtype=object)
    score = frame["screen_score"].to_numpy(dtype=float)
    n = len(frame)
    column = {name: (frame[name].to_numpy() if name in frame else np.full(n, np.nan))
              for name in ("expected_value", "residual_scale", "local_residual_z", "screen_reasons")}
    ids = np.asarray(prepared.ids, dtype=object)
    rows = flagged_rows(status, score)
    items = []
    for r in rows:
        item = {"row": int(r), "id": str(ids[r]), "status": str(status[r]), "value": prepared.values[r],
                "expected_value": column["expected_value"][r], "residual_scale": column["residual_scale"][r],
                "local_residual_z": column["local_residual_z"][r], "score": score[r],
                "reasons": "" if column["screen_reasons"][r] is None else str(column["screen_reasons"][r])}
        if graph is not None:
            filled = graph.indices[r] >= 0
            nb = graph.indices[r][filled]
            offset = prepared.xy[nb] - prepared.xy[r]
            item["neighbours"] = [{"row": int(j), "id": str(ids[j]), "value": prepared.values[j],
                                   "distance_m": dist, "dx_m": dx, "dy_m": dy}
                                  for j, dist, (dx, dy) in zip(nb, graph.distances[r][filled], offset)]
        else:
            item["neighbours"] = None
        items.append(item)
    return plain({"count": int(rows.size), "order": "suspect before review, then score (largest first), then input row",
                  "neighbourhoods": graph is not None, "rows": items})


def _local_findings(result, thresholds: dict) -> dict:
    frame, auto = result.frame, result.autocorr
    status = frame["screen_status"].to_numpy(dtype=object)
    z_res = frame["local_residual_z"].to_numpy(dtype=float)
    finite = z_res[np.isfinite(z_res)]
    zs, lag = auto.standardized, auto.neighbour_mean
    on_page = (status != "unscreened") & np.isfinite(zs) & np.isfinite(lag)
    words = frame["local_moran_quadrant"].to_numpy(dtype=object)
    order = ("high among high", "low among high", "low among low", "high among low")
    counts = Counter(str(q) for q in words[on_page] if q)
    p_adj = frame["local_moran_p_adjusted"].to_numpy(dtype=float)
    significant = on_page & np.isfinite(p_adj) & (p_adj <= thresholds["fdr"])
    sig = Counter(str(q) for q in words[significant] if q)
    denom = float((zs[on_page] ** 2).sum())
    # the least-squares slope through the origin of the Moran scatter is global Moran's I (Anselin 1996)
    slope = float((zs[on_page] * lag[on_page]).sum() / denom) if denom > 0 else math.nan
    return plain({
        "available": True,
        "values": f"values with the regional trend removed ({result.run_info['trend'].get('method', 'none')})",
        "residual_z": {"judged": int(finite.size), "min": finite.min() if finite.size else None,
                       "max": finite.max() if finite.size else None,
                       "beyond_review_z": int((np.abs(finite) >= thresholds["review_z"]).sum()),
                       "beyond_suspect_z": int((np.abs(finite) >= thresholds["suspect_z"]).sum())},
        "quadrant_counts": {w: int(counts.get(w, 0)) for w in order},
        "significant_counts": {w: int(sig.get(w, 0)) for w in order},
        "fdr": thresholds["fdr"], "slope": slope, "points": int(on_page.sum()),
    })


def screen_findings(result, structure, strips) -> Findings:
    """The findings of a screen (:class:`~pointsift.pipeline.ScreenResult`) from what it computed."""
    config, prepared, frame = result.config, result.prepared, result.frame
    status = frame["screen_status"].to_numpy(dtype=object)
    thresholds = {"suspect_z": float(config.suspect_z), "review_z": float(config.review_z), "fdr": float(config.fdr),
                  "min_neighbours": int(config.min_neighbours), "permutations": int(config.permutations)}
    variogram, curves = _variogram_findings(structure)
    lag_pairs, panels = _lag_findings(structure, prepared.ids, config.seed)
    written = result.tables.get("lag_pairs")
    if lag_pairs is not None and written is not None and "evidence" in written.columns:
        # the screen writes only the pairs that carry evidence about an error: list exactly those
        difference = "residual_difference" if "residual_difference" in written.columns else "value_difference"
        rows = written.assign(difference=written[difference])
        lag_pairs = {**lag_pairs, "pairs_written": int(len(written)),
                     "flagged_pairs": plain(rows[["tail_id", "head_id", "tail_value", "head_value", "difference",
                                                  "separation", "direction", "lag", "pair_z", "culprit_id"]]
                                            .to_dict("records"))}
    zs = np.where(status != "unscreened", result.autocorr.standardized, np.nan)
    return Findings(
        command="screen", value_column=config.value, counts=dict(result.counts), thresholds=thresholds,
        distribution=distribution_findings(prepared.values, prepared.usable, suspect=status == "suspect",
                                           unscreened_reason=prepared.unscreened_reason,
                                           trend_info=result.run_info.get("trend")),
        strips=_strip_findings(strips, prepared.ids),
        flagged=_flagged(frame, prepared, config.value, result.graph),
        local=_local_findings(result, thresholds),
        lag_pairs=lag_pairs, variogram=variogram,
        map=MapData(xy=prepared.xy, values=prepared.values, ids=np.asarray(prepared.ids, dtype=object), status=status,
                    score=frame["screen_score"].to_numpy(dtype=float),
                    residual_z=frame["local_residual_z"].to_numpy(dtype=float), standardized=zs,
                    neighbour_mean=np.where(np.isfinite(zs), result.autocorr.neighbour_mean, np.nan),
                    work_crs=prepared.work_crs),
        drawing={"variogram": curves, "lag_panels": panels},
    )


def describe_findings(description, structure, *, bin_width=None, stem_unit=None, split=None, screen=None) -> Findings:
    """The findings of a description; with ``screen`` (a ScreenResult) its statuses, flags and local evidence."""
    prepared = description.prepared
    frame = prepared.frame
    status = None
    counts = thresholds = flagged = local = None
    ids = np.asarray(prepared.ids, dtype=object)
    if screen is not None:
        own = screen.findings
        counts, thresholds, flagged, local = own.counts, own.thresholds, own.flagged, own.local
        status = own.map.status
        map_data = own.map
    else:
        if {"screen_status", "screen_score"} <= set(frame.columns):  # a pointsift output described again
            status = frame["screen_status"].astype(object).to_numpy()
            counts = {s: int((status == s).sum()) for s in STATUSES}
            flagged = _flagged(frame, prepared, description.value_label)
        map_data = MapData(xy=prepared.xy, values=prepared.values, ids=ids, status=status,
                           score=frame["screen_score"].to_numpy(dtype=float) if status is not None else None,
                           work_crs=prepared.work_crs)
    variogram, curves = _variogram_findings(structure)
    lag_pairs, panels = _lag_findings(structure, ids, description.seed)
    return Findings(
        command="describe", value_column=description.value_label, counts=counts, thresholds=thresholds,
        distribution=distribution_findings(prepared.values, prepared.usable,
                                           suspect=None if status is None else status == "suspect",
                                           unscreened_reason=prepared.unscreened_reason,
                                           trend_info=description.trend_info, bin_width=bin_width,
                                           stem_unit=stem_unit, split=split),
        strips=_strip_findings(description.strips, ids), flagged=flagged, local=local,
        lag_pairs=lag_pairs, variogram=variogram, map=map_data,
        drawing={"variogram": curves, "lag_panels": panels},
    )
