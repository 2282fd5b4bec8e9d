"""Global stages of a screen: quantities computed once over the whole layer.

The regional trend, the lag-pair screen and the variograms
(:func:`spatial_structure`, shared with ``describe``), the strips, the
automatic neighbour distance and the clipping before the Moran
standardization. Every engine (:mod:`pointsift.engine`) computes them here,
in the calling process, and hands them to the per-point stages.
"""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np

from .config import ScreenConfig
from .errors import InputError
from .methods.robust import MAD_TO_SD
from .methods.strips import strip_summary
from .prepare import Prepared

__all__ = ["SpatialStructure", "spatial_structure", "automatic_max_distance", "strips_layer", "clipped",
           "spatial_tables", "CLIP_SD"]


def automatic_max_distance(xy: np.ndarray) -> float:
    """Farthest a neighbour may be when the user gives no ``max_distance``.

    The upper far fence (Tukey 1977: third quartile plus three interquartile
    ranges) of the log distance from each point to its nearest other point:
    a well whose nearest other well is farther than that is isolated.
    """
    from scipy.spatial import cKDTree

    distinct = np.unique(xy, axis=0)
    if distinct.shape[0] < 3:
        return float("inf")
    d, _ = cKDTree(distinct).query(distinct, k=2)
    logs = np.log(d[:, 1][d[:, 1] > 0])
    q1, q3 = np.percentile(logs, [25, 75])
    return float(np.exp(q3 + 3.0 * max(q3 - q1, np.log(2.0))))


_TREND_SAMPLE = 20_000


@dataclass(frozen=True)
class SpatialStructure:
    """Regional trend, lag-pair screen and variogram of one layer, by one rule for ``screen`` and ``describe``.

    Attributes
    ----------
    trend : TrendSurface, PolishSurface or None
        The fitted regional trend.
    detrended : ndarray
        Values minus the trend (the values when no trend), NaN where unusable.
    trend_info : dict
        Method and shares of variance explained (run record).
    lag_screen : LagPairScreen
    variogram : VariogramAnalysis or None
        None when it cannot be computed (the record says why).
    basis : str
        What the lag pairs and the variogram were computed on.
    record : dict
        ``lag_pairs`` and ``variogram`` entries of the run record.
    """

    trend: object
    detrended: np.ndarray
    trend_info: dict
    lag_screen: object
    variogram: object
    basis: str
    record: dict


def spatial_structure(prepared: Prepared, *, detrend: str = "auto", lag_count=None, lag_width=None,
                      seed: int = ScreenConfig.seed) -> SpatialStructure:
    """Regional trend, then lag pairs and variograms of the trend residuals.

    ``screen_frame`` and :func:`pointsift.explore.describe` both call this, so
    the same input and options give the same trend, lag pairs and variogram
    model in both. The trend is fitted on at most 20,000 points (seeded
    sample, see :func:`pointsift.methods.trend.regional_trend`).
    """
    from .methods.lagpairs import screen_lag_pairs
    from .methods.trend import regional_trend
    from .methods.variogram import analyse_variogram, expected_difference_sd, neighbourhood_from_fit

    values = np.where(prepared.usable, prepared.values, np.nan)
    fit, detrended, trend_info = regional_trend(prepared.xy[:, 0], prepared.xy[:, 1], values, detrend,
                                                sample=_TREND_SAMPLE)
    values = np.where(prepared.usable, detrended, np.nan)
    basis = "values" if trend_info.get("method", "none") == "none" else f"residuals from the trend ({trend_info['method']})"
    variogram = None
    variogram_info = {"values": basis}
    try:
        variogram = analyse_variogram(prepared.xy, values, lag_count=lag_count, lag_width=lag_width, seed=seed)
        variogram_info.update(variogram.run_info())
    except InputError as exc:
        variogram_info["note"] = f"no variogram: {exc}"
    # The expected difference between two records h apart: from the fitted
    # model when it is trustworthy (sqrt(2 gamma(h))), so pairs far apart are
    # allowed to differ more; otherwise the robust default (each lag class's
    # own spread) and the run record says why.
    hint = neighbourhood_from_fit(variogram.fit if variogram is not None else None)
    if hint.distance is not None:
        model = hint.fit
        lag_screen = screen_lag_pairs(prepared.xy, values, ids=prepared.ids, seed=seed,
                                      distance_scale=lambda h: expected_difference_sd(model, h))
        scale_note = "pair differences divided by the variogram model's sqrt(2 gamma(h))"
    else:
        lag_screen = screen_lag_pairs(prepared.xy, values, ids=prepared.ids, seed=seed)
        scale_note = f"each lag class's own robust spread ({hint.reason})"
    record = {
        "lag_pairs": {"values": basis, "difference_scale": scale_note, **lag_screen.record},
        "variogram": variogram_info,
    }
    return SpatialStructure(fit, values, trend_info, lag_screen, variogram, basis, record)


