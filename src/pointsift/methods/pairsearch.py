"""Pair search: pairs of points within a radius, oriented, with their separation and azimuth; lag classes.

Pairs are formed by separation and direction with tolerances, as for an
experimental variogram (Isaaks, E. H. and Srivastava, R. M. (1989), *An
Introduction to Applied Geostatistics*, Oxford University Press, chapters 4
and 7; from memory): a pair belongs to the lag class of centre ``k * h``
when its separation lies within the lag tolerance. Used by the lag-pair
screen (:mod:`pointsift.methods.lagpairs`) and the variograms
(:mod:`pointsift.methods.variogram`).

Conventions
-----------
Directions are axial: a pair is counted once, and oriented so that the head
lies east of the tail, or due north of it when both share an x coordinate.
Azimuths are degrees clockwise from north in ``[0, 180)``: 0 is S-N (tail to
the south), 45 SW-NE, 90 W-E (tail to the west), 135 NW-SE (tail to the
north-west, the SE-NW axis). Coincident points (separation 0) have no
azimuth; they belong to no lag class here (see
:mod:`pointsift.methods.coincident`).

Pairs come from k-d tree ball queries (:class:`scipy.spatial.cKDTree`), never
from all n^2 pairs. When more pairs lie in reach than the pair budget allows,
a seeded subsample is drawn (first of points, when the excess is large, then
of pairs) and stated in :attr:`PairSet.record`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..errors import ConfigError, InputError

__all__ = [
    "DEFAULT_PAIR_BUDGET",
    "PairSet",
    "find_pairs",
    "axial_difference",
    "point_spacing",
    "lag_class_edges",
]

#: Pairs kept by :func:`find_pairs` before seeded subsampling starts.
DEFAULT_PAIR_BUDGET = 20_000_000

# When the pairs in reach exceed the budget by more than this factor, points
# are subsampled first: enumerating every pair only to thin it would cost
# time in proportion to all pairs in reach.
_POINT_SAMPLING_FACTOR = 2.0
# Query points used to measure the point spacing of a large set.
_SPACING_SAMPLE = 200_000
# Points counted to estimate the pairs in reach of a large set.
_ESTIMATE_POINTS = 10_000
# Ordered pairs enumerated per chunk of tail points (bounds memory).
_CHUNK_PAIRS = 4_000_000
# Relative slack on the tree's search radius; the exact test is redone on
# our own distances so points on the radius are judged by one formula.
_RADIUS_SLACK = 1e-9


@dataclass(frozen=True)
class PairSet:
    """Pairs of points within a search radius, oriented tail -> head.

    Attributes
    ----------
    tail, head : ndarray of int64
        Row numbers (into the ``xy`` passed to :func:`find_pairs`) of the two
        ends. The head lies east of the tail, or due north when ``dx == 0``;
        coincident points keep the lower row as tail.
    distance : ndarray of float64
        Separation, ``hypot(dx, dy)``.
    azimuth : ndarray of float64
        Axial azimuth of tail -> head in degrees ``[0, 180)``; NaN for coincident points.
    max_distance : float
        Search radius (pairs with ``distance <= max_distance`` were searched).
    pairs_in_reach : int
        Number of pairs within the radius before any subsampling (estimated
        from a seeded sample of 10,000 points when far above the budget).
    point_fraction, pair_fraction : float
        Sampling probabilities applied to points, then to pairs (1.0 = none).
    seed : int
        Seed of the subsampling draws.
    """

    tail: np.ndarray
    head: np.ndarray
    distance: np.ndarray
    azimuth: np.ndarray
    max_distance: float
    pairs_in_reach: int
    point_fraction: float = 1.0
    pair_fraction: float = 1.0
    seed: int = 0
    pairs_in_reach_estimated: bool = False

    @property
    def size(self) -> int:
        """Number of pairs kept."""
        return int(self.tail.size)

    @property
    def sampled(self) -> bool:
        """True when the pairs are a subsample of the pairs in reach."""
        return self.size < self.pairs_in_reach

    @property
    def record(self) -> dict:
        """Plain-value description of the pair search for the run record."""
        return {
            "max_distance": float(self.max_distance),
            "pairs_in_reach": int(self.pairs_in_reach),
            "pairs_in_reach_estimated": bool(self.pairs_in_reach_estimated),
            "pairs_used": self.size,
            "sampled": bool(self.sampled),
            "point_fraction": float(self.point_fraction),
            "pair_fraction": float(self.pair_fraction),
            "seed": int(self.seed),
        }


def _as_xy(xy) -> np.ndarray:
    xy = np.asarray(xy, dtype=float)
    if xy.ndim != 2 or xy.shape[1] != 2:
        raise InputError(f"xy must be an (n, 2) array of x, y coordinates, got shape {xy.shape}.")
    return xy


def find_pairs(
    xy,
    max_distance: float,
    *,
    pair_budget: int = DEFAULT_PAIR_BUDGET,
    seed: int = 0,
) -> PairSet:
    """Find every pair of points not farther apart than ``max_distance``.

    Uses k-d tree ball queries in chunks of tail points, so memory stays
    bounded and no n x n matrix is formed. Rows with a non-finite coordinate
    take part in no pair.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Coordinates in a metric CRS.
    max_distance : float
        Search radius; pairs with separation ``<= max_distance`` are returned.
    pair_budget : int
        At most this many pairs are kept. Above it a seeded subsample is
        drawn: uniformly over pairs, after a uniform subsample of points when
        the pairs in reach exceed the budget more than twofold.
    seed : int
        Seed of the subsampling draws.

    Returns
    -------
    PairSet
        Pairs in an order fixed by the input and the seed (not sorted).

    Examples
    --------
    >>> ps = find_pairs([[0, 0], [1, 0], [0, 1], [5, 5]], 1.0)
    >>> sorted(zip(ps.tail.tolist(), ps.head.tolist(), ps.azimuth.tolist()))
    [(0, 1, 90.0), (0, 2, 0.0)]
    """
    xy = _as_xy(xy)
    if not (isinstance(max_distance, (int, float, np.floating, np.integer)) and max_distance > 0
            and math.isfinite(max_distance)):
        raise ConfigError(f"max_distance must be a positive finite length, got {max_distance!r}.")
    if not (isinstance(pair_budget, (int, np.integer)) and pair_budget >= 1):
        raise ConfigError(f"pair_budget must be a whole number of at least 1, got {pair_budget!r}.")
    max_distance = float(max_distance)
    rows = np.flatnonzero(np.isfinite(xy).all(axis=1))
    empty = PairSet(
        np.empty(0, np.int64), np.empty(0, np.int64), np.empty(0), np.empty(0),
        max_distance, 0, 1.0, 1.0, int(seed),
    )
    if rows.size < 2:
        return empty
    pts = xy[rows]
    radius = max_distance * (1.0 + _RADIUS_SLACK)
    tree = cKDTree(pts)
    rng = np.random.default_rng(seed)
    in_reach, estimated = _pairs_in_reach(tree, pts, radius, pair_budget, rng)
    counted_by_search = in_reach is None
    if counted_by_search:
        in_reach = 1  # unknown but within budget; set from the search below
    if in_reach == 0:
        return PairSet(empty.tail, empty.head, empty.distance, empty.azimuth, max_distance, 0, 1.0, 1.0, int(seed))

    point_fraction = 1.0
    sub = np.arange(rows.size)
    sub_in_reach = in_reach
    if in_reach > _POINT_SAMPLING_FACTOR * pair_budget:
        point_fraction = math.sqrt(_POINT_SAMPLING_FACTOR * pair_budget / in_reach)
        sub = np.flatnonzero(rng.random(rows.size) < point_fraction)
        if sub.size >= 2:
            tree = cKDTree(pts[sub])
            sub_in_reach = _count_pairs(tree, radius)
        else:
            sub_in_reach = 0
    pair_fraction = 1.0 if sub_in_reach <= pair_budget else pair_budget / sub_in_reach
    sub_pts = pts[sub]

    tails, heads = [], []
    if sub.size >= 2 and sub_in_reach > 0 and pair_fraction == 1.0:
        # Within budget: one ball query over the whole tree.
        found = tree.query_pairs(radius, output_type="ndarray").astype(np.int64, copy=False)
        a, b = found[:, 0], found[:, 1]
        d = np.hypot(sub_pts[b, 0] - sub_pts[a, 0], sub_pts[b, 1] - sub_pts[a, 1])
        tails.append(a[d <= max_distance])
        heads.append(b[d <= max_distance])
        if counted_by_search:
            in_reach = int(tails[-1].size)
    elif sub.size >= 2 and sub_in_reach > 0:
        a, b = _thinned_pairs(sub_pts, tree, radius, max_distance, sub_in_reach, pair_fraction, rng)
        tails.append(a)
        heads.append(b)
    a = np.concatenate(tails) if tails else np.empty(0, np.int64)
    b = np.concatenate(heads) if heads else np.empty(0, np.int64)
    if a.size > pair_budget:
        pick = np.sort(rng.choice(a.size, size=pair_budget, replace=False))
        a, b = a[pick], b[pick]
    a = rows[sub[a]]
    b = rows[sub[b]]

    dx = xy[b, 0] - xy[a, 0]
    dy = xy[b, 1] - xy[a, 1]
    swap = (dx < 0) | ((dx == 0) & (dy < 0))
    tail = np.where(swap, b, a).astype(np.int64)
    head = np.where(swap, a, b).astype(np.int64)
    dx = np.abs(dx)
    dy = np.where(swap, -dy, dy)
    distance = np.hypot(dx, dy)
    with np.errstate(invalid="ignore"):
        azimuth = np.mod(np.degrees(np.arctan2(dx, dy)), 180.0)
    azimuth[distance == 0] = np.nan
    return PairSet(
        tail, head, distance, azimuth,
        max_distance, in_reach, point_fraction, pair_fraction, int(seed), estimated,
    )


def _thinned_pairs(pts, tree, radius, max_distance, in_reach, keep_fraction, rng):
    """Pairs ``a < b`` within ``max_distance``, each kept with probability ``keep_fraction``.

    Tail points are taken in chunks (sorted by x, so each chunk is compact)
    holding about ``_CHUNK_PAIRS`` ordered pairs, so memory stays bounded
    however many pairs are in reach.
    """
    order = np.argsort(pts[:, 0], kind="stable")
    chunk = max(1, int(_CHUNK_PAIRS * pts.shape[0] / max(2 * in_reach, 1)))
    tails, heads = [], []
    for start in range(0, pts.shape[0], chunk):
        idx = order[start:start + chunk]
        records = cKDTree(pts[idx]).sparse_distance_matrix(tree, radius, output_type="ndarray")
        a = idx[records["i"]]
        b = records["j"].astype(np.int64)
        keep = a < b
        a, b = a[keep], b[keep]
        d = np.hypot(pts[b, 0] - pts[a, 0], pts[b, 1] - pts[a, 1])
        keep = d <= max_distance
        a, b = a[keep], b[keep]
        if keep_fraction < 1.0:
            keep = rng.random(a.size) < keep_fraction
            a, b = a[keep], b[keep]
        tails.append(a)
        heads.append(b)
    return np.concatenate(tails), np.concatenate(heads)


def _count_pairs(tree: cKDTree, radius: float) -> int:
    # count_neighbors counts ordered pairs, each point with itself included.
    return int((int(tree.count_neighbors(tree, radius)) - tree.n) // 2)


def _pairs_in_reach(tree: cKDTree, pts: np.ndarray, radius: float, budget: int, rng) -> tuple[int | None, bool]:
    """Pairs within the radius: counted, or estimated from a point sample when they are far too many.

    Counting costs time in proportion to the pairs, so for many points a
    seeded sample of ``_ESTIMATE_POINTS`` points is counted first and scaled
    by ``n (n - 1) / (m (m - 1))``; only when that estimate is within reach of
    the budget is the exact count made, and when it is far below the budget
    ``None`` is returned: the ball query finds (and so counts) them all.
    """
    n = pts.shape[0]
    if n > 2 * _ESTIMATE_POINTS:
        pick = rng.choice(n, size=_ESTIMATE_POINTS, replace=False)
        m = _ESTIMATE_POINTS
        estimate = _count_pairs(cKDTree(pts[pick]), radius) * (n * (n - 1.0)) / (m * (m - 1.0))
        if estimate > 4 * _POINT_SAMPLING_FACTOR * budget:
            return int(round(estimate)), True
        if estimate < budget / 4:
            return None, False  # well within the budget: the search itself counts them
    return _count_pairs(tree, radius), False


def axial_difference(azimuth, direction: float) -> np.ndarray:
    """Smallest angle in degrees between axial azimuths, in ``[0, 90]``.

    Examples
    --------
    >>> axial_difference([170.0, 10.0, 100.0], 0.0).tolist()
    [10.0, 10.0, 80.0]
    """
    azimuth = np.asarray(azimuth, dtype=float)
    return np.abs(np.mod(azimuth - float(direction) + 90.0, 180.0) - 90.0)


def point_spacing(xy) -> float:
    """Typical spacing of the points: the median distance to the nearest distinct point.

    Coincident points (distance 0) are skipped so duplicates do not shrink
    the spacing. Above 200,000 points the median is taken over a fixed
    (seeded) sample of 200,000 query points, each against all points.
    Returns NaN when fewer than two distinct points exist.
    """
    xy = _as_xy(xy)
    pts = xy[np.isfinite(xy).all(axis=1)]
    if pts.shape[0] < 2:
        return float("nan")
    tree = cKDTree(pts)
    query = pts
    if pts.shape[0] > _SPACING_SAMPLE:
        query = pts[np.sort(np.random.default_rng(0).choice(pts.shape[0], _SPACING_SAMPLE, replace=False))]
    dist, _ = tree.query(query, k=2, workers=-1)
    nearest = dist[:, 1]
    twins = np.flatnonzero(nearest == 0)
    if twins.size:
        # Coincident records: look further for the nearest distinct point.
        k = min(pts.shape[0], 33)
        far, _ = tree.query(query[twins], k=k, workers=-1)
        far = np.where(far > 0, far, np.inf).min(axis=1)
        nearest = nearest.copy()
        nearest[twins] = far
    nearest = nearest[np.isfinite(nearest)]
    if nearest.size == 0:
        uniq = np.unique(pts, axis=0)
        if uniq.shape[0] < 2:
            return float("nan")
        d, _ = cKDTree(uniq).query(uniq, k=2)
        return float(np.median(d[:, 1]))
    return float(np.median(nearest))


def lag_class_edges(first_lag: float, pair_lag_count: int, lag_tolerance: float | None = None) -> np.ndarray:
    """Lower and upper edges of the screening lag classes.

    Class ``k`` (1-based) has centre ``k * first_lag`` and holds separations
    in ``(k * h - t, k * h + t]``; the first class reaches down to 0 (exclusive)
    so the closest pairs, which matter most for screening, are kept.

    Parameters
    ----------
    first_lag : float
        Lag spacing ``h`` (the centre of the first class).
    pair_lag_count : int
        Number of classes.
    lag_tolerance : float, optional
        Half-width ``t``; default ``h / 2`` (classes touch). It may not
        exceed ``h / 2``, which would put one pair in two classes.

    Returns
    -------
    ndarray, shape (pair_lag_count, 2)
        ``[low, high]`` per class.

    Examples
    --------
    >>> lag_class_edges(10.0, 3).tolist()
    [[0.0, 15.0], [15.0, 25.0], [25.0, 35.0]]
    """
    if not (first_lag > 0 and math.isfinite(first_lag)):
        raise ConfigError(f"first_lag must be a positive length, got {first_lag!r}.")
    if not (isinstance(pair_lag_count, (int, np.integer)) and 1 <= pair_lag_count <= 1000):
        raise ConfigError(f"pair_lag_count (the lag-pair screen's classes, not the variogram's lag_count) must be a whole number from 1 to 1000, got {pair_lag_count!r}.")
    t = first_lag / 2.0 if lag_tolerance is None else float(lag_tolerance)
    if not 0 < t <= first_lag / 2.0 * (1 + 1e-12):
        raise ConfigError(
            f"lag_tolerance {lag_tolerance!r} must be positive and at most half the lag ({first_lag / 2:g}); "
            "a wider tolerance would put one pair in two lag classes."
        )
    centres = first_lag * np.arange(1, pair_lag_count + 1)
    edges = np.column_stack([centres - t, centres + t])
    edges[0, 0] = 0.0
    # Touching classes share one edge value exactly, so no separation falls
    # in a rounding gap between them.
    touching = np.isclose(edges[1:, 0], edges[:-1, 1], rtol=1e-12, atol=0.0)
    edges[1:, 0] = np.where(touching, edges[:-1, 1], edges[1:, 0])
    return edges
