"""Empirical semivariograms, model fits, and what they tell the screen.

How fast values change with distance sets how far a point's neighbourhood
should reach and how large a difference between a point and a neighbour at
distance h is ordinary. This module estimates it from the same lag pairs as
:mod:`pointsift.methods.lagpairs`.

Sources
-------
- Matheron estimator: Matheron, G. (1962), *Traite de geostatistique
  appliquee*, tome I; ``gamma(h) = sum (z_i - z_j)^2 / (2 N(h))``.
- Cressie-Hawkins estimator: Cressie, N. and Hawkins, D. M. (1980), Robust
  estimation of the variogram, *Math. Geol.* 12, 115-125; Cressie, N. (1993),
  *Statistics for Spatial Data*, rev. ed., eq. 2.4.12::

      2 gamma(h) = { N(h)^-1 sum |z_i - z_j|^(1/2) }^4 / (0.457 + 0.494 / N(h))

  which is the *variogram*; the semivariogram reported here is half of it.
  (Cressie and Hawkins 1980 add ``0.045 / N(h)^2`` to the denominator;
  scikit-gstat follows that form.)
- Weighted least squares: Cressie, N. (1985), Fitting variogram models by
  weighted least squares, *Math. Geol.* 17, 563-586: minimise
  ``sum_k N(h_k) {gamma_hat(h_k) / gamma(h_k; theta) - 1}^2``, i.e. weights
  ``N(h_k) / gamma(h_k; theta)^2``.
- Models (nugget ``c0``, partial sill ``c``, range parameter ``a``), Cressie
  (1993) section 2.3.1 and Webster, R. and Oliver, M. A. (2007),
  *Geostatistics for Environmental Scientists*, 2nd ed., ch. 5 (from memory):
  spherical ``c0 + c (1.5 h/a - 0.5 (h/a)^3)`` for ``h <= a``, else
  ``c0 + c`` (practical range ``a``); exponential ``c0 + c (1 - exp(-h/a))``
  (practical range ``3a``, where 95 % of the sill is reached); Gaussian
  ``c0 + c (1 - exp(-(h/a)^2))`` (practical range ``sqrt(3) a``).
- Square-root-difference cloud: Cressie (1993) section 2.4 (from memory).
- Default lag classes: cutoff one third of the bounding-box diagonal, 15
  classes (the defaults of the gstat R package, from memory), widened to at
  least half the point spacing so the first classes are not empty.

Lag classes are ``(e_0, e_1], (e_1, e_2], ...``: a pair at separation 0
(coincident records) is in no class.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.optimize import least_squares

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .lagpairs import DEFAULT_DIRECTIONS
from .pairsearch import PairSet, _as_xy, axial_difference, find_pairs, point_spacing

__all__ = [
    "ESTIMATORS",
    "MODELS",
    "DEFAULT_VARIOGRAM_PAIR_BUDGET",
    "MIN_CLASS_PAIRS",
    "ANISOTROPY_RATIO",
    "EmpiricalVariogram",
    "VariogramFit",
    "VariogramAnalysis",
    "NeighbourhoodHint",
    "default_cutoff",
    "lag_edges",
    "matheron",
    "cressie_hawkins",
    "empirical_variogram",
    "variogram_model",
    "practical_range",
    "fit_variogram",
    "anisotropy_hint",
    "analyse_variogram",
    "variogram_table",
    "neighbourhood_from_fit",
    "expected_difference_sd",
    "plot_variogram_cloud",
    "plot_sqrt_difference_cloud",
    "plot_variogram",
]

#: Estimator names as written in the ``variogram`` table.
ESTIMATORS: tuple[str, ...] = ("matheron", "cressie_hawkins")
#: Variogram models that can be fitted.
MODELS: tuple[str, ...] = ("spherical", "exponential", "gaussian")
#: Pairs kept for a variogram before seeded subsampling starts.
DEFAULT_VARIOGRAM_PAIR_BUDGET = 500_000
#: A lag class needs this many pairs to count towards a trustworthy fit
#: (Journel, A. G. and Huijbregts, C. J. (1978), *Mining Geostatistics*:
#: at least 30 to 50 pairs per lag; from memory).
MIN_CLASS_PAIRS = 30
#: Fewer well-filled classes than this and a fit is not trusted (ours).
MIN_FIT_CLASSES = 5
#: Ratio of largest to smallest directional practical range that hints at
#: anisotropy (ours: a clear difference, beyond the scatter of directional fits).
ANISOTROPY_RATIO = 1.5
#: Nugget share of the sill above which the neighbourhood tells little (ours).
MAX_NUGGET_SHARE = 0.8
#: Least pair-weighted R^2 of a fit to be trusted (ours).
MIN_R_SQUARED = 0.5

_PRACTICAL_FACTOR = {"spherical": 1.0, "exponential": 3.0, "gaussian": math.sqrt(3.0)}


# --------------------------------------------------------------------------- lag classes

def default_cutoff(xy) -> float:
    """One third of the diagonal of the points' bounding box (gstat's default cutoff, from memory)."""
    xy = _as_xy(xy)
    pts = xy[np.isfinite(xy).all(axis=1)]
    if pts.shape[0] < 2:
        raise InputError(f"A variogram needs at least two points with coordinates, got {pts.shape[0]}.")
    extent = pts.max(axis=0) - pts.min(axis=0)
    cutoff = float(np.hypot(extent[0], extent[1])) / 3.0
    if not cutoff > 0:
        raise InputError("All points share one location; a variogram needs points at different places.")
    return cutoff


def lag_edges(xy=None, *, lag_count: int | None = None, lag_width: float | None = None, edges=None) -> np.ndarray:
    """Edges of the variogram lag classes ``(e_0, e_1], (e_1, e_2], ...``.

    Parameters
    ----------
    xy : array_like, shape (n, 2), optional
        Coordinates, needed for defaults derived from extent and spacing.
    lag_count : int, optional
        Number of classes.
    lag_width : float, optional
        Width ``W`` of each class: ``(0, W], (W, 2W], ...``.
    edges : array_like, optional
        Explicit increasing edges starting at 0 or above; excludes the other two.

    Returns
    -------
    ndarray
        ``lag_count + 1`` increasing edges starting at 0 (or the given edges).

    Notes
    -----
    With neither count nor width, the cutoff is a third of the bounding-box
    diagonal and the width ``max(cutoff / 15, spacing / 2)``, ``spacing``
    being the median nearest-neighbour distance. A width alone fills the
    cutoff; a count alone divides it.

    Examples
    --------
    >>> lag_edges(lag_count=3, lag_width=10.0).tolist()
    [0.0, 10.0, 20.0, 30.0]
    """
    if edges is not None:
        if lag_count is not None or lag_width is not None:
            raise ConfigError("Give either explicit edges or lag_count/lag_width, not both.")
        edges = np.asarray(edges, dtype=float).ravel()
        if edges.size < 2 or not np.all(np.isfinite(edges)) or edges[0] < 0 or np.any(np.diff(edges) <= 0):
            raise ConfigError(
                f"edges {edges.tolist()} must be at least two finite, strictly increasing lengths from 0 up, "
                "e.g. [0, 100, 200, 300]."
            )
        return edges
    if lag_count is not None and not (isinstance(lag_count, (int, np.integer)) and 1 <= lag_count <= 1000):
        raise ConfigError(f"lag_count must be a whole number from 1 to 1000, got {lag_count!r}.")
    if lag_width is not None and not (lag_width > 0 and math.isfinite(lag_width)):
        raise ConfigError(f"lag_width must be a positive length, got {lag_width!r}.")
    if lag_count is not None and lag_width is not None:
        return lag_width * np.arange(lag_count + 1, dtype=float)
    if xy is None:
        raise ConfigError("Lag classes need the points (xy) unless both lag_count and lag_width are given.")
    cutoff = default_cutoff(xy)
    if lag_width is not None:
        count = max(1, int(math.ceil(cutoff / lag_width - 1e-9)))
        return lag_width * np.arange(count + 1, dtype=float)
    if lag_count is not None:
        return cutoff / lag_count * np.arange(lag_count + 1, dtype=float)
    spacing = point_spacing(xy)
    width = cutoff / 15.0
    if math.isfinite(spacing):
        width = max(width, spacing / 2.0)
    count = max(1, int(math.floor(cutoff / width + 1e-9)))
    return width * np.arange(count + 1, dtype=float)


# --------------------------------------------------------------------------- estimators

def matheron(differences) -> float:
    """Matheron semivariance of value differences: ``sum(d^2) / (2 N)``; NaN when empty.

    Examples
    --------
    >>> matheron([1.0, -1.0, 2.0])
    1.0
    """
    d = np.asarray(differences, dtype=float)
    return float(np.sum(d * d) / (2 * d.size)) if d.size else float("nan")


def cressie_hawkins(differences) -> float:
    """Cressie-Hawkins semivariance (Cressie 1993, eq. 2.4.12, halved); NaN when empty.

    ``{mean |d|^(1/2)}^4 / (0.457 + 0.494 / N) / 2``.
    """
    d = np.asarray(differences, dtype=float)
    if not d.size:
        return float("nan")
    return float(np.mean(np.sqrt(np.abs(d))) ** 4 / (0.457 + 0.494 / d.size) / 2.0)


def _class_estimates(class_index: np.ndarray, distance: np.ndarray, squared: np.ndarray, root: np.ndarray,
                     n_classes: int):
    """Pairs, mean distance, Matheron and Cressie-Hawkins per class (vectorised).

    ``squared`` and ``root`` are ``d^2`` and ``|d|^(1/2)`` of the pair differences.
    """
    ok = class_index >= 0
    idx = class_index[ok]
    counts = np.bincount(idx, minlength=n_classes)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_d = np.bincount(idx, weights=distance[ok], minlength=n_classes) / counts
        sq = np.bincount(idx, weights=squared[ok], minlength=n_classes)
        gamma_m = sq / (2.0 * counts)
        root = np.bincount(idx, weights=root[ok], minlength=n_classes) / counts
        gamma_ch = root**4 / (0.457 + 0.494 / counts) / 2.0
    empty = counts == 0
    for arr in (mean_d, gamma_m, gamma_ch):
        arr[empty] = np.nan
    return counts, mean_d, gamma_m, gamma_ch


@dataclass(frozen=True)
class EmpiricalVariogram:
    """Empirical semivariograms, omnidirectional and directional.

    Attributes
    ----------
    table : pandas.DataFrame
        Columns ``direction`` (``'all'`` or the azimuth as text), ``estimator``
        (``'matheron'`` / ``'cressie_hawkins'``), ``lag_low``, ``lag_high``,
        ``mean_distance``, ``pairs``, ``gamma``; every class appears, empty
        ones with 0 pairs and NaN.
    edges : ndarray
        Class edges.
    pairs : PairSet
        Pairs used (within the last edge).
    differences : ndarray
        ``value[head] - value[tail]`` per pair.
    directions : tuple of float
        Directional azimuths (may be empty).
    angle_tolerance : float
    """

    table: pd.DataFrame
    edges: np.ndarray
    pairs: PairSet
    differences: np.ndarray
    directions: tuple[float, ...]
    angle_tolerance: float

    def curve(self, direction: str = "all", estimator: str = "matheron") -> pd.DataFrame:
        """Rows of one direction and estimator."""
        t = self.table
        return t[(t["direction"] == direction) & (t["estimator"] == estimator)].reset_index(drop=True)


def empirical_variogram(
    xy,
    values,
    edges,
    *,
    directions=DEFAULT_DIRECTIONS,
    angle_tolerance: float = 22.5,
    pair_budget: int = DEFAULT_VARIOGRAM_PAIR_BUDGET,
    seed: int = 0,
    pairs: PairSet | None = None,
) -> EmpiricalVariogram:
    """Matheron and Cressie-Hawkins semivariograms in lag classes ``(e_k, e_k+1]``.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Coordinates in a metric CRS.
    values : array_like, shape (n,)
        Values; NaN rows take part in no pair.
    edges : array_like
        Class edges (see :func:`lag_edges`).
    directions : sequence of float
        Azimuths of directional variograms (empty for omnidirectional only).
    angle_tolerance : float
        Half-width of a direction class in degrees, ``(0, 90]``.
    pair_budget, seed :
        Passed to :func:`~pointsift.methods.lagpairs.find_pairs`.
    pairs : PairSet, optional
        Pairs already found with ``max_distance >= edges[-1]``.

    Returns
    -------
    EmpiricalVariogram
    """
    xy = _as_xy(xy)
    values = np.asarray(values, dtype=float)
    if values.shape != (xy.shape[0],):
        raise InputError(f"values must have one entry per point ({xy.shape[0]}), got shape {values.shape}.")
    edges = lag_edges(edges=edges)
    if not 0 < angle_tolerance <= 90:
        raise ConfigError(f"angle_tolerance must be in (0, 90] degrees, got {angle_tolerance!r}.")
    directions = tuple(float(d) % 180.0 for d in directions)
    if pairs is None:
        usable = np.isfinite(values) & np.isfinite(xy).all(axis=1)
        pairs = find_pairs(np.where(usable[:, None], xy, np.nan), float(edges[-1]),
                           pair_budget=pair_budget, seed=seed)
    elif pairs.max_distance < edges[-1]:
        raise ConfigError(
            f"The pairs were searched to {pairs.max_distance:g}, short of the last lag edge {edges[-1]:g}; "
            "search them again with max_distance at least the last edge."
        )
    diff = values[pairs.head] - values[pairs.tail]
    ok = np.isfinite(diff)
    n_classes = edges.size - 1
    cls = np.searchsorted(edges, pairs.distance, side="left") - 1
    cls[(cls >= n_classes) | ~ok] = -1
    clean = np.where(ok, diff, 0.0)
    squared, root = clean * clean, np.sqrt(np.abs(clean))
    frames = []
    for direction in (None, *directions):
        if direction is None:
            c = cls
        else:
            with np.errstate(invalid="ignore"):
                inside = axial_difference(pairs.azimuth, direction) <= angle_tolerance
            c = np.where(inside, cls, -1)
        counts, mean_d, g_m, g_ch = _class_estimates(c, pairs.distance, squared, root, n_classes)
        for name, gamma in zip(ESTIMATORS, (g_m, g_ch)):
            frames.append(pd.DataFrame({
                "direction": direction_words(direction, "label"),
                "estimator": name,
                "lag_low": edges[:-1],
                "lag_high": edges[1:],
                "mean_distance": mean_d,
                "pairs": counts.astype(np.int64),
                "gamma": gamma,
            }))
    table = pd.concat(frames, ignore_index=True)
    table["direction"] = table["direction"].astype(object)
    table["estimator"] = table["estimator"].astype(object)
    return EmpiricalVariogram(table, edges, pairs, diff, directions, float(angle_tolerance))


def variogram_table(result) -> pd.DataFrame:
    """The non-spatial ``variogram`` table of an :class:`EmpiricalVariogram` or :class:`VariogramAnalysis`.

    Columns ``direction``, ``estimator``, ``lag_low``, ``lag_high``,
    ``mean_distance``, ``pairs``, ``gamma``.
    """
    empirical = result.empirical if isinstance(result, VariogramAnalysis) else result
    return empirical.table[["direction", "estimator", "lag_low", "lag_high", "mean_distance", "pairs", "gamma"]].copy()


# --------------------------------------------------------------------------- models and fits

def variogram_model(model: str, h, nugget: float, partial_sill: float, range_parameter: float) -> np.ndarray:
    """Semivariance of a model with nugget at separations ``h`` (0 at ``h == 0``).

    Examples
    --------
    >>> variogram_model("spherical", [0.0, 5.0, 10.0, 20.0], 1.0, 2.0, 10.0).tolist()
    [0.0, 2.375, 3.0, 3.0]
    """
    h = np.asarray(h, dtype=float)
    return np.where(h > 0, nugget + partial_sill * _structure(model, h, range_parameter), 0.0)


def _structure(model: str, h: np.ndarray, a: float) -> np.ndarray:
    """Model shape from 0 (h = 0) to 1 (sill), without the nugget."""
    r = np.abs(h) / a
    if model == "spherical":
        return np.where(r < 1.0, 1.5 * r - 0.5 * r**3, 1.0)
    if model == "exponential":
        return 1.0 - np.exp(-r)
    if model == "gaussian":
        return 1.0 - np.exp(-(r**2))
    raise ConfigError(f"model {model!r} is not known; choose one of {', '.join(MODELS)}.")


def practical_range(model: str, range_parameter: float) -> float:
    """Distance at which the model reaches (about 95 % of) its sill.

    Spherical: ``a``; exponential: ``3a``; Gaussian: ``sqrt(3) a``.
    """
    if model not in _PRACTICAL_FACTOR:
        raise ConfigError(f"model {model!r} is not known; choose one of {', '.join(MODELS)}.")
    return _PRACTICAL_FACTOR[model] * float(range_parameter)


@dataclass(frozen=True)
class VariogramFit:
    """A variogram model fitted by Cressie (1985) weighted least squares.

    Attributes
    ----------
    model : str
        ``spherical``, ``exponential`` or ``gaussian``.
    nugget, partial_sill : float
        In squared value units; the sill is their sum.
    range_parameter : float
        The ``a`` of the model formula.
    practical_range : float
        Distance where the sill is (about 95 %) reached; equals ``a`` for the
        spherical model, ``3a`` exponential, ``sqrt(3) a`` Gaussian.
    converged : bool
        The optimiser reported success.
    weighted_criterion : float
        ``sum N_k (gamma_hat_k / gamma_k - 1)^2`` at the optimum.
    rmse : float
        Root mean square of ``gamma_hat - gamma`` over the classes used.
    r_squared : float
        Pair-weighted coefficient of determination of the fit.
    classes_used, pairs_used : int
    lag_span : tuple of float
        Mean distance of the first and last class used; ``cutoff`` is the
        last class's upper edge when known.
    trustworthy : bool
        All checks in ``reasons`` passed.
    reasons : tuple of str
        One sentence per check, passed or failed, failures first.
    candidates : dict
        Weighted criterion of each model tried (``model='auto'``).
    estimator : str
        Estimator whose values were fitted.
    direction : str
    """

    model: str
    nugget: float
    partial_sill: float
    range_parameter: float
    practical_range: float
    converged: bool
    weighted_criterion: float
    rmse: float
    r_squared: float
    classes_used: int
    pairs_used: int
    lag_span: tuple[float, float]
    cutoff: float
    trustworthy: bool
    reasons: tuple[str, ...]
    candidates: dict = field(default_factory=dict)
    estimator: str = "matheron"
    direction: str = "all"

    @property
    def sill(self) -> float:
        """Nugget plus partial sill."""
        return self.nugget + self.partial_sill

    def gamma(self, h) -> np.ndarray:
        """Model semivariance at ``h`` (0 at ``h == 0``)."""
        return variogram_model(self.model, h, self.nugget, self.partial_sill, self.range_parameter)

    def as_record(self) -> dict:
        """Plain values for ``run_info`` (None where a number is undefined)."""
        return _plain({
            "direction": self.direction,
            "estimator": self.estimator,
            "model": self.model,
            "nugget": float(self.nugget),
            "partial_sill": float(self.partial_sill),
            "sill": float(self.sill),
            "range_parameter": float(self.range_parameter),
            "practical_range": float(self.practical_range),
            "range_note": "practical_range is where about 95% of the sill is reached "
                          "(spherical: a, exponential: 3a, gaussian: sqrt(3)a); range_parameter is a.",
            "converged": bool(self.converged),
            "weighted_criterion": float(self.weighted_criterion),
            "rmse": float(self.rmse),
            "r_squared": float(self.r_squared),
            "classes_used": int(self.classes_used),
            "pairs_used": int(self.pairs_used),
            "lag_span": [float(self.lag_span[0]), float(self.lag_span[1])],
            "cutoff": float(self.cutoff),
            "trustworthy": bool(self.trustworthy),
            "reasons": list(self.reasons),
            "candidates": {k: float(v) for k, v in self.candidates.items()},
        })


def _plain(value):
    """Nested record with non-finite floats replaced by None (strict JSON has no NaN)."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def _structure_slope(model: str, h: np.ndarray, a: float) -> np.ndarray:
    """Derivative of :func:`_structure` with respect to the range parameter ``a``."""
    r = np.abs(h) / a
    dr_da = -r / a
    if model == "spherical":
        return np.where(r < 1.0, (1.5 - 1.5 * r**2) * dr_da, 0.0)
    if model == "exponential":
        return np.exp(-r) * dr_da
    return 2.0 * r * np.exp(-(r**2)) * dr_da


