"""Local Moran's I and Getis-Ord Gi* with conditional permutation inference.

Local Moran's I follows Anselin (1995), "Local indicators of spatial
association - LISA", Geographical Analysis 27, in the form esda computes:
``I_i = (n - 1) z_i lag_i / sum(z^2)`` with ``z`` the values centred and
scaled by their standard deviation and ``lag`` the row-standardized mean of
the neighbours. Gi* is the Getis and Ord (1992) / Ord and Getis (1995) statistic
with the point itself included (binary weights plus self), reported as its
standard normal form ``z(Gi*)``, valid for values of either sign.

Inference is by conditional permutation (Anselin 1995): the point's own
value stays in place, and its neighbours' values are drawn without
replacement from the other n - 1 values. For a point with value ``z_i`` both
statistics are increasing functions of the sum of the neighbours' values, so
one set of draws of that sum serves both; the p-value is esda's folded
one-sided ``(min(#>=, #<=) + 1) / (P + 1)``.

The draws are shared by all points, as esda does (one matrix of random index
sets reused for every point): ``Q`` random k-subsets of all n rows are drawn
once (distinct rows within a subset), their sums of standardized values are
computed and sorted, and each point's counts of sums at least / at most its
own are read off by binary search. The draws that contain the point itself
are then removed from its counts (an inverted index makes that one pass over
the ``Q x k`` drawn rows), so what remains is a uniform sample of k-subsets
of the *other* n - 1 values: the conditional permutation distribution, exactly,
with ``Q`` minus those draws permutations. Vectorised numpy throughout: no
just-in-time compile, and the cost does not grow with n per point (esda's
does, LIBRARY-NOTES).

Benjamini-Hochberg needs p-values below ``alpha / m`` for the smallest; with
999 permutations the floor is 0.001, so over a thousand points nothing could
ever be rejected. pointsift therefore uses more permutations for the points
at the floor: every point whose count of more extreme draws is zero after the
first ``P`` draws is judged on ``100 (P + 1) - 1`` draws (floor about
1 / (100 (P + 1)), 1e-5 by default). The run record says how many points got
them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..graph import NeighbourGraph
from ..vocabulary import QUADRANT_WORDS

__all__ = [
    "LocalAutocorrelation",
    "local_autocorrelation",
    "benjamini_hochberg",
    "QUADRANT_WORDS",
]



@dataclass(frozen=True)
class LocalAutocorrelation:
    """Per-point local statistics (NaN where a point has no neighbours).

    Attributes
    ----------
    moran_i : ndarray
        Local Moran's I.
    quadrant : ndarray of int
        1 high-high, 2 low-high, 3 low-low, 4 high-low, 0 not computed.
    gi_star_z : ndarray
        Standard normal form of Getis-Ord Gi*.
    p_value : ndarray
        Folded one-sided conditional permutation p-value (shared by both
        statistics, see module notes).
    p_adjusted : ndarray
        Benjamini-Hochberg adjusted p-value over the computed points.
    permutations : ndarray of int
        Permutations behind each p-value (more at the floor).
    kernel : str
        How the draws were made (``"shared draws"``).
    standardized : ndarray or None
        ``z = (v - mean) / sd`` over the rows used (sd with ``n``
        denominator), NaN elsewhere: the x axis of the Moran scatter.
    neighbour_mean : ndarray or None
        Mean of the neighbours' ``z`` (row-standardized weights), NaN where a
        point has no used neighbour: the y axis of the Moran scatter
        (Anselin 1996); ``(standardized, neighbour_mean)`` gives the quadrant.
    """

    moran_i: np.ndarray
    quadrant: np.ndarray
    gi_star_z: np.ndarray
    p_value: np.ndarray
    p_adjusted: np.ndarray
    permutations: np.ndarray
    kernel: str
    standardized: np.ndarray | None = None
    neighbour_mean: np.ndarray | None = None


def benjamini_hochberg(p: np.ndarray) -> np.ndarray:
    """Benjamini-Hochberg (1995) adjusted p-values; NaN entries stay NaN and
    do not count towards the number of tests.

    Parameters
    ----------
    p : ndarray
        Raw p-values.

    Returns
    -------
    ndarray
        Adjusted p-values (same order), capped at 1.

    Examples
    --------
    >>> benjamini_hochberg(np.array([0.01, 0.04, 0.03, np.nan]))
    array([0.03, 0.04, 0.04,  nan])
    """
    p = np.asarray(p, dtype=float)
    out = np.full(p.shape, np.nan)
    valid = np.flatnonzero(np.isfinite(p))
    m = valid.size
    if m == 0:
        return out
    order = valid[np.argsort(p[valid], kind="stable")]
    ranked = p[order] * m / np.arange(1, m + 1)
    ranked = np.minimum.accumulate(ranked[::-1])[::-1]
    out[order] = np.minimum(ranked, 1.0)
    return out


def _draw_subsets(rng, draws: int, k: int, population: int) -> np.ndarray:
    """``draws`` random k-subsets of range(population), rows distinct within each."""
    if population <= max(4 * k, 64):
        # small populations: distinct by construction (random keys, take the k smallest)
        return np.argpartition(rng.random((draws, population)), k - 1, axis=1)[:, :k] if k < population else np.tile(np.arange(population), (draws, 1))
    idx = rng.integers(0, population, size=(draws, k))
    if k < 2:
        return idx
    # rejection: redraw the sets holding a repeat; only those can still hold one,
    # so only they are checked again (the same draws as checking every row)
    todo = np.arange(draws)
    for _ in range(200):
        sorted_idx = np.sort(idx[todo], axis=1)
        clash = (np.diff(sorted_idx, axis=1) == 0).any(axis=1)
        if not clash.any():
            return idx
        todo = todo[clash]
        idx[todo] = rng.integers(0, population, size=(todo.size, k))
    raise RuntimeError("could not draw distinct neighbour sets; too few points for k")


def _shared_counts(z, rows, obs, subsets, sums):
    """Counts of permuted sums >= / <= the observed, for ``rows``, over the
    given shared draws, leaving out draws that contain the row itself."""
    draws = sums.size
    tolerance = 1e-12 * max(1.0, float(np.abs(z).max()))
    ordered = np.sort(sums)
    ge = draws - np.searchsorted(ordered, obs - tolerance, side="left")
    le = np.searchsorted(ordered, obs + tolerance, side="right")
    valid = np.full(rows.size, draws, dtype=np.int64)
    # inverted index: which drawn entries are one of our rows
    position = np.full(z.size, -1, dtype=np.int64)
    position[rows] = np.arange(rows.size)
    hit_position = position[subsets.ravel()]
    hit = hit_position >= 0
    if hit.any():
        where = hit_position[hit]
        draw_of = np.repeat(np.arange(draws), subsets.shape[1])[hit]
        s = sums[draw_of]
        ge -= np.bincount(where, weights=(s >= obs[where] - tolerance), minlength=rows.size).astype(np.int64)
        le -= np.bincount(where, weights=(s <= obs[where] + tolerance), minlength=rows.size).astype(np.int64)
        valid -= np.bincount(where, minlength=rows.size)
    return ge, le, valid


def local_autocorrelation(
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    permutations: int = 999,
    seed: int = 0,
    refine: bool = True,
) -> LocalAutocorrelation:
    """Local Moran's I and Gi* with conditional permutation p-values.

    Parameters
    ----------
    values : ndarray
        Values (detrended by the caller where a regional trend exists); NaN
        rows are left out and never used as neighbours.
    graph : NeighbourGraph
        Neighbours (self excluded); weights are row-standardized for Moran's
        I and binary plus self for Gi*.
    permutations : int
        Draws per point (before refinement at the floor).
    seed : int
        Seed for the draws.
    refine : bool
        Draw more permutations for points at the p-value floor.

    Returns
    -------
    LocalAutocorrelation
    """
    values = np.asarray(values, dtype=float)
    n_all = values.size
    used = np.isfinite(values)
    positions = np.full(n_all, -1, dtype=np.int64)
    positions[used] = np.arange(used.sum())
    y = values[used]
    n = y.size
    g = graph.restrict(used)
    idx_all = g.indices[used]
    mask = (idx_all >= 0)
    idx = np.where(mask, positions[np.where(mask, idx_all, 0)], 0)
    k_rows = mask.sum(axis=1)
    has = k_rows > 0

    moran = np.full(n_all, np.nan)
    quadrant = np.zeros(n_all, dtype=np.int64)
    gi_z = np.full(n_all, np.nan)
    p_value = np.full(n_all, np.nan)
    perms = np.zeros(n_all, dtype=np.int64)
    if n < 3 or not has.any():
        return LocalAutocorrelation(moran, quadrant, gi_z, p_value, p_value.copy(), perms, "none")

    sd = y.std()
    z = (y - y.mean()) / sd if sd > 0 else np.zeros(n)
    lag_sum = np.where(mask, z[idx], 0.0).sum(axis=1)
    lag = np.where(has, lag_sum / np.maximum(k_rows, 1), np.nan)
    local_i = (n - 1) * z * lag / (z * z).sum() if sd > 0 else np.zeros(n)
    quad = np.where(z > 0, np.where(lag > 0, 1, 4), np.where(lag > 0, 2, 3))

    # Gi*, binary weights with self: W_i = k_i + 1, S1_i = W_i (Ord and Getis 1995, eq. 3.2)
    total_w = k_rows + 1.0
    star_sum = np.where(mask, y[idx], 0.0).sum(axis=1) + y
    mean = y.mean()
    s = np.sqrt((y * y).mean() - mean * mean)
    with np.errstate(all="ignore"):
        gi = (star_sum - mean * total_w) / (s * np.sqrt((n * total_w - total_w**2) / (n - 1)))

    rng = np.random.default_rng(seed)
    rows = np.flatnonzero(has)
    ge = np.zeros(rows.size, dtype=np.int64)
    le = np.zeros(rows.size, dtype=np.int64)
    draws = np.zeros(rows.size, dtype=np.int64)
    extended = 100 * (permutations + 1) - 1 if refine else permutations
    for k in np.unique(k_rows[rows]):
        group = np.flatnonzero(k_rows[rows] == k)
        if k >= n:  # every other point is a neighbour: nothing to permute
            ge[group] = le[group] = draws[group] = 0
            continue
        subsets = _draw_subsets(rng, permutations, int(k), n)
        sums = z[subsets].sum(axis=1)
        g_rows = rows[group]
        g_ge, g_le, g_valid = _shared_counts(z, g_rows, lag_sum[g_rows], subsets, sums)
        if refine:
            floor = np.minimum(g_ge, g_le) == 0
            if floor.any():
                # the extra draws only for neighbour counts with points at the floor
                # (a distance band has dozens of counts, most without any)
                more = _draw_subsets(rng, extended - permutations, int(k), n)
                subsets = np.concatenate([subsets, more])
                sums = np.concatenate([sums, z[more].sum(axis=1)])
                f_ge, f_le, f_valid = _shared_counts(z, g_rows[floor], lag_sum[g_rows][floor], subsets, sums)
                g_ge[floor], g_le[floor], g_valid[floor] = f_ge, f_le, f_valid
        ge[group], le[group], draws[group] = g_ge, g_le, g_valid
    p = (np.minimum(ge, le) + 1.0) / (draws + 1.0)

    target = np.flatnonzero(used)[rows]
    moran[target] = local_i[rows]
    quadrant[target] = quad[rows]
    gi_z[target] = gi[rows]
    p_value[target] = np.minimum(p, 1.0)
    perms[target] = draws
    standardized = np.full(n_all, np.nan)
    neighbour_mean = np.full(n_all, np.nan)
    standardized[used] = np.where(has, z, np.nan)
    neighbour_mean[used] = lag
    return LocalAutocorrelation(moran, quadrant, gi_z, p_value, benjamini_hochberg(p_value), perms, "shared draws",
                                standardized, neighbour_mean)
