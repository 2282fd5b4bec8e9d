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

from dataclasses import dataclass

import numpy as np

from ..graph import NeighbourGraph
from .robust import MAD_TO_SD as _MAD_TO_SD

__all__ = ["LocalResult", "local_residuals", "robust_plane_predict", "distance_scale", "neighbour_echo", "extrapolation"]

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
    curved_z : ndarray
        Standardized residual from a quadratic through the same neighbours.
    coherent : ndarray of bool
        The deviation is shared by the neighbours (echoed, or explained by
        their curvature): a likely real feature, not a lone error.
    explained_by_curvature : ndarray of bool
        The coherent test passed through the quadratic.
    excluded : ndarray of bool
        Points removed as neighbours in the second pass (gross, not echoed).
    distance_model : dict
        For "plane" and "quadratic": (log distance knots, robust scale at
        the knots) of the distance scale.
    quadratic_used : ndarray of bool
        The quadratic was the predictor (it predicts better at this spacing).
    """

    expected: np.ndarray
    residual: np.ndarray
    scale: np.ndarray
    z: np.ndarray
    neighbour_count: np.ndarray
    neighbour_distance: np.ndarray
    echo: np.ndarray
    curved_z: np.ndarray
    coherent: np.ndarray
    explained_by_curvature: np.ndarray
    excluded: np.ndarray
    distance_model: dict
    quadratic_used: np.ndarray


def _bisquare(u: np.ndarray) -> np.ndarray:
    inside = np.abs(u) < 1.0
    return np.where(inside, (1.0 - u * u) ** 2, 0.0)


def _masked_median(a: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Median of each row over the masked-in entries (NaN for an empty row).

    Sorting short rows and indexing the middle is much faster than
    ``numpy.nanmedian`` on an (n, k) array.
    """
    n, width = a.shape
    if width == 0:
        return np.full(n, np.nan)
    filled = np.sort(np.where(mask, a, np.inf), axis=1)
    count = mask.sum(axis=1)
    low = np.clip((count - 1) // 2, 0, width - 1)
    high = np.clip(count // 2, 0, width - 1)
    rows = np.arange(n)
    with np.errstate(invalid="ignore"):
        out = 0.5 * (filled[rows, low] + filled[rows, high])
    return np.where(count > 0, out, np.nan)


def _inverse_3x3(a: np.ndarray) -> np.ndarray:
    """Inverse of many symmetric 3 x 3 matrices by the adjugate (much faster
    than a batched LAPACK call for this size)."""
    a00, a01, a02 = a[:, 0, 0], a[:, 0, 1], a[:, 0, 2]
    a11, a12, a22 = a[:, 1, 1], a[:, 1, 2], a[:, 2, 2]
    c00 = a11 * a22 - a12 * a12
    c01 = a02 * a12 - a01 * a22
    c02 = a01 * a12 - a02 * a11
    c11 = a00 * a22 - a02 * a02
    c12 = a01 * a02 - a00 * a12
    c22 = a00 * a11 - a01 * a01
    det = a00 * c00 + a01 * c01 + a02 * c02
    out = np.stack([c00, c01, c02, c01, c11, c12, c02, c12, c22], axis=1).reshape(-1, 3, 3)
    return out / det[:, None, None]


def _batched_wls(design: np.ndarray, v: np.ndarray, w: np.ndarray, ok: np.ndarray, ridge_from: int, leverage: bool = True):
    """Weighted least squares for every row at once.

    Returns the coefficients and the variance inflation of the intercept (the
    prediction at the point itself) for unit error variance, by the sandwich
    ``(X'WX)^-1 X'W^2X (X'WX)^-1``, element [0, 0]. A light ridge on the terms
    from ``ridge_from`` on keeps rows solvable when the neighbours lie on a line
    (a road, a valley floor): the slope or curvature across it is then 0.
    """
    p = design.shape[2]
    weighted = design * w[:, :, None]
    weighted_t = weighted.transpose(0, 2, 1)
    a = weighted_t @ design
    b = (weighted_t @ v[:, :, None])[:, :, 0]
    # relative to the terms' own size: enough to keep a singular row solvable,
    # far too small to bias a well-determined slope (1e-6 of the mean diagonal)
    diagonal = np.einsum("nii->ni", a)[:, ridge_from:]
    ridge = 1e-6 * np.maximum(diagonal.mean(axis=1), 1e-12)
    for term in range(ridge_from, p):
        a[:, term, term] += ridge
    a[~ok] = np.eye(p)
    a_inv = _inverse_3x3(a) if p == 3 else np.linalg.inv(a)
    coef = (a_inv @ b[:, :, None])[:, :, 0]
    if not leverage:
        return coef, None
    # row 0 of A^-1 X'W, squared and summed = [A^-1 X'W^2 X A^-1]_00
    influence = (a_inv[:, 0:1, :] @ weighted_t)[:, 0, :]
    leverage = (influence * influence).sum(axis=1)
    return coef, leverage


@dataclass(frozen=True)
class PlaneFit:
    """Output of :func:`robust_plane_predict` (NaN where not predicted)."""

    expected: np.ndarray
    fit_scale: np.ndarray
    leverage: np.ndarray
    count: np.ndarray
    distance: np.ndarray
    quadratic: np.ndarray
    quadratic_leverage: np.ndarray
    curvature: np.ndarray
    quadratic_fit_scale: np.ndarray
    alike_share: np.ndarray


def robust_plane_predict(
    xy: np.ndarray,
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    iterations: int = 3,
    min_neighbours: int = 3,
    drift: np.ndarray | None = None,
    depth: np.ndarray | None = None,
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
    drift : ndarray, optional
        An external drift (for water levels: the land-surface elevation at
        each point, NaN where unknown). It enters every local fit as one more
        term, the neighbour's drift minus the point's, so the prediction at
        the point follows the drift with the slope the neighbours show
        (kriging with an external drift, Wackernagel 2003, ch. 37, in its
        local regression form). A row whose own drift is unknown is fitted
        without it.
    depth : ndarray, optional
        Well depth per point (NaN unknown). A neighbour of another depth
        counts less: its distance weight is multiplied by
        ``1 / (1 + (ln(d_j / d_i) / ln 2) ** 2)``, a half for a well twice
        or half as deep (wells screened at other depths tap other parts of
        the aquifer and carry other heads).

    Returns
    -------
    PlaneFit
        ``expected`` (prediction); ``fit_scale`` (robust sd of the
        neighbours about the plane, corrected for the fitted parameters);
        ``leverage`` (variance inflation of the prediction relative to one
        observation, ``Var(pred) / sigma^2``); ``count`` (neighbours used);
        ``distance`` (median neighbour distance); ``quadratic``,
        ``quadratic_leverage``, ``curvature`` (the same neighbours and final
        weights with a quadratic surface: its prediction, variance
        inflation, and Laplacian sign indicator ``a_xx + a_yy``; NaN with
        fewer than 8 weighted neighbours).
    """
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
    if depth is not None:
        depth = np.asarray(depth, dtype=float)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.log(depth[safe] / depth[:, None]) / np.log(2.0)
        w_dist = w_dist * np.where(mask & np.isfinite(ratio), 1.0 / (1.0 + ratio * ratio), 1.0)

    centre = _masked_median(v, mask)
    spread = _MAD_TO_SD * _masked_median(np.abs(v - centre[:, None]), mask)
    # scale floor: first from the raw spread (only to start), then a fifth of the
    # typical fitted scale, so a row of identical neighbours cannot give zero weights
    floor_global = np.nanmedian(spread[ok]) if ok.any() else 1.0
    floor_global = floor_global if np.isfinite(floor_global) and floor_global > 0 else 1.0
    floor = 1e-3 * floor_global
    w_rob = _bisquare((v - centre[:, None]) / (6.0 * np.maximum(spread, floor)[:, None]))
    w_rob = np.where(mask, w_rob, 0.0)

    terms = [np.ones_like(dx), dx, dy]
    if drift is not None:
        drift = np.asarray(drift, dtype=float)
        own_drift = np.isfinite(drift)
        dg = np.where(mask & own_drift[:, None] & np.isfinite(drift[safe]), drift[safe] - drift[:, None], 0.0)
        # scaled like the coordinates, so the light ridge treats all terms alike
        dg_scale = _masked_median(np.abs(dg), mask & (dg != 0))
        dg = dg / np.where(np.isfinite(dg_scale) & (dg_scale > 0), dg_scale, 1.0)[:, None]
        terms.append(dg)
    params = len(terms)
    dof = np.maximum(count - params, 1)
    df_correction = np.sqrt(count / dof)
    plane = np.stack(terms, axis=2)
    fit_scale = spread
    for step in range(iterations + 1):
        w = w_dist * w_rob
        # too few neighbours kept (all weights 0 for a scattered row): fall back to distance weights
        lost = (w > 0).sum(axis=1) < 3
        w = np.where(lost[:, None], w_dist, w)
        coef, leverage = _batched_wls(plane, v, w, ok, ridge_from=1, leverage=step == iterations)
        resid = v - (plane @ coef[:, :, None])[:, :, 0]
        fit_scale = _MAD_TO_SD * _masked_median(np.abs(resid), mask) * df_correction
        if step == 0:
            typical = np.nanmedian(fit_scale[ok]) if ok.any() else np.nan
            if np.isfinite(typical) and typical > 0:
                floor = 0.2 * typical
        if step < iterations:
            w_rob = np.where(mask, _bisquare(resid / (_BISQUARE_C * np.maximum(fit_scale, floor)[:, None])), 0.0)

    # the same neighbours and weights, with a quadratic: does the neighbours'
    # own curvature (a cone, a valley floor) predict the point?
    quad = np.concatenate([plane, np.stack([dx * dx, dx * dy, dy * dy], axis=2)], axis=2)
    enough = ok & ((w > 0).sum(axis=1) >= 8)
    qcoef, qleverage = _batched_wls(quad, v, w, enough, ridge_from=1)
    quadratic = np.where(enough, qcoef[:, 0], np.nan)
    curvature = np.where(enough, qcoef[:, params] + qcoef[:, params + 2], np.nan)
    qleverage = np.where(enough, qleverage, np.nan)
    qresid = v - (quad @ qcoef[:, :, None])[:, :, 0]
    qdof = np.maximum(count - params - 3, 1)
    qfit_scale = _MAD_TO_SD * _masked_median(np.abs(qresid), mask & (w > 0)) * np.sqrt(count / qdof)
    qfit_scale = np.where(enough, np.maximum(qfit_scale, floor), np.nan)

    # neighbours whose values side with the point rather than with the
    # prediction: carried to each neighbour along the local slope, the point's
    # own value lands within a third of its deviation of the neighbour's value.
    # Two or more such neighbours make a group (the wells of one pumping
    # station, low together), which the bisquare weights would otherwise discount.
    own = values - coef[:, 0]
    carried = values[:, None] + (plane[:, :, 1:] @ coef[:, 1:, None])[:, :, 0]
    alike = mask & (np.abs(v - carried) < np.abs(own)[:, None] / 3.0)
    alike_count = alike.sum(axis=1)
    alike_share = np.where(ok & (alike_count >= 2), alike_count / np.maximum(count, 1), 0.0)

    expected = np.where(ok, coef[:, 0], np.nan)
    fit_scale = np.where(ok, np.maximum(fit_scale, floor), np.nan)
    leverage = np.where(ok, leverage, np.nan)
    distance = np.where(ok, length, np.nan)
    return PlaneFit(
        expected, fit_scale, leverage, np.where(ok, count, 0), distance, quadratic, qleverage, curvature, qfit_scale,
        alike_share,
    )


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
    same sign and exceeds both ``threshold`` and a quarter of the point's own.

    A lone wrong value has neighbours that fit (echo near 0); a well in a
    pumping cone or a valley floor has neighbours that deviate alike.
    """
    idx = graph.indices
    mask = graph.mask
    zn = np.where(mask, z[np.where(mask, idx, 0)], np.nan)
    # a neighbour echoes a deviation when it goes the same way by at least
    # ``threshold`` and by at least a quarter as much (a decimal slip is not
    # echoed by a neighbour that is merely a little high)
    needed = np.maximum(threshold, 0.25 * np.abs(z))[:, None]
    same = (np.sign(zn) == np.sign(z)[:, None]) & (np.abs(zn) >= needed)
    count = (mask & np.isfinite(zn)).sum(axis=1)
    with np.errstate(all="ignore"):
        return np.where(count > 0, same.sum(axis=1) / count, np.nan)


def _pooled_scale(fit_scale, count, params, distance, innovation, local_df, prior_df):
    """Unit residual scale: the local fit scale pooled with the distance scale."""
    knots, knot_scale = distance_scale(distance, innovation)
    with np.errstate(all="ignore"):
        global_scale = np.interp(np.log(distance), knots, knot_scale)
        nu_local = np.maximum(count - params, 1) * (local_df / 7.0)
        unit = np.sqrt((nu_local * fit_scale**2 + prior_df * global_scale**2) / (nu_local + prior_df))
    return unit, global_scale, (knots, knot_scale)


def _one_pass(xy, values, graph, min_neighbours, local_df, prior_df, drift=None, depth=None):
    fit = robust_plane_predict(xy, values, graph, min_neighbours=min_neighbours, drift=drift, depth=depth)
    params = 3 if drift is None else 4
    residual = values - fit.expected
    inflation = np.sqrt(1.0 + fit.leverage)
    unit, global_plane, model = _pooled_scale(
        fit.fit_scale, fit.count, params, fit.distance, residual / inflation, local_df, prior_df
    )
    q_residual = values - fit.quadratic
    q_inflation = np.sqrt(1.0 + fit.quadratic_leverage)
    q_unit, global_quad, q_model = _pooled_scale(
        fit.quadratic_fit_scale, fit.count, params + 3, fit.distance, q_residual / q_inflation, local_df, prior_df
    )
    with np.errstate(all="ignore"):
        plane_scale = unit * inflation
        quad_scale = q_unit * q_inflation
        plane_z = residual / plane_scale
        quad_z = q_residual / quad_scale
        # the predictor that misses least at this spacing, judged over all
        # points: the plane where noise dominates (dense wells), the quadratic
        # where a smooth surface is sampled sparsely
        use_quad = np.isfinite(quad_z) & (global_quad * q_inflation < 0.9 * global_plane * inflation)
        expected = np.where(use_quad, fit.quadratic, fit.expected)
        scale = np.where(use_quad, quad_scale, plane_scale)
        z = np.where(use_quad, quad_z, plane_z)
        residual = values - expected
        # the other surface, for the coherence test
        alternative_z = np.where(use_quad, plane_z, quad_z)
        alternative_residual = np.where(use_quad, values - fit.expected, q_residual)
    curved_z = (alternative_z, alternative_residual)
    return fit, expected, residual, scale, z, curved_z, use_quad, {"plane": model, "quadratic": q_model}


def _coherent(z, residual, alternative_z, alternative_residual, use_quad, curvature, echo, echo_share, curve_z):
    """A deviation the neighbours share: echoed by them, or explained by the
    other local surface (the quadratic bending the same way, a bowl for a low
    value and a dome for a high one; or the plane where the quadratic
    overshoots), which must account for at least half of it."""
    bends_along = np.where(use_quad, True, np.sign(curvature) == -np.sign(z))
    with np.errstate(invalid="ignore"):
        most = np.abs(alternative_residual) <= 0.5 * np.abs(residual)
        explained = np.isfinite(alternative_z) & (np.abs(alternative_z) < curve_z) & bends_along & most
    return (echo >= echo_share) | explained, explained


def local_residuals(
    xy: np.ndarray,
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    min_neighbours: int = 4,
    gross_z: float = 6.0,
    echo_z: float = 2.0,
    echo_share: float = 0.2,
    curve_z: float = 3.0,
    local_df: float = 7.0,
    prior_df: float = 8.0,
    drift: np.ndarray | None = None,
    depth: np.ndarray | None = None,
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
        First-pass |z| beyond which a point that is not coherent with its
        neighbours is removed as a neighbour for the second pass.
    echo_z, echo_share : float
        A point is echoed when at least ``echo_share`` of its neighbours
        deviate the same way by at least ``echo_z``.
    curve_z : float
        A point is explained by the curvature of its neighbours when a
        quadratic through them (same weights) predicts it within ``curve_z``
        and bends the same way.
    local_df, prior_df : float
        Weights of the local and the distance scale when pooling them.
    drift : ndarray, optional
        External drift per point (see :func:`robust_plane_predict`).
    depth : ndarray, optional
        Well depth per point: neighbours of other depths weigh less (see
        :func:`robust_plane_predict`).

    Returns
    -------
    LocalResult
    """
    values = np.asarray(values, dtype=float)
    fit, _, residual1, _, z1, (alt_z1, alt_res1), use_quad1, _ = _one_pass(
        xy, values, graph, min_neighbours, local_df, prior_df, drift, depth
    )
    echo1 = np.fmax(neighbour_echo(z1, graph, echo_z), fit.alike_share)
    coherent1, _ = _coherent(z1, residual1, alt_z1, alt_res1, use_quad1, fit.curvature, echo1, echo_share, curve_z)
    excluded = np.isfinite(z1) & (np.abs(z1) >= gross_z) & ~coherent1
    graph_used = graph.restrict(np.isfinite(values) & ~excluded) if excluded.any() else graph
    fit, expected, residual, scale, z, curved_z, use_quad, model = _one_pass(
        xy, values, graph_used, min_neighbours, local_df, prior_df, drift, depth
    )
    # echoed: neighbours deviate alike in their own residuals, or have values
    # like the point's (a group the robust fit set aside)
    echo = np.fmax(neighbour_echo(z, graph_used, echo_z), fit.alike_share)
    alternative_z, alternative_residual = curved_z
    coherent, explained = _coherent(
        z, residual, alternative_z, alternative_residual, use_quad, fit.curvature, echo, echo_share, curve_z
    )
    return LocalResult(
        expected=expected,
        residual=residual,
        scale=scale,
        z=z,
        neighbour_count=fit.count,
        neighbour_distance=fit.distance,
        echo=echo,
        curved_z=alternative_z,
        coherent=coherent,
        explained_by_curvature=explained,
        excluded=excluded,
        distance_model=model,
        quadratic_used=use_quad,
    )


def extrapolation(xy: np.ndarray, values: np.ndarray, expected: np.ndarray, graph: NeighbourGraph):
    """How far each prediction leaves its neighbours' values, and whether they all lie on one side.

    Returns
    -------
    excess : ndarray
        Distance of ``expected`` outside [min, max] of the neighbours' values
        beyond a quarter of their range (a local surface may bend a little
        past its data, as at the bottom of a cone; 0 inside, NaN where not
        predicted).
    one_sided : ndarray of bool
        Every neighbour lies within a half-plane through the point (the
        largest angular gap between neighbours exceeds 180 degrees).
    """
    idx = graph.indices
    mask = graph.mask & np.isfinite(values[np.where(idx >= 0, idx, 0)])
    safe = np.where(mask, idx, 0)
    v = values[safe]
    low = np.where(mask, v, np.inf).min(axis=1)
    high = np.where(mask, v, -np.inf).max(axis=1)
    with np.errstate(invalid="ignore"):
        slack = 0.25 * (high - low)
        excess = np.where(np.isfinite(expected) & mask.any(axis=1),
                          np.maximum(low - slack - expected, 0.0) + np.maximum(expected - high - slack, 0.0), np.nan)
        angle = np.where(mask, np.arctan2(xy[safe, 1] - xy[:, 1:2], xy[safe, 0] - xy[:, 0:1]), np.inf)
    angle = np.sort(angle, axis=1)
    count = mask.sum(axis=1)
    rows = np.arange(angle.shape[0])
    with np.errstate(invalid="ignore"):
        gaps = np.diff(angle, axis=1)
        gaps = np.where(np.isfinite(gaps), gaps, -np.inf)
        first = angle[:, 0]
        last = angle[rows, np.maximum(count - 1, 0)]
        wrap = np.where(count >= 2, 2 * np.pi - (last - first), -np.inf)
    largest = np.maximum(gaps.max(axis=1, initial=-np.inf), wrap)
    one_sided = (count >= 2) & (largest > np.pi)
    return excess, one_sided