def _fit_one(model: str, h: np.ndarray, g: np.ndarray, n: np.ndarray, h_max: float, start=None):
    """Best WLS fit of one model over a few starts; returns (params, criterion, converged).

    ``start`` (nugget, partial sill, range parameter) is tried first; the
    grid of starts is used when it is absent or does not converge.
    """
    # Work in units of the largest lag and the largest gamma for conditioning.
    gs = float(np.max(g)) if np.max(g) > 0 else 1.0
    hs = h_max
    hh, gg = h / hs, g / gs
    w = np.sqrt(n.astype(float))

    def model_values(theta):
        return np.maximum(theta[0] + theta[1] * _structure(model, hh, theta[2]), 1e-12)

    def residual(theta):
        return w * (gg / model_values(theta) - 1.0)

    def jacobian(theta):
        factor = -w * gg / model_values(theta) ** 2
        return np.column_stack([
            factor,
            factor * _structure(model, hh, theta[2]),
            factor * theta[1] * _structure_slope(model, hh, theta[2]),
        ])

    first = float(gg[0])
    top = float(np.max(gg))
    factor = _PRACTICAL_FACTOR[model]
    grid = [np.array([nugget0, max(top - nugget0, 1e-3), practical0 / factor])
            for nugget0 in (0.0, 0.5 * first) for practical0 in (0.2, 0.5, 1.0)]
    lower, upper = np.array([0.0, 0.0, 1e-4]), np.array([np.inf, np.inf, 20.0])
    starts = grid
    if start is not None and np.all(np.isfinite(start)):
        x0 = np.asarray(start, dtype=float) / np.array([gs, gs, hs])
        starts = [np.clip(x0, lower + np.array([0.0, 1e-6, 0.0]), upper * 0.99)]

    def run(candidates, best):
        for x0 in candidates:
            try:
                res = least_squares(residual, x0, jac=jacobian, bounds=(lower, upper),
                                    method="trf", x_scale="jac", max_nfev=200, ftol=1e-6, xtol=1e-6)
            except (ValueError, FloatingPointError):
                continue
            crit = float(np.sum(res.fun**2))
            ok = bool(res.success) and bool(np.all(np.isfinite(res.x)))
            key = (not ok, crit)
            if best is None or key < best[0]:
                best = (key, res.x.copy(), crit, ok)
        return best

    best = run(starts, None)
    if starts is not grid and (best is None or not best[3]):
        best = run(grid, best)
    if best is None:
        return np.array([np.nan, np.nan, np.nan]), float("inf"), False
    theta = best[1] * np.array([gs, gs, hs])
    return theta, best[2], best[3]