def strips_layer(prepared: Prepared, detrended: np.ndarray | None = None):
    """West-east and south-north strips with the calibrated mean-median statistic, and their polygon layer.

    Judged on the residuals from the regional trend when one was fitted
    (``detrended``), so the flank of a valley is not a skewed strip.
    """
    values = prepared.values if detrended is None else detrended
    result = strip_summary(prepared.xy[:, 0], prepared.xy[:, 1], np.where(prepared.usable, values, np.nan))
    layer = gpd.GeoDataFrame(result.table, geometry="geometry", crs=prepared.work_crs)
    return result, layer


CLIP_SD = 5.0


def clipped(values: np.ndarray) -> np.ndarray:
    """Values winsorized at the median +- ``CLIP_SD`` robust sd (Huber-type; NaN kept)."""
    finite = np.isfinite(values)
    if finite.sum() < 3:
        return values
    centre = np.median(values[finite])
    spread = MAD_TO_SD * np.median(np.abs(values[finite] - centre))
    if not spread > 0:
        return values
    return np.where(finite, np.clip(values, centre - CLIP_SD * spread, centre + CLIP_SD * spread), values)


def spatial_tables(lag_screen, variogram, prepared: Prepared, *, status=None, coherent=None, raw_ids=None,
                    detrended: bool = False) -> dict:
    """The ``lag_pairs`` line layer (work CRS) and the ``variogram`` table.

    The layer keeps only pairs that carry evidence about an error: pairs
    with a likely culprit, or with an end called ``suspect`` whose deviation
    the neighbours do not share (pairs explained by a coherent feature, such
    as the wells around a pumping cone, are left out). Values are in the
    value's units (``tail_value``, ``head_value``, ``value_difference``);
    when a trend was removed, the screened numbers are named
    ``tail_residual``, ``head_residual``, ``residual_difference``. Ids are the
    id column's own text, so ``culprit_id`` joins to it (row numbers, "row
    N" counted from 1, without an id column).
    """
    from .methods.lagpairs import lag_pairs_layer

    layer = lag_pairs_layer(lag_screen, prepared.xy, crs=prepared.work_crs)
    if status is not None and len(layer):
        tail, head = layer["tail_row"].to_numpy(), layer["head_row"].to_numpy()
        lone = (status == "suspect") & ~coherent
        has_culprit = layer["culprit_id"].to_numpy(dtype=object) != ""
        evidence = np.where(has_culprit, "likely culprit", np.where(lone[tail] | lone[head], "suspect end", ""))
        layer = layer.assign(evidence=evidence)[evidence != ""].reset_index(drop=True)
        tail, head = layer["tail_row"].to_numpy(), layer["head_row"].to_numpy()
        ids = raw_ids if raw_ids is not None else prepared.ids
        culprit_row = np.where(layer["culprit_id"].to_numpy(dtype=object) == "", -1,
                               np.where(layer["culprit_id"].to_numpy(dtype=object) == prepared.ids[tail], tail, head))
        names = {"tail_value": "tail_residual", "head_value": "head_residual", "difference": "residual_difference"}
        layer = layer.rename(columns=names if detrended else {"difference": "value_difference"}).drop(columns=["flagged"])
        if detrended:
            layer.insert(layer.columns.get_loc("tail_residual"), "tail_value", prepared.values[tail])
            layer.insert(layer.columns.get_loc("tail_residual"), "head_value", prepared.values[head])
            layer.insert(layer.columns.get_loc("tail_residual"), "value_difference", prepared.values[head] - prepared.values[tail])
        layer["tail_id"] = ids[tail].astype(object)
        layer["head_id"] = ids[head].astype(object)
        layer["culprit_id"] = np.array([ids[r] if r >= 0 else "" for r in culprit_row], dtype=object)
    tables = {"lag_pairs": layer}
    if variogram is not None:
        tables["variogram"] = variogram.table
    return tables
