"""Robust local residuals on a neighbour graph.

Each point's value is predicted from its neighbours only (never itself) by a
locally weighted plane fitted with iteratively reweighted least squares and
Tukey's bisquare weights (Beaton and Tukey 1974; the same loess-style local
regression as Cleveland 1979, "Robust locally weighted regression and
smoothing scatterplots", JASA 74). The plane absorbs a regional gradient, and
the bisquare weights keep a gross error from pulling its neighbours'
predictions.

The residual is standardized by a scale built from two robust parts:

* the local scale: the spread of the neighbours about their own plane
  (1.4826 x median absolute residual, corrected for the three fitted
  parameters), which is large where the surface bends (a valley, a pumping
  cone) and small where it is smooth;
* the distance scale: how far predictions typically miss as a function of
  the distance to the neighbours, estimated from all points (robust spread
  of residuals in bins of neighbour distance, forced to be non-decreasing by
  pool-adjacent-violators). It is an empirical residual variogram: sparse
  wells kilometres apart are expected to miss by more than a dense cluster.

The two are pooled like variances with their degrees of freedom
(``local_df`` and ``prior_df``), and both are inflated by the leverage of the
prediction point, so a well at the edge of the network (extrapolation) is
judged with a wider scale. A 8-value MAD alone is too noisy to be a scale
(it puts 4.5 % of clean points beyond 3.5); the pooled scale is not.

The screen is done twice: points that are gross outliers in the first pass
and that their neighbours do not echo are removed as neighbours, and every
prediction is made again, so a decimal slip cannot distort the residuals of
the wells around it.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..graph import NeighbourGraph

__all__ = ["LocalResult", "local_residuals", "robust_plane_predict", "distance_scale", "neighbour_echo"]

_MAD_TO_SD = 1.482602218505602  # 1 / Phi^-1(3/4), common practice
_BISQUARE_C = 4.685  # 95 % efficiency at the normal, Beaton and Tukey 1974


@dataclass(frozen=True)
class LocalResult:
    """Per-point output of :func:`local_residuals` (NaN where not predicted).

    Attributes
    ----------
    expected : ndarray
        Value predicted from the neighbours.
    residual : ndarray
        Value minus expected.
    scale : ndarray
        Expected spread of the residual (pooled robust sd).
    z : ndarray
        Standardized residual ``residual / scale``.
    neighbour_count : ndarray of int
        Neighbours used.
    neighbour_distance : ndarray
        Median distance to the neighbours used (metres).
    echo : ndarray
        Share of neighbours whose own residual goes the same way beyond
        ``echo_z`` (1 = every neighbour deviates alike: a coherent feature).
    excluded : ndarray of bool
        Points removed as neighbours in the second pass (gross, not echoed).
    distance_model : tuple of ndarray
        (log distance knots, scale at knots) of the distance scale.
    """

    expected: np.ndarray
    residual: np.ndarray
    scale: np.ndarray
    z: np.ndarray
    neighbour_count: np.ndarray
    neighbour_distance: np.ndarray
    echo: np.ndarray
    excluded: np.ndarray
    distance_model: tuple[np.ndarray, np.ndarray]


def _bisquare(u: np.ndarray) -> np.ndarray:
    inside = np.abs(u) < 1.0
    return np.where(inside, (1.0 - u * u) ** 2, 0.0)


def _masked_median(a: np.ndarray, mask: np.ndarray) -> np.ndarray:
    filled = np.where(mask, a, np.nan)
    if not filled.shape[1]:
        return np.full(filled.shape[0], np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # rows without neighbours give NaN on purpose
        return np.nanmedian(filled, axis=1)


def robust_plane_predict(
    xy: np.ndarray,
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    iterations: int = 5,
    min_neighbours: int = 3,
):
    """Predict each value from its neighbours with a robust local plane.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates (metres).
    values : ndarray, shape (n,)
        Values; NaN values are never used as neighbours.
    graph : NeighbourGraph
        Neighbours of each point (self excluded).
    iterations : int
        Bisquare reweighting steps.
    min_neighbours : int
        Rows with fewer usable neighbours are not predicted (NaN).

    Returns
    -------
    expected, fit_scale, leverage, count, distance : ndarray
        Prediction; robust sd of the neighbours about the plane (corrected
        for the fitted parameters); variance inflation of the prediction
        relative to one observation (``Var(pred) / sigma^2``); neighbours
        used; median neighbour distance.
    """
    n = xy.shape[0]
    idx = graph.indices
    mask = graph.mask & np.isfinite(values[np.where(idx >= 0, idx, 0)])
    safe = np.where(mask, idx, 0)
    count = mask.sum(axis=1)
    length = _masked_median(graph.distances, mask)
    ok = (count >= min_neighbours) & np.isfinite(length) & (length > 0)
    length = np.where(ok, length, 1.0)
    dx = np.where(mask, (xy[safe, 0] - xy[:, 0:1]) / length[:, None], 0.0)
    dy = np.where(mask, (xy[safe, 1] - xy[:, 1:2]) / length[:, None], 0.0)
    v = np.where(mask, values[safe], 0.0)
    w_dist = np.where(mask, 1.0 / (1.0 + (graph.distances / length[:, None]) ** 2), 0.0)

    centre = _masked_median(v, mask)
    spread = _MAD_TO_SD * _masked_median(np.abs(v - centre[:, None]), mask)
    floor_global = np.nanmedian(spread[ok]) if ok.any() else 1.0
    floor_global = floor_global if np.isfinite(floor_global) and floor_global > 0 else 1.0
    floor = 0.05 * floor_global
    w_rob = _bisquare((v - centre[:, None]) / (6.0 * np.maximum(spread, floor)[:, None]))
    w_rob = np.where(mask, w_rob, 0.0)

    dof = np.maximum(count - 3, 1)
    df_correction = np.sqrt(count / dof)
    coef = np.zeros((n, 3))
    fit_scale = spread
    for step in range(iterations + 1):
        w = w_dist * w_rob
        # too few neighbours kept (all weights 0 for a scattered row): fall back to distance weights
        lost = (w > 0).sum(axis=1) < 3
        w = np.where(lost[:, None], w_dist, w)
        sw = w.sum(axis=1)
        a = np.empty((n, 3, 3))
        a[:, 0, 0] = sw
        a[:, 0, 1] = a[:, 1, 0] = (w * dx).sum(axis=1)
        a[:, 0, 2] = a[:, 2, 0] = (w * dy).sum(axis=1)
        a[:, 1, 1] = (w * dx * dx).sum(axis=1)
        a[:, 1, 2] = a[:, 2, 1] = (w * dx * dy).sum(axis=1)
        a[:, 2, 2] = (w * dy * dy).sum(axis=1)
        # a light ridge on the slopes keeps wells strung along a line (a road, a
        # valley floor) solvable: the slope across the line is then taken as 0
        ridge = 1e-3 * np.maximum(sw, 1e-12)
        a[:, 1, 1] += ridge
        a[:, 2, 2] += ridge
        a[~ok] = np.eye(3)
        b = np.stack([(w * v).sum(axis=1), (w * v * dx).sum(axis=1), (w * v * dy).sum(axis=1)], axis=1)
        coef = np.linalg.solve(a, b[..., None])[..., 0]
        fitted = coef[:, 0:1] + coef[:, 1:2] * dx + coef[:, 2:3] * dy
        resid = v - fitted
        fit_scale = _MAD_TO_SD * _masked_median(np.abs(resid), mask) * df_correction
        if step < iterations:
            w_rob = np.where(mask, _bisquare(resid / (_BISQUARE_C * np.maximum(fit_scale, floor)[:, None])), 0.0)

    # variance of the intercept (the prediction at the point) for weights w and
    # unit error variance: sandwich (X'WX)^-1 X'W^2X (X'WX)^-1, element [0, 0]
    a_inv = np.linalg.inv(a)
    w2 = w * w
    b2 = np.empty((n, 3, 3))
    b2[:, 0, 0] = w2.sum(axis=1)
    b2[:, 0, 1] = b2[:, 1, 0] = (w2 * dx).sum(axis=1)
    b2[:, 0, 2] = b2[:, 2, 0] = (w2 * dy).sum(axis=1)
    b2[:, 1, 1] = (w2 * dx * dx).sum(axis=1)
    b2[:, 1, 2] = b2[:, 2, 1] = (w2 * dx * dy).sum(axis=1)
    b2[:, 2, 2] = (w2 * dy * dy).sum(axis=1)
    leverage = np.einsum("ni,nij,nj->n", a_inv[:, 0, :], b2, a_inv[:, :, 0])

    expected = np.where(ok, coef[:, 0], np.nan)
    fit_scale = np.where(ok, np.maximum(fit_scale, floor), np.nan)
    leverage = np.where(ok, leverage, np.nan)
    distance = np.where(ok, length, np.nan)
    return expected, fit_scale, leverage, np.where(ok, count, 0), distance


def _pool_adjacent_violators(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Non-decreasing least-squares fit of ``y`` with weights ``w`` (PAVA)."""
    values: list[float] = []
    weights: list[float] = []
    sizes: list[int] = []
    for yi, wi in zip(y, w):
        values.append(float(yi))
        weights.append(float(wi))
        sizes.append(1)
        while len(values) > 1 and values[-2] > values[-1]:
            total = weights[-2] + weights[-1]
            merged = (values[-2] * weights[-2] + values[-1] * weights[-1]) / total
            size = sizes[-2] + sizes[-1]
            del values[-1], weights[-1], sizes[-1]
            values[-1], weights[-1], sizes[-1] = merged, total, size
    return np.repeat(values, sizes)