def fit_variogram(
    distance,
    gamma,
    pairs,
    *,
    model: str = "auto",
    cutoff: float | None = None,
    min_class_pairs: int = MIN_CLASS_PAIRS,
    estimator: str = "matheron",
    direction: str = "all",
    start=None,
) -> VariogramFit:
    """Fit a spherical, exponential or Gaussian model with nugget by Cressie (1985) WLS.

    Parameters
    ----------
    distance, gamma, pairs : array_like
        Mean distance, semivariance and pair count of each lag class; empty
        classes (0 pairs or NaN) are skipped.
    model : {"auto", "spherical", "exponential", "gaussian"}
        ``"auto"`` fits all three and keeps the lowest weighted criterion.
    cutoff : float, optional
        Upper edge of the last class (default: the largest mean distance).
    min_class_pairs : int
        Pairs a class needs to count as well filled in the checks.
    estimator, direction : str
        Labels kept in the result.
    start : tuple of float, optional
        Starting (nugget, partial sill, range parameter), tried before the
        default grid of starts (which is used if it does not converge).

    Returns
    -------
    VariogramFit
        With ``trustworthy`` and the ``reasons`` for it: enough well-filled
        classes, converged, spatial structure (partial sill > 0, nugget share
        at most 0.8), practical range within the lag span, pair-weighted
        R^2 at least 0.5.
    """
    h = np.asarray(distance, dtype=float)
    g = np.asarray(gamma, dtype=float)
    n = np.asarray(pairs, dtype=float)
    if not (h.shape == g.shape == n.shape):
        raise InputError(f"distance, gamma and pairs must have one entry per class; got {h.shape}, {g.shape}, {n.shape}.")
    if model != "auto" and model not in MODELS:
        raise ConfigError(f"model {model!r} is not known; choose one of auto, {', '.join(MODELS)}.")
    ok = np.isfinite(h) & np.isfinite(g) & (n > 0) & (h > 0)
    h, g, n = h[ok], g[ok], n[ok]
    cutoff = float(cutoff) if cutoff is not None else (float(h.max()) if h.size else float("nan"))
    nan = float("nan")
    if h.size < 3 or not np.max(g) > 0:
        reason = (f"only {h.size} non-empty lag classes; a model needs at least 3 (use more points or wider classes)"
                  if h.size < 3 else "all semivariances are 0: the values do not vary")
        return VariogramFit(model if model != "auto" else "none", nan, nan, nan, nan, False, nan, nan, nan,
                            int(h.size), int(n.sum()), (nan, nan), cutoff, False, (f"not trustworthy: {reason}.",),
                            {}, estimator, direction)
    h_max = float(max(h.max(), cutoff if math.isfinite(cutoff) else 0.0))
    tried = MODELS if model == "auto" else (model,)
    fits = {m: _fit_one(m, h, g, n, h_max, start) for m in tried}
    candidates = {m: f[1] for m, f in fits.items()}
    chosen = min(tried, key=lambda m: (not fits[m][2], fits[m][1]))
    theta, crit, converged = fits[chosen]
    c0, c, a = (float(v) for v in theta)
    model_g = c0 + c * _structure(chosen, h, a)
    rmse = float(np.sqrt(np.mean((g - model_g) ** 2)))
    mean_g = float(np.average(g, weights=n))
    ss_tot = float(np.sum(n * (g - mean_g) ** 2))
    r2 = 1.0 - float(np.sum(n * (g - model_g) ** 2)) / ss_tot if ss_tot > 0 else nan
    prange = practical_range(chosen, a)

    failed, passed = [], []
    full = int(np.sum(n >= min_class_pairs))
    (passed if full >= MIN_FIT_CLASSES else failed).append(
        f"{full} lag classes have at least {min_class_pairs} pairs (needs {MIN_FIT_CLASSES})")
    (passed if converged else failed).append(
        "the weighted least-squares fit converged" if converged else "the weighted least-squares fit did not converge")
    sill = c0 + c
    share = c0 / sill if sill > 0 else 1.0
    (passed if c > 0 and share <= MAX_NUGGET_SHARE else failed).append(
        f"nugget is {share:.0%} of the sill (at most {MAX_NUGGET_SHARE:.0%} leaves spatial structure)")
    in_span = math.isfinite(prange) and h[0] <= prange <= cutoff
    (passed if in_span else failed).append(
        f"practical range {prange:.4g} {'lies' if in_span else 'does not lie'} within the lag span "
        f"[{h[0]:.4g}, {cutoff:.4g}]")
    (passed if math.isfinite(r2) and r2 >= MIN_R_SQUARED else failed).append(
        f"pair-weighted R^2 of the fit is {r2:.2f} (needs {MIN_R_SQUARED})")
    trustworthy = not failed
    reasons = tuple([f"failed: {r}" for r in failed] + [f"ok: {r}" for r in passed])
    return VariogramFit(chosen, c0, c, a, prange, converged, crit, rmse, r2, int(h.size), int(n.sum()),
                        (float(h[0]), float(h[-1])), cutoff, trustworthy, reasons, candidates, estimator, direction)


