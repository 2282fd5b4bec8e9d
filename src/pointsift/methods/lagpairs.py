"""Lag pairs: pairs of points by separation and direction, and a robust screen of them.

On a regular grid one plots each value against the value one step east (an
h-scatterplot) and looks for pairs far from the 1:1 line. Irregular points have
no "one step east", so pairs are formed by separation and direction with
tolerances, as for an experimental variogram: a pair belongs to the lag class
of centre ``k * h`` when its separation lies within the lag tolerance, and to
a direction when its azimuth lies within the angular tolerance of it.

Sources
-------
- h-scatterplots, lag and angular tolerances for irregular data: Isaaks, E. H.
  and Srivastava, R. M. (1989), *An Introduction to Applied Geostatistics*,
  Oxford University Press, chapters 4 and 7 (from memory).
- Robust scale: the median absolute deviation with the consistency factor
  1.4826, falling back to the interquartile range over 1.349 (Rousseeuw, P. J.
  and Croux, C. (1993), *JASA* 88, 1273-1283).

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
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .robust import NORMAL_Q75 as _NORMAL_Q75  # MAD / this and IQR / (2 * this) estimate a normal sd

__all__ = [
    "DEFAULT_DIRECTIONS",
    "DEFAULT_PAIR_BUDGET",
    "PairSet",
    "LagPairScreen",
    "find_pairs",
    "axial_difference",
    "point_spacing",
    "lag_class_edges",
    "screen_lag_pairs",
    "lag_pair_reasons",
    "lag_pairs_layer",
    "plot_lag_pairs",
]

#: Default directions as azimuths (degrees clockwise from north): W-E, SW-NE, S-N, SE-NW.
DEFAULT_DIRECTIONS: tuple[float, ...] = (90.0, 45.0, 0.0, 135.0)

#: Plain names of the default directions.

#: Pairs kept by :func:`find_pairs` before seeded subsampling starts.
DEFAULT_PAIR_BUDGET = 20_000_000

# When the pairs in reach exceed the budget by more than this factor, points
# are subsampled first: enumerating every pair only to thin it would cost
# time in proportion to all pairs in reach.
_POINT_SAMPLING_FACTOR = 2.0
# Pairs per separation bin of the empirical distance scale.
_SCALE_BIN_PAIRS = 200
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


@dataclass(frozen=True)
class LagPairScreen:
    """Result of :func:`screen_lag_pairs`.

    Attributes
    ----------
    points : pandas.DataFrame
        One row per input point: ``lagpair_pairs`` (screened pairs the point
        is in), ``lagpair_flagged`` (of those, outside the band),
        ``lagpair_flagged_share``, ``lagpair_dominance`` (share of the
        flagged pairs around the point, i.e. with an end at the point or at
        one of its partners, that the point is in), ``lagpair_attributed``
        (flagged pairs in which this point, not the other end, is the likely
        culprit),
        ``lagpair_max_z`` (largest absolute departure of its pairs, in band
        scales) and ``lagpair_culprit`` (bool: the point is the likely culprit).
    classes : pandas.DataFrame
        One row per direction and lag class: ``direction``, ``lag``,
        ``lag_low``, ``lag_high``, ``pairs``, ``median_separation``,
        ``band_centre``, ``band_scale`` (value units, at the median
        separation), ``flagged``, ``screened``.
    pairs : PairSet
        The pairs searched.
    lag_index : ndarray of int
        Lag class (0-based) of each pair, -1 if in none.
    direction_member : ndarray of bool, shape (pairs, directions)
        Whether each pair falls in each direction class.
    pair_z : ndarray of float, shape (pairs, directions)
        Signed departure ``(difference - band_centre) / band_scale`` in each
        direction class; NaN where the pair is not in a screened class.
    flagged : ndarray of bool
        Pair is outside the band in at least one of its classes.
    culprit : ndarray of int
        Row of the likely culprit of each flagged pair, -1 when neither end
        stands out (or the pair is not flagged).
    values : ndarray of float
        The values screened (NaN where unusable).
    ids : ndarray of str or None
        Point labels used in the pair table (None: row numbers).
    directions, angle_tolerance, first_lag, lag_edges, threshold :
        Settings used.
    """

    points: pd.DataFrame
    classes: pd.DataFrame
    pairs: PairSet
    lag_index: np.ndarray
    direction_member: np.ndarray
    pair_z: np.ndarray
    flagged: np.ndarray
    culprit: np.ndarray
    values: np.ndarray
    ids: np.ndarray | None
    directions: tuple[float, ...]
    angle_tolerance: float
    first_lag: float
    lag_edges: np.ndarray
    threshold: float
    settings: dict = field(default_factory=dict)

    def pair_table(self, flagged_only: bool = True) -> pd.DataFrame:
        """Table of pairs, for the ``lag_pairs`` layer.

        Columns: ``tail_row``, ``head_row``, ``tail_id``, ``head_id``,
        ``tail_value``, ``head_value``, ``difference`` (head - tail),
        ``separation``, ``azimuth`` (of the pair), ``direction`` (label of the
        direction class where it is farthest out), ``lag`` (1-based class),
        ``pair_z`` (signed departure in band scales, "how far out"),
        ``flagged`` and ``culprit_id`` ("" when neither end stands out).
        """
        abs_z = np.abs(self.pair_z)
        has = np.isfinite(abs_z).any(axis=1) if abs_z.size else np.zeros(self.pairs.size, bool)
        keep = self.flagged if flagged_only else has
        sel = np.flatnonzero(keep)
        if sel.size:
            best = np.nanargmax(np.where(np.isfinite(abs_z[sel]), abs_z[sel], -1.0), axis=1)
            z = self.pair_z[sel, best]
            dirs = np.array([direction_words(d, "label") for d in self.directions], dtype=object)[best]
        else:
            z = np.empty(0)
            dirs = np.empty(0, dtype=object)
        tail = self.pairs.tail[sel]
        head = self.pairs.head[sel]
        culprit = self.culprit[sel]
        ids = self.ids if self.ids is not None else np.array([str(r) for r in range(self.values.size)], dtype=object)
        culprit_id = np.array([ids[c] if c >= 0 else "" for c in culprit], dtype=object)
        return pd.DataFrame({
            "tail_row": tail,
            "head_row": head,
            "tail_id": ids[tail].astype(object),
            "head_id": ids[head].astype(object),
            "tail_value": self.values[tail],
            "head_value": self.values[head],
            "difference": self.values[head] - self.values[tail],
            "separation": self.pairs.distance[sel],
            "azimuth": self.pairs.azimuth[sel],
            "direction": pd.Series(dirs, dtype=object),
            "lag": self.lag_index[sel] + 1,
            "pair_z": z,
            "flagged": self.flagged[sel],
            "culprit_id": culprit_id.astype(object),
        })

    @property
    def record(self) -> dict:
        """Plain-value summary for the run record."""
        return {
            "directions": [direction_words(d, "label") for d in self.directions],
            "angle_tolerance": float(self.angle_tolerance),
            "first_lag": float(self.first_lag),
            "lag_edges": self.lag_edges.tolist(),
            "threshold": float(self.threshold),
            "pairs_screened": int(np.isfinite(self.pair_z).any(axis=1).sum()) if self.pair_z.size else 0,
            "pairs_flagged": int(self.flagged.sum()),
            "culprits": int(self.points["lagpair_culprit"].sum()),
            "pair_search": self.pairs.record,
            **self.settings,
        }


def _empirical_distance_scale(distance: np.ndarray, diff: np.ndarray, use: np.ndarray) -> np.ndarray:
    """Typical size of a pair difference as a function of separation, from the pairs themselves.

    The pairs in ``use`` are split into separation bins of equal count (about
    200 pairs each, 4 to 30 bins); each bin's scale is ``median(|d|) /
    0.6745`` (the standard deviation for normal differences centred on 0);
    the scale at a separation is interpolated between bin medians, held
    constant beyond them, and never falls with distance (a variogram does
    not). Returns ones when there are too few pairs or the scale is 0.
    """
    ok = use & np.isfinite(diff)
    out = np.ones(distance.size)
    if ok.sum() < 4 * _SCALE_BIN_PAIRS // 2:
        return out
    h, a = distance[ok], np.abs(diff[ok])
    order = np.argsort(h, kind="stable")
    h, a = h[order], a[order]
    bins = int(np.clip(h.size // _SCALE_BIN_PAIRS, 4, 30))
    parts = np.array_split(np.arange(h.size), bins)
    centres = np.array([np.median(h[p]) for p in parts])
    scales = np.array([np.median(a[p]) for p in parts]) / _NORMAL_Q75
    scales = np.maximum.accumulate(scales)
    if not scales[-1] > 0:
        return out
    # a zero scale at short range (identical values) would divide by zero: floor it
    scales = np.maximum(scales, scales[-1] * 1e-3)
    return np.interp(distance, centres, scales)


def _robust_centre_scale(diff: np.ndarray) -> tuple[float, float]:
    centre = float(np.median(diff))
    scale = float(np.median(np.abs(diff - centre))) / _NORMAL_Q75
    if not scale > 0:
        q75, q25 = np.percentile(diff, [75, 25])
        scale = float(q75 - q25) / (2.0 * _NORMAL_Q75)
    return centre, scale


def screen_lag_pairs(
    xy,
    values,
    *,
    ids=None,
    first_lag: float | None = None,
    pair_lag_count: int = 3,
    lag_tolerance: float | None = None,
    directions=DEFAULT_DIRECTIONS,
    angle_tolerance: float = 22.5,
    threshold: float = 3.5,
    min_class_pairs: int = 10,
    min_flagged: int = 2,
    culprit_share: float = 0.25,
    culprit_dominance: float = 0.5,
    distance_scale=None,
    pair_budget: int = DEFAULT_PAIR_BUDGET,
    seed: int = 0,
) -> LagPairScreen:
    """Screen pairs of points by lag and direction, and attribute outlying pairs to points.

    For each direction and lag class the differences ``head - tail`` of the
    pairs in it, each divided by the expected size of a difference at its
    separation (``distance_scale``), define a robust band around the 1:1 line
    of the pair cloud (centre: median; scale: MAD / 0.6745, or IQR / 1.349
    when the MAD is 0). A pair is flagged when it lies more than
    ``threshold`` scales from the centre in any of its classes. Each point gets the count and share of its
    pairs that are flagged, and its *dominance*: the share of the flagged
    pairs around it (those with an end at the point or at one of its
    partners) that it is in. A wrong value is in nearly every flagged pair
    around it; a point in a genuinely rough patch (a pumping cone, a steep
    flank) is one of many. A flagged pair is attributed to the end with the
    higher dominance (then higher share, then more flagged pairs; to neither
    on a full tie). A point is the likely culprit when it has at least
    ``min_flagged`` flagged pairs, at least ``culprit_share`` of its pairs are
    flagged, its dominance is at least ``culprit_dominance``, and it is the
    attributed end of more than half of its flagged pairs. The other end of
    such a pair gets no evidence.

    A regional trend makes the differences of one direction depend on where
    the pair lies; screen trend residuals when there is one.

    Parameters
    ----------
    xy : array_like, shape (n, 2)
        Coordinates in a metric work CRS.
    values : array_like, shape (n,)
        Measured values; NaN rows take part in no pair.
    ids : array_like of str, optional
        Labels of the points for the pair table (default: row numbers).
    first_lag : float, optional
        Lag spacing ``h``; default the median nearest-neighbour spacing
        (:func:`point_spacing`).
    pair_lag_count : int
        Number of lag classes screened (default 3: h, 2h, 3h).
    lag_tolerance : float, optional
        Half-width of a lag class, at most ``h / 2`` (the default).
    directions : sequence of float
        Azimuths in degrees (default W-E 90, SW-NE 45, S-N 0, SE-NW 135).
    angle_tolerance : float
        Half-width of a direction class in degrees, ``(0, 90]``; the default
        22.5 makes the four default directions cover every azimuth.
    threshold : float
        Band half-width in robust scales.
    min_class_pairs : int
        Classes with fewer pairs are not screened (their scale would be noise).
    min_flagged : int
        Flagged pairs a point needs before it can be called the culprit.
    culprit_share : float
        Share of a point's pairs that must be flagged for it to be the culprit.
    culprit_dominance : float
        Least share of the flagged pairs around a point that it must be in.
    distance_scale : {None, "empirical"} or callable
        How the expected size of a difference grows with separation within a
        class: None (default) treats every pair of a class alike (the plain
        h-scatterplot band); ``"empirical"`` estimates it from the pairs
        (robust scale in separation bins of equal count, never falling with
        distance); a function of separation (for example
        :meth:`pointsift.methods.variogram.NeighbourhoodHint.difference_sd`
        of a trustworthy variogram) gives it. Differences are divided
        by it before the band is set, so the class's own robust scale still
        sets the width.
    pair_budget : int
        Passed to :func:`find_pairs`.
    seed : int
        Seed of any pair subsampling.

    Returns
    -------
    LagPairScreen
    """
    xy = _as_xy(xy)
    values = np.asarray(values, dtype=float)
    n = xy.shape[0]
    if values.shape != (n,):
        raise InputError(f"values must have one entry per point ({n}), got shape {values.shape}.")
    if ids is not None:
        # object strings: a fixed-width numpy string array costs n x the longest id
        ids = np.array([str(v) for v in np.asarray(ids, dtype=object).ravel()], dtype=object).reshape(np.shape(ids))
        if ids.shape != (n,):
            raise InputError(f"ids must have one entry per point ({n}), got shape {ids.shape}.")
    directions = tuple(float(d) % 180.0 for d in directions)
    if not directions:
        raise ConfigError("directions is empty; give at least one azimuth, e.g. (90, 45, 0, 135).")
    if not 0 < angle_tolerance <= 90:
        raise ConfigError(f"angle_tolerance must be in (0, 90] degrees, got {angle_tolerance!r}.")
    if not threshold > 0:
        raise ConfigError(f"threshold must be positive, got {threshold!r}.")
    if not 0 < culprit_share <= 1:
        raise ConfigError(f"culprit_share must be in (0, 1], got {culprit_share!r}.")

    usable = np.isfinite(values) & np.isfinite(xy).all(axis=1)
    xy_use = np.where(usable[:, None], xy, np.nan)
    if first_lag is None:
        first_lag = point_spacing(xy_use)
        if not math.isfinite(first_lag):
            first_lag = 1.0  # fewer than two distinct usable points: nothing to pair
    edges = lag_class_edges(float(first_lag), pair_lag_count, lag_tolerance)
    pairs = find_pairs(xy_use, float(edges[-1, 1]), pair_budget=pair_budget, seed=seed)

    d = pairs.distance
    lag_index = np.full(pairs.size, -1, dtype=np.int64)
    for k, (lo, hi) in enumerate(edges):
        lag_index[(d > lo) & (d <= hi)] = k
    diff = values[pairs.head] - values[pairs.tail]
    in_class = lag_index >= 0
    if distance_scale is None:
        pair_scale = np.ones(pairs.size)
        scale_note = "none"
    elif callable(distance_scale):
        pair_scale = np.asarray(distance_scale(d), dtype=float)
        scale_note = "given"
    elif distance_scale == "empirical":
        pair_scale = _empirical_distance_scale(d, diff, in_class)
        scale_note = "empirical"
    else:
        raise ConfigError(
            f"distance_scale {distance_scale!r} is not known; pass 'empirical', None or a function of separation."
        )
    with np.errstate(invalid="ignore", divide="ignore"):
        standard = np.where(pair_scale > 0, diff / pair_scale, np.nan)
    member = np.zeros((pairs.size, len(directions)), dtype=bool)
    pair_z = np.full((pairs.size, len(directions)), np.nan)
    rows = []
    for j, direction in enumerate(directions):
        with np.errstate(invalid="ignore"):
            member[:, j] = (axial_difference(pairs.azimuth, direction) <= angle_tolerance) & (lag_index >= 0)
        for k, (lo, hi) in enumerate(edges):
            sel = np.flatnonzero(member[:, j] & (lag_index == k) & np.isfinite(standard))
            centre = scale = median_h = float("nan")
            screened = False
            flagged_count = 0
            if sel.size >= min_class_pairs:
                centre, scale = _robust_centre_scale(standard[sel])
                if scale > 0:
                    screened = True
                    z = (standard[sel] - centre) / scale
                    pair_z[sel, j] = z
                    flagged_count = int((np.abs(z) > threshold).sum())
                # the band in value units, at the class's median separation
                median_h = float(np.median(d[sel]))
                at_median = float(np.median(pair_scale[sel]))  # the scale grows with separation
                centre, scale = centre * at_median, scale * at_median
            rows.append({
                "direction": direction_words(direction, "label"), "lag": k + 1, "lag_low": float(lo),
                "lag_high": float(hi), "pairs": int(sel.size), "median_separation": median_h,
                "band_centre": centre, "band_scale": scale, "flagged": flagged_count, "screened": screened,
            })
    screened_pair = np.isfinite(pair_z).any(axis=1)
    with np.errstate(invalid="ignore"):
        flagged = (np.abs(pair_z) > threshold).any(axis=1)
        max_abs_z = np.max(np.where(np.isfinite(pair_z), np.abs(pair_z), -np.inf), axis=1, initial=-np.inf)
    max_abs_z = np.where(screened_pair, max_abs_z, np.nan)

    tail_s, head_s = pairs.tail[screened_pair], pairs.head[screened_pair]
    n_pairs = np.bincount(tail_s, minlength=n) + np.bincount(head_s, minlength=n)
    tail_f, head_f = pairs.tail[flagged], pairs.head[flagged]
    n_flagged = np.bincount(tail_f, minlength=n) + np.bincount(head_f, minlength=n)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(n_pairs > 0, n_flagged / np.maximum(n_pairs, 1), np.nan)
    share0 = np.nan_to_num(share, nan=0.0)
    dominance = _dominance(n, tail_s, head_s, tail_f, head_f, n_flagged)
    dom0 = np.nan_to_num(dominance, nan=0.0)
    # The end that dominates the flagged pairs around it wins; then the
    # higher share, then more flagged pairs (a point whose single pair is the
    # flagged one does not outweigh its partner).
    key_t = np.column_stack([dom0[tail_f], share0[tail_f], n_flagged[tail_f]])
    key_h = np.column_stack([dom0[head_f], share0[head_f], n_flagged[head_f]])
    tail_wins = _lexi_greater(key_t, key_h)
    head_wins = _lexi_greater(key_h, key_t)
    winner = np.where(tail_wins, tail_f, np.where(head_wins, head_f, -1))
    attributed = np.bincount(winner[winner >= 0], minlength=n)
    is_culprit = ((n_flagged >= min_flagged) & (share0 >= culprit_share) & (dom0 >= culprit_dominance)
                  & (2 * attributed > n_flagged))
    culprit = np.full(pairs.size, -1, dtype=np.int64)
    culprit[np.flatnonzero(flagged)] = np.where((winner >= 0) & is_culprit[np.maximum(winner, 0)], winner, -1)

    point_max_z = _max_per_point(n, np.concatenate([tail_s, head_s]), np.tile(max_abs_z[screened_pair], 2))

    points = pd.DataFrame({
        "lagpair_pairs": n_pairs.astype(np.int64),
        "lagpair_flagged": n_flagged.astype(np.int64),
        "lagpair_flagged_share": share,
        "lagpair_dominance": dominance,
        "lagpair_attributed": attributed.astype(np.int64),
        "lagpair_max_z": point_max_z,
        "lagpair_culprit": is_culprit,
    })
    return LagPairScreen(
        points=points,
        classes=pd.DataFrame(rows),
        pairs=pairs,
        lag_index=lag_index,
        direction_member=member,
        pair_z=pair_z,
        flagged=flagged,
        culprit=culprit,
        values=values,
        ids=ids,
        directions=directions,
        angle_tolerance=float(angle_tolerance),
        first_lag=float(first_lag),
        lag_edges=edges,
        threshold=float(threshold),
        settings={
            "min_class_pairs": int(min_class_pairs),
            "min_flagged": int(min_flagged),
            "culprit_share": float(culprit_share),
            "culprit_dominance": float(culprit_dominance),
            "distance_scale": scale_note,
        },
    )


def _max_per_point(n: int, index: np.ndarray, value: np.ndarray) -> np.ndarray:
    """Largest value per point (NaN where a point has none)."""
    out = np.full(n, -np.inf)
    np.maximum.at(out, index, value)  # fast in numpy 2 (0.16 s for 8.5 million values)
    out[~np.isfinite(out)] = np.nan
    return out


def _lexi_greater(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Row-wise lexicographic ``a > b`` for two (m, k) arrays."""
    greater = np.zeros(a.shape[0], dtype=bool)
    equal = np.ones(a.shape[0], dtype=bool)
    for col in range(a.shape[1]):
        greater |= equal & (a[:, col] > b[:, col])
        equal &= a[:, col] == b[:, col]
    return greater


