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

Pair search (:mod:`pointsift.methods.pairsearch`): its orientation and
azimuth conventions, the k-d tree ball queries and the seeded subsampling
above the pair budget are described there. The figure and the line layer
are in :mod:`pointsift.methods.lagpairs_plot`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .lagpairs_plot import lag_pairs_layer, plot_lag_pairs
from .pairsearch import (  # re-exported: importable from here as before
    DEFAULT_PAIR_BUDGET,
    PairSet,
    _as_xy,
    axial_difference,
    find_pairs,
    lag_class_edges,
    point_spacing,
)
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

# Pairs per separation bin of the empirical distance scale.
_SCALE_BIN_PAIRS = 200


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
    member, pair_z, rows = _class_bands(pairs, lag_index, edges, standard, pair_scale, directions,
                                        angle_tolerance, min_class_pairs, threshold)
    points, flagged, culprit = _attribute(n, pairs, pair_z, threshold, min_flagged, culprit_share,
                                          culprit_dominance)
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


def _class_bands(pairs, lag_index, edges, standard, pair_scale, directions, angle_tolerance,
                 min_class_pairs, threshold):
    """The robust band of every direction and lag class, and each pair's departure from it.

    Returns the direction membership and ``pair_z`` arrays (pairs x
    directions) and one row of the ``classes`` table per class.
    """
    d = pairs.distance
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
    return member, pair_z, rows


def _attribute(n, pairs, pair_z, threshold, min_flagged, culprit_share, culprit_dominance):
    """Per-point counts, shares and dominance of flagged pairs, and the likely culprit of each flagged pair.

    Returns the ``points`` table, the flagged mask of the pairs and the
    culprit row of each pair (-1: none); the rules are in
    :func:`screen_lag_pairs`.
    """
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
    return points, flagged, culprit


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