def anisotropy_hint(fits, ratio: float = ANISOTROPY_RATIO) -> dict:
    """Hint of anisotropy from directional fits whose ranges differ clearly.

    Parameters
    ----------
    fits : dict of str -> VariogramFit
        Directional fits keyed by direction label.
    ratio : float
        Largest over smallest practical range that counts as a clear difference.

    Returns
    -------
    dict
        ``hint`` (bool), ``ratio``, ``major_direction``, ``minor_direction``,
        ``ranges`` (per usable direction), ``text``. Only trustworthy fits
        are compared.
    """
    usable = {d: f.practical_range for d, f in fits.items() if f.trustworthy}
    out = {"hint": False, "ratio": None, "major_direction": None, "minor_direction": None,
           "ranges": {d: float(r) for d, r in usable.items()}, "threshold": float(ratio)}
    if len(usable) < 2:
        out["text"] = (f"{len(usable)} direction{'' if len(usable) == 1 else 's'} with a trustworthy fit; anisotropy cannot be judged.")
        return out
    major = max(usable, key=usable.get)
    minor = min(usable, key=usable.get)
    r = usable[major] / usable[minor]
    out.update(ratio=float(r), major_direction=major, minor_direction=minor, hint=bool(r >= ratio))
    if r >= ratio:
        out["text"] = (f"values stay alike {r:.1f} times farther along azimuth {major} "
                       f"({usable[major]:.4g}) than along {minor} ({usable[minor]:.4g}): likely anisotropic.")
    else:
        out["text"] = f"directional ranges differ by a factor {r:.2f} (< {ratio:g}): no clear anisotropy."
    return out