def _dominance(n, tail_s, head_s, tail_f, head_f, n_flagged) -> np.ndarray:
    """Share of the flagged pairs around each point that the point is in.

    "Around" P are the flagged pairs with an end in P's closed neighbourhood
    (P and its screened partners). With ``A`` the screened-pair adjacency,
    ``F`` the flagged-pair adjacency and ``f`` the flagged counts, their number
    is ``(A f)[P] - T[P]``, where ``T[P]`` counts flagged pairs between two
    partners of P (``diag(A F A) / 2``), which ``A f`` counts twice. NaN
    where no pair around is flagged.
    """
    from scipy import sparse

    if tail_f.size == 0:
        return np.full(n, np.nan)
    f = n_flagged.astype(float)
    around_with_double = np.bincount(tail_s, weights=f[head_s], minlength=n) + np.bincount(
        head_s, weights=f[tail_s], minlength=n)
    # Only points in a flagged pair need the exact count; for the others the
    # dominance is 0 when any flagged pair is around (A f > 0), else undefined.
    rows = np.flatnonzero(n_flagged > 0)
    local = np.full(n, -1, dtype=np.int64)
    local[rows] = np.arange(rows.size)
    # rows of A for those points only: their screened pairs, in both orientations
    a = np.concatenate([tail_s, head_s])
    b = np.concatenate([head_s, tail_s])
    keep = local[a] >= 0
    sub = sparse.csr_array((np.ones(int(keep.sum())), (local[a[keep]], b[keep])), shape=(rows.size, n))
    sub.sum_duplicates()
    flag = sparse.csr_array((np.ones(2 * tail_f.size), (np.concatenate([tail_f, head_f]),
                                                         np.concatenate([head_f, tail_f]))), shape=(n, n))
    flag.sum_duplicates()
    between = np.asarray((sub @ flag).multiply(sub).sum(axis=1)).ravel() / 2.0
    out = np.where(around_with_double > 0, 0.0, np.nan)
    out[rows] = n_flagged[rows] / (around_with_double[rows] - between)
    return out


