"""Empirical semivariograms: lag classes and the Matheron and Cressie-Hawkins estimators.

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
- Default lag classes: cutoff one third of the bounding-box diagonal, 15
  classes (the defaults of the gstat R package, from memory), widened to at
  least half the point spacing so the first classes are not empty.

Lag classes are ``(e_0, e_1], (e_1, e_2], ...``: a pair at separation 0
(coincident records) is in no class. Pairs come from
:func:`pointsift.methods.pairsearch.find_pairs`. Model fits are in
:mod:`pointsift.methods.variogram_fit`; :mod:`pointsift.methods.variogram`
puts the two together for the screen.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .lagpairs import DEFAULT_DIRECTIONS
from .pairsearch import PairSet, _as_xy, axial_difference, find_pairs, point_spacing

__all__ = [
    "ESTIMATORS",
    "DEFAULT_VARIOGRAM_PAIR_BUDGET",
    "EmpiricalVariogram",
    "default_cutoff",
    "lag_edges",
    "matheron",
    "cressie_hawkins",
    "empirical_variogram",
    "variogram_table",
]

#: Estimator names as written in the ``variogram`` table.
ESTIMATORS: tuple[str, ...] = ("matheron", "cressie_hawkins")
#: Pairs kept for a variogram before seeded subsampling starts.
DEFAULT_VARIOGRAM_PAIR_BUDGET = 500_000


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
    empirical = getattr(result, "empirical", result)  # a VariogramAnalysis holds its EmpiricalVariogram
    return empirical.table[["direction", "estimator", "lag_low", "lag_high", "mean_distance", "pairs", "gamma"]].copy()