@dataclass(frozen=True)
class VariogramAnalysis:
    """Everything :func:`analyse_variogram` found.

    Attributes
    ----------
    empirical : EmpiricalVariogram
    fit : VariogramFit
        Omnidirectional fit.
    directional_fits : dict of str -> VariogramFit
        Same model as ``fit``, per direction.
    anisotropy : dict
        From :func:`anisotropy_hint`.
    fit_estimator : str
    """

    empirical: EmpiricalVariogram
    fit: VariogramFit
    directional_fits: dict
    anisotropy: dict
    fit_estimator: str

    @property
    def table(self) -> pd.DataFrame:
        """The ``variogram`` table."""
        return variogram_table(self.empirical)

    def run_info(self) -> dict:
        """Plain values for ``run_info``: lag classes, fits, anisotropy, pair search, neighbourhood."""
        hint = neighbourhood_from_fit(self.fit)
        return _plain({
            "lag_edges": self.empirical.edges.tolist(),
            "directions": [direction_words(d, "label") for d in self.empirical.directions],
            "angle_tolerance": self.empirical.angle_tolerance,
            "fit_estimator": self.fit_estimator,
            "model": self.fit.as_record(),
            "directional_models": {d: f.as_record() for d, f in self.directional_fits.items()},
            "anisotropy": self.anisotropy,
            "pair_search": self.empirical.pairs.record,
            "neighbourhood": hint.as_record(),
        })