def lag_pair_reasons(screen: LagPairScreen) -> np.ndarray:
    """One sentence of evidence per point that is the likely culprit of its flagged pairs, "" otherwise.

    Meant as supporting evidence in a screen's reasons; the other ends of the
    pairs get nothing.

    Returns
    -------
    ndarray of object, shape (n,)
    """
    pts = screen.points
    out = np.full(len(pts), "", dtype=object)
    rows = np.flatnonzero(pts["lagpair_culprit"].to_numpy())
    flagged = pts["lagpair_flagged"].to_numpy()
    total = pts["lagpair_pairs"].to_numpy()
    dominance = pts["lagpair_dominance"].to_numpy()
    max_z = pts["lagpair_max_z"].to_numpy()
    for i in rows:
        out[i] = (
            f"lag pairs: {flagged[i]} of its {total[i]} pairs with nearby points differ far more than other "
            f"pairs at that distance and direction (up to {max_z[i]:.1f} robust sd), and it is in "
            f"{dominance[i]:.0%} of the outlying pairs around it"
        )
    return out


def lag_pairs_layer(screen: LagPairScreen, xy, crs=None, flagged_only: bool = True):
    """The ``lag_pairs`` line layer: one segment tail -> head per pair.

    Parameters
    ----------
    screen : LagPairScreen
    xy : array_like, shape (n, 2)
        The work-CRS coordinates the screen was run on.
    crs : optional
        CRS of ``xy`` (the work CRS), passed to GeoPandas.
    flagged_only : bool
        Only flagged pairs (default), or every screened pair.

    Returns
    -------
    geopandas.GeoDataFrame
        :meth:`LagPairScreen.pair_table` columns plus LineString geometry.
    """
    import geopandas as gpd
    import shapely

    xy = _as_xy(xy)
    table = screen.pair_table(flagged_only=flagged_only)
    coords = np.stack([xy[table["tail_row"].to_numpy()], xy[table["head_row"].to_numpy()]], axis=1)
    geometry = shapely.linestrings(coords) if len(table) else np.empty(0, dtype=object)
    return gpd.GeoDataFrame(table, geometry=gpd.GeoSeries(geometry, crs=crs), crs=crs)