def distance_scale(distance: np.ndarray, innovation: np.ndarray, *, min_per_bin: int = 40, max_bins: int = 16):
    """Robust spread of prediction errors as a non-decreasing function of distance.

    Parameters
    ----------
    distance : ndarray
        Median neighbour distance per point (positive, finite where used).
    innovation : ndarray
        Prediction error divided by ``sqrt(1 + leverage)`` per point.
    min_per_bin, max_bins : int
        Points are binned by quantiles of log distance with at least
        ``min_per_bin`` points in each of at most ``max_bins`` bins.

    Returns
    -------
    knots : ndarray
        Log distance at the bin medians.
    scale : ndarray
        Robust sd (1.4826 x MAD) of the innovations at each knot,
        non-decreasing.
    """
    use = np.isfinite(distance) & np.isfinite(innovation) & (distance > 0)
    d = np.log(distance[use])
    e = innovation[use]
    if e.size == 0:
        return np.array([0.0]), np.array([np.nan])
    bins = int(np.clip(e.size // min_per_bin, 1, max_bins))
    order = np.argsort(d, kind="stable")
    groups = np.array_split(order, bins)
    knots = np.array([np.median(d[g]) for g in groups])
    spread = np.array([_MAD_TO_SD * np.median(np.abs(e[g] - np.median(e[g]))) for g in groups])
    sizes = np.array([g.size for g in groups], dtype=float)
    scale = _pool_adjacent_violators(spread, sizes)
    return knots, scale


def neighbour_echo(z: np.ndarray, graph: NeighbourGraph, threshold: float) -> np.ndarray:
    """Share of each point's neighbours whose standardized residual has the
    same sign and exceeds ``threshold`` in size.

    A lone wrong value has neighbours that fit (echo near 0); a well in a
    pumping cone or a valley floor has neighbours that deviate alike.
    """
    idx = graph.indices
    mask = graph.mask
    zn = np.where(mask, z[np.where(mask, idx, 0)], np.nan)
    same = (np.sign(zn) == np.sign(z)[:, None]) & (np.abs(zn) >= threshold)
    count = (mask & np.isfinite(zn)).sum(axis=1)
    with np.errstate(all="ignore"):
        return np.where(count > 0, same.sum(axis=1) / count, np.nan)


def _one_pass(xy, values, graph, min_neighbours, local_df, prior_df):
    expected, fit_scale, leverage, count, distance = robust_plane_predict(
        xy, values, graph, min_neighbours=min_neighbours
    )
    residual = values - expected
    inflation = np.sqrt(1.0 + leverage)
    knots, knot_scale = distance_scale(distance, residual / inflation)
    with np.errstate(all="ignore"):
        global_scale = np.interp(np.log(distance), knots, knot_scale) * inflation
    local_scale = fit_scale * inflation
    nu_local = np.maximum(count - 3, 1) * (local_df / 7.0)
    pooled = np.sqrt((nu_local * local_scale**2 + prior_df * global_scale**2) / (nu_local + prior_df))
    with np.errstate(all="ignore"):
        z = residual / pooled
    return expected, residual, pooled, z, count, distance, (knots, knot_scale)


def local_residuals(
    xy: np.ndarray,
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    min_neighbours: int = 4,
    gross_z: float = 6.0,
    echo_z: float = 2.0,
    echo_share: float = 0.34,
    local_df: float = 7.0,
    prior_df: float = 8.0,
) -> LocalResult:
    """Standardized robust local residual of every point.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates in metres.
    values : ndarray
        Values (NaN where unusable).
    graph : NeighbourGraph
        Neighbours (self and coincident twins excluded).
    min_neighbours : int
        Fewer usable neighbours leave the point unpredicted (NaN).
    gross_z : float
        First-pass |z| beyond which a point that its neighbours do not echo
        is removed as a neighbour for the second pass.
    echo_z, echo_share : float
        A point is echoed when at least ``echo_share`` of its neighbours
        deviate the same way by at least ``echo_z``.
    local_df, prior_df : float
        Weights of the local and the distance scale when pooling them.

    Returns
    -------
    LocalResult
    """
    values = np.asarray(values, dtype=float)
    first = _one_pass(xy, values, graph, min_neighbours, local_df, prior_df)
    z1 = first[3]
    echo1 = neighbour_echo(z1, graph, echo_z)
    excluded = np.isfinite(z1) & (np.abs(z1) >= gross_z) & ~(echo1 >= echo_share)
    if excluded.any():
        keep = np.isfinite(values) & ~excluded
        second = _one_pass(xy, values, graph.restrict(keep), min_neighbours, local_df, prior_df)
        graph_used = graph.restrict(keep)
    else:
        second = first
        graph_used = graph
    expected, residual, scale, z, count, distance, model = second
    echo = neighbour_echo(z, graph_used, echo_z)
    return LocalResult(expected, residual, scale, z, count, distance, echo, excluded, model)