def analyse_variogram(
    xy,
    values,
    *,
    lag_count: int | None = None,
    lag_width: float | None = None,
    edges=None,
    directions=DEFAULT_DIRECTIONS,
    angle_tolerance: float = 22.5,
    model: str = "auto",
    fit_estimator: str = "cressie_hawkins",
    pair_budget: int = DEFAULT_VARIOGRAM_PAIR_BUDGET,
    seed: int = 0,
) -> VariogramAnalysis:
    """Empirical variograms, an omnidirectional model fit, directional fits and an anisotropy hint.

    Parameters
    ----------
    xy, values : array_like
        Coordinates (metric CRS) and values (NaN rows left out).
    lag_count, lag_width, edges :
        Lag classes, see :func:`lag_edges`.
    directions, angle_tolerance :
        Directional classes, see :func:`empirical_variogram`.
    model : {"auto", "spherical", "exponential", "gaussian"}
        Model of the omnidirectional fit; directional fits use the same one.
    fit_estimator : {"cressie_hawkins", "matheron"}
        Estimator whose values are fitted. The default is the robust one:
        the data being screened may hold the very errors that inflate
        Matheron's estimate.
    pair_budget, seed :
        Pair search budget and subsampling seed.

    Returns
    -------
    VariogramAnalysis
    """
    if fit_estimator not in ESTIMATORS:
        raise ConfigError(f"fit_estimator {fit_estimator!r} is not known; choose one of {', '.join(ESTIMATORS)}.")
    xy = _as_xy(xy)
    values = np.asarray(values, dtype=float)
    usable = np.isfinite(values) & np.isfinite(xy).all(axis=1)
    if usable.sum() < 2:
        raise InputError(f"A variogram needs at least two usable points, got {int(usable.sum())}.")
    e = lag_edges(xy[usable], lag_count=lag_count, lag_width=lag_width, edges=edges)
    emp = empirical_variogram(xy, values, e, directions=directions, angle_tolerance=angle_tolerance,
                              pair_budget=pair_budget, seed=seed)
    omni = emp.curve("all", fit_estimator)
    fit = fit_variogram(omni["mean_distance"], omni["gamma"], omni["pairs"], model=model, cutoff=float(e[-1]),
                        estimator=fit_estimator, direction="all")
    directional = {}
    dir_model = fit.model if fit.model in MODELS else model
    for d in emp.directions:
        label = direction_words(d, "label")
        c = emp.curve(label, fit_estimator)
        start = (fit.nugget, fit.partial_sill, fit.range_parameter) if fit.converged else None
        directional[label] = fit_variogram(c["mean_distance"], c["gamma"], c["pairs"], model=dir_model,
                                           cutoff=float(e[-1]), estimator=fit_estimator, direction=label,
                                           start=start)
    return VariogramAnalysis(emp, fit, directional, anisotropy_hint(directional), fit_estimator)