def plot_lag_pairs(screen: LagPairScreen, direction: float, *, max_points: int = 20_000, seed: int = 0):
    """Pair clouds (tail value vs head value) of one direction, a panel per lag class.

    The 1:1 line, the robust band and the flagged pairs (red) are drawn;
    flagged pairs are always shown, other pairs are subsampled to
    ``max_points`` per panel (seeded), which the title states.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    direction = float(direction) % 180.0
    if direction not in screen.directions:
        raise ConfigError(
            f"direction {direction:g} was not screened; choose one of "
            f"{', '.join(direction_words(d, 'label') for d in screen.directions)}."
        )
    j = screen.directions.index(direction)
    n_lags = screen.lag_edges.shape[0]
    fig = Figure(figsize=(3.6 * n_lags, 3.8), layout="constrained")
    axes = fig.subplots(1, n_lags, squeeze=False)[0]
    rng = np.random.default_rng(seed)
    tail_v = screen.values[screen.pairs.tail]
    head_v = screen.values[screen.pairs.head]
    classes = screen.classes.set_index(["direction", "lag"])
    name = direction_words(direction, "abbrev")
    for k, ax in enumerate(axes):
        sel = np.flatnonzero(screen.direction_member[:, j] & (screen.lag_index == k))
        with np.errstate(invalid="ignore"):
            out = np.abs(screen.pair_z[sel, j]) > screen.threshold
        inside = sel[~out]
        note = ""
        if inside.size > max_points:
            inside = np.sort(rng.choice(inside, size=max_points, replace=False))
            note = f" ({max_points} of {int((~out).sum())} shown)"
        finite = np.concatenate([tail_v[sel], head_v[sel]])
        finite = finite[np.isfinite(finite)]
        lo = hi = None
        if finite.size:
            # Axes on the bulk of the values (quartiles +/- 3 IQR, within the data), the
            # same on both axes; a wild value would otherwise squeeze the whole cloud
            # into a corner. Points beyond are drawn on the frame as triangles.
            q1, q3 = np.percentile(finite, [25, 75])
            q_lo = max(float(finite.min()), q1 - 3 * (q3 - q1))
            q_hi = min(float(finite.max()), q3 + 3 * (q3 - q1))
            pad = 0.05 * (q_hi - q_lo) if q_hi > q_lo else max(abs(q_hi), 1.0) * 0.05
            lo, hi = float(q_lo - pad), float(q_hi + pad)
        flagged_rows = sel[out]
        for rows_, size, colour in ((inside, 6, "0.45"), (flagged_rows, 18, "tab:red")):
            tx, hy = tail_v[rows_], head_v[rows_]
            if lo is not None:
                beyond = (tx < lo) | (tx > hi) | (hy < lo) | (hy > hi)
                ax.scatter(np.clip(tx[beyond], lo, hi), np.clip(hy[beyond], lo, hi), s=size + 10, c=colour,
                           marker="^", linewidths=0)
                tx, hy = tx[~beyond], hy[~beyond]
            ax.scatter(tx, hy, s=size, c=colour, alpha=0.6 if colour != "tab:red" else 1.0, linewidths=0)
        if lo is not None:
            n_beyond = int(np.sum((tail_v[sel] < lo) | (tail_v[sel] > hi) | (head_v[sel] < lo) | (head_v[sel] > hi)))
            if n_beyond:
                note += f"\n{n_beyond} beyond the axes (triangles on the frame)"
            line = np.array([lo, hi])
            ax.plot(line, line, color="k", lw=0.8)
            row = classes.loc[(direction_words(direction, "label"), k + 1)]
            if row["screened"]:
                for sign in (-1, 1):
                    offset = row["band_centre"] + sign * screen.threshold * row["band_scale"]
                    ax.plot(line, line + offset, color="tab:blue", lw=0.8, ls="--")
            ax.set_xlim(lo, hi)
            ax.set_ylim(lo, hi)
        lo_edge, hi_edge = screen.lag_edges[k]
        ax.set_title(f"lag {k + 1}: ({lo_edge:.4g}, {hi_edge:.4g}]\n{sel.size} pairs, {int(out.sum())} flagged{note}",
                     fontsize=8)
        ax.set_xlabel("value at tail")
        if k == 0:
            ax.set_ylabel("value at head")
    scaled = screen.settings.get("distance_scale", "none") != "none"
    fig.suptitle(f"Lag pairs, {name} (tail to head azimuth {direction:g} +/- {screen.angle_tolerance:g} deg)"
                 + ("; band drawn at each class's median separation" if scaled else ""), fontsize=10)
    return fig