# --------------------------------------------------------------------------- what the screen uses

@dataclass(frozen=True)
class NeighbourhoodHint:
    """Neighbourhood distance and difference scale from a trustworthy fit, or why not.

    Attributes
    ----------
    distance : float or None
        Default neighbourhood distance: the practical range (beyond it a
        neighbour says nothing about the point). None when not trustworthy.
    nugget : float or None
        Semivariance of two distinct records at (almost) the same place.
    reason : str
        Why the hint is given or withheld.
    fit : VariogramFit or None
    """

    distance: float | None
    nugget: float | None
    reason: str
    fit: VariogramFit | None

    @property
    def usable(self) -> bool:
        """True when the screen may use the hint."""
        return self.distance is not None

    def difference_sd(self, h):
        """Expected standard deviation of the difference of two records at separation ``h``, or None."""
        if self.fit is None or not self.usable:
            return None
        return expected_difference_sd(self.fit, h)

    def as_record(self) -> dict:
        """Plain values for ``run_info``."""
        return {"usable": self.usable, "distance": self.distance, "nugget": self.nugget, "reason": self.reason}


def neighbourhood_from_fit(fit: VariogramFit | None) -> NeighbourhoodHint:
    """Neighbourhood distance and difference scale for the screen, from a trustworthy fit.

    Returns a hint with ``distance=None`` and the failed checks as the reason
    when the fit is missing or not trustworthy; the screen then keeps its
    robust default.
    """
    if fit is None:
        return NeighbourhoodHint(None, None, "no variogram was fitted; the robust default neighbourhood is used.", None)
    if not fit.trustworthy:
        failed = [r[len("failed: "):] for r in fit.reasons if r.startswith("failed: ")]
        failed = failed or [r for r in fit.reasons]
        return NeighbourhoodHint(
            None, None,
            "the fitted variogram is not trustworthy (" + "; ".join(failed) + "); the robust default is used.",
            fit,
        )
    return NeighbourhoodHint(
        float(fit.practical_range), float(fit.nugget),
        f"{fit.model} model fitted to the {fit.estimator} variogram is trustworthy: neighbourhood distance "
        f"= practical range {fit.practical_range:.4g}.",
        fit,
    )


def expected_difference_sd(fit: VariogramFit, h) -> np.ndarray:
    """Standard deviation of ``Z(x) - Z(x + h)`` for two distinct records: ``sqrt(2 gamma(h))``.

    Under intrinsic stationarity ``Var(Z(x) - Z(x + h)) = 2 gamma(h)``. The
    nugget is included even at ``h = 0`` because two distinct records differ
    by measurement error.
    """
    h = np.asarray(h, dtype=float)
    g = fit.nugget + fit.partial_sill * _structure(fit.model, np.abs(h), fit.range_parameter)
    return np.sqrt(2.0 * g)


def _cloud_sample(pairs: PairSet, diff: np.ndarray, max_points: int, seed: int):
    ok = np.flatnonzero(np.isfinite(diff) & (pairs.distance > 0))
    note = ""
    if ok.size > max_points:
        note = f" ({max_points} of {ok.size} pairs shown)"
        ok = np.sort(np.random.default_rng(seed).choice(ok, size=max_points, replace=False))
    return pairs.distance[ok], diff[ok], note


def plot_variogram_cloud(empirical: EmpiricalVariogram, *, max_points: int = 50_000, seed: int = 0):
    """Variogram cloud: half the squared difference of every pair against its separation.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    d, diff, note = _cloud_sample(empirical.pairs, empirical.differences, max_points, seed)
    fig = Figure(figsize=(6.5, 4.2), layout="constrained")
    ax = fig.subplots()
    half_sq = 0.5 * diff**2
    curve = empirical.curve("all", "matheron")
    positive = half_sq[half_sq > 0]
    # Wild values put pairs orders of magnitude above the bulk: then a log axis shows both.
    log_axis = positive.size > 0 and np.max(positive) > 1000 * np.median(positive)
    if log_axis:
        floor = float(np.percentile(positive, 1))
        half_sq = np.maximum(half_sq, floor)
        ax.set_yscale("log")
        note += "\nlog axis; zero differences drawn at the 1st percentile"
    ax.scatter(d, half_sq, s=4, c="0.4", alpha=0.5, linewidths=0)
    ax.plot(curve["mean_distance"], curve["gamma"], "o-", color="tab:blue", ms=4, label="Matheron")
    robust = empirical.curve("all", "cressie_hawkins")
    ax.plot(robust["mean_distance"], robust["gamma"], "s-", color="tab:orange", ms=4, label="Cressie-Hawkins")
    ax.set_xlabel("separation")
    ax.set_ylabel("half squared difference")
    ax.set_title(f"Variogram cloud{note}", fontsize=10)
    ax.legend(fontsize=8)
    return fig


def plot_sqrt_difference_cloud(empirical: EmpiricalVariogram, *, max_points: int = 50_000, seed: int = 0):
    """Square-root-difference cloud: ``|difference|^(1/2)`` of every pair against its separation.

    Class medians and means are drawn; the root of the difference is far
    less skewed than its square, so single wild pairs stand out (Cressie
    1993, section 2.4, from memory).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    d, diff, note = _cloud_sample(empirical.pairs, empirical.differences, max_points, seed)
    root = np.sqrt(np.abs(diff))
    fig = Figure(figsize=(6.5, 4.2), layout="constrained")
    ax = fig.subplots()
    ax.scatter(d, root, s=4, c="0.4", alpha=0.5, linewidths=0)
    e = empirical.edges
    all_root = np.sqrt(np.abs(empirical.differences))
    cls = np.searchsorted(e, empirical.pairs.distance, side="left") - 1
    centres, medians, means = [], [], []
    for k in range(e.size - 1):
        sel = (cls == k) & np.isfinite(all_root)
        if sel.any():
            centres.append(0.5 * (e[k] + e[k + 1]))
            medians.append(float(np.median(all_root[sel])))
            means.append(float(np.mean(all_root[sel])))
    ax.plot(centres, medians, "s-", color="tab:orange", ms=4, label="class median")
    ax.plot(centres, means, "o--", color="tab:blue", ms=4, label="class mean")
    ax.set_xlabel("separation")
    ax.set_ylabel("square root of |difference|")
    ax.set_title(f"Square-root-difference cloud{note}", fontsize=10)
    ax.legend(fontsize=8)
    return fig


def plot_variogram(analysis: VariogramAnalysis):
    """Omnidirectional Matheron and Cressie-Hawkins semivariograms with the fitted model, and directional ones.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    emp = analysis.empirical
    fig = Figure(figsize=(11, 4.2), layout="constrained")
    left, right = fig.subplots(1, 2)
    h = np.linspace(0, emp.edges[-1], 200)[1:]
    fit = analysis.fit
    robust = emp.curve("all", "cressie_hawkins")["gamma"].to_numpy()
    top = np.nanmax(robust) if np.isfinite(robust).any() else np.nan
    if fit.model in MODELS and math.isfinite(fit.range_parameter):
        top = np.nanmax([top, fit.sill])
    for est, marker in zip(ESTIMATORS, ("o", "s")):
        c = emp.curve("all", est)
        gamma = c["gamma"].to_numpy()
        label = est.replace("_", "-")
        # A few wild values can lift Matheron's estimate far above the robust one;
        # then keep the axis on the robust scale and say how far off it went.
        if est == "matheron" and np.isfinite(top) and top > 0 and np.nanmax(gamma, initial=0) > 3 * top:
            label += f" (off the scale, up to {np.nanmax(gamma):.3g}: wild values inflate it)"
            gamma = np.where(gamma > 1.6 * top, np.nan, gamma)
        left.plot(c["mean_distance"], gamma, marker, label=label, ms=5)
    if fit.model in MODELS and math.isfinite(fit.range_parameter):
        status = "trustworthy" if fit.trustworthy else "not trustworthy"
        left.plot(h, fit.gamma(h), "-", color="k", lw=1,
                  label=f"{fit.model}: nugget {fit.nugget:.3g}, sill {fit.sill:.3g}, "
                        f"range {fit.practical_range:.4g} ({status})")
    if np.isfinite(top) and top > 0:
        left.set_ylim(0, 1.6 * top)
    left.set_xlabel("separation")
    left.set_ylabel("semivariance")
    left.set_title("Omnidirectional", fontsize=10)
    left.legend(fontsize=7)
    for d in emp.directions:
        label = direction_words(d, "label")
        c = emp.curve(label, analysis.fit_estimator)
        name = direction_words(d, "abbrev")
        line = right.plot(c["mean_distance"], c["gamma"], "o", ms=4, label=f"{name} ({label})")[0]
        f = analysis.directional_fits.get(label)
        if f is not None and f.model in MODELS and math.isfinite(f.range_parameter):
            right.plot(h, f.gamma(h), "-", lw=0.8, color=line.get_color())
    right.set_xlabel("separation")
    right.set_title(f"Directional ({analysis.fit_estimator.replace('_', '-')}, "
                    f"+/- {emp.angle_tolerance:g} deg)", fontsize=10)
    if emp.directions:
        right.legend(fontsize=7)
    if analysis.anisotropy.get("text"):
        fig.suptitle(analysis.anisotropy["text"], fontsize=8)
    return fig
