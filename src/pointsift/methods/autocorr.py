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

Two kernels draw the sums, both vectorised numpy (no just-in-time compile):

* exact: ``P`` draws per point, each excluding the point itself; used while
  ``n x P x k`` is at most :data:`EXACT_BUDGET`;
* pooled: above that, a single reference set of ``100 (P + 1) - 1`` draws per
  neighbour count, shared by every point. Leaving the point's own value in the
  pool changes the reference distribution by O(k / n) (k / n < 0.001 where it
  is used), and sharing draws makes p-values of different points dependent
  but each one valid.

Benjamini-Hochberg needs p-values below ``alpha / m`` for the smallest; with
999 permutations the floor is 0.001, so over a thousand points nothing could
ever be rejected. pointsift therefore draws more permutations for the points
at the floor: every point whose count of more extreme draws is zero gets
another ``99 (P + 1)`` draws (floor 1 / (100 (P + 1)), 1e-5 by default); the
pooled kernel starts at that resolution.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..graph import NeighbourGraph

__all__ = [
    "LocalAutocorrelation",
    "local_autocorrelation",
    "benjamini_hochberg",
    "QUADRANT_WORDS",
    "EXACT_BUDGET",
]

#: Largest ``n * permutations * k`` drawn point by point.
EXACT_BUDGET = 60_000_000

QUADRANT_WORDS = {
    1: "high among high",
    2: "low among high",
    3: "low among low",
    4: "high among low",
}


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
        ``"exact"`` or ``"pooled"``.
    """

    moran_i: np.ndarray
    quadrant: np.ndarray
    gi_star_z: np.ndarray
    p_value: np.ndarray
    p_adjusted: np.ndarray
    permutations: np.ndarray
    kernel: str


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


def _draw_without_replacement(rng, n_rows: int, draws: int, k: int, population: int, exclude: np.ndarray | None):
    """Indices (n_rows, draws, k) into range(population), distinct within each
    draw, never equal to ``exclude[row]``."""
    size = population - (1 if exclude is not None else 0)
    idx = rng.integers(0, size, size=(n_rows, draws, k))
    for _ in range(64):
        if k < 2:
            break
        sorted_idx = np.sort(idx, axis=2)
        clash = (np.diff(sorted_idx, axis=2) == 0).any(axis=2)
        if not clash.any():
            break
        rows, cols = np.nonzero(clash)
        idx[rows, cols] = rng.integers(0, size, size=(rows.size, k))
    if exclude is not None:
        idx = idx + (idx >= exclude[:, None, None])
    return idx


def _exact_counts(z, rows, k_rows, lag_sum_obs, draws, rng, chunk_elements=4_000_000):
    """Counts of permuted neighbour sums >= and <= the observed, per row."""
    n = z.size
    kmax = int(k_rows.max())
    ge = np.zeros(rows.size, dtype=np.int64)
    le = np.zeros(rows.size, dtype=np.int64)
    step = max(1, chunk_elements // max(draws * kmax, 1))
    tolerance = 1e-12 * max(1.0, float(np.abs(z).max()))
    for start in range(0, rows.size, step):
        sl = slice(start, start + step)
        r = rows[sl]
        idx = _draw_without_replacement(rng, r.size, draws, kmax, n, r)
        vals = z[idx]
        if (k_rows[sl] < kmax).any():
            keep = np.arange(kmax)[None, None, :] < k_rows[sl][:, None, None]
            vals = np.where(keep, vals, 0.0)
        sums = vals.sum(axis=2)
        obs = lag_sum_obs[sl][:, None]
        ge[sl] = (sums >= obs - tolerance).sum(axis=1)
        le[sl] = (sums <= obs + tolerance).sum(axis=1)
    return ge, le


def _pooled_counts(z, k_rows, lag_sum_obs, draws, rng):
    ge = np.zeros(k_rows.size, dtype=np.int64)
    le = np.zeros(k_rows.size, dtype=np.int64)
    tolerance = 1e-12 * max(1.0, float(np.abs(z).max()))
    for k in np.unique(k_rows):
        these = np.flatnonzero(k_rows == k)
        reference = np.empty(draws)
        block = max(1, 4_000_000 // int(k))
        for start in range(0, draws, block):
            m = min(block, draws - start)
            idx = _draw_without_replacement(rng, 1, m, int(k), z.size, None)[0]
            reference[start : start + m] = z[idx].sum(axis=1)
        reference.sort()
        obs = lag_sum_obs[these]
        ge[these] = draws - np.searchsorted(reference, obs - tolerance, side="left")
        le[these] = np.searchsorted(reference, obs + tolerance, side="right")
    return ge, le


def local_autocorrelation(
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    permutations: int = 999,
    seed: int = 0,
    refine: bool = True,
    kernel: str = "auto",
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
    kernel : {"auto", "exact", "pooled"}
        Force a kernel (tests); "auto" picks by :data:`EXACT_BUDGET`.

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
    chosen = kernel
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
    if chosen == "auto":
        chosen = "exact" if n * permutations * max(int(k_rows.max()), 1) <= EXACT_BUDGET else "pooled"
    if chosen == "exact":
        ge, le = _exact_counts(z, rows, k_rows[rows], lag_sum[rows], permutations, rng)
        draws = np.full(rows.size, permutations)
        if refine:
            floor = np.minimum(ge, le) == 0
            if floor.any():
                extra = 99 * (permutations + 1)
                ge2, le2 = _exact_counts(z, rows[floor], k_rows[rows][floor], lag_sum[rows][floor], extra, rng)
                ge[floor] += ge2
                le[floor] += le2
                draws[floor] += extra
    elif chosen == "pooled":
        pool = 100 * (permutations + 1) - 1
        ge, le = _pooled_counts(z, k_rows[rows], lag_sum[rows], pool, rng)
        draws = np.full(rows.size, pool)
    else:
        raise ValueError(f"kernel {kernel!r} is not one of auto, exact, pooled")
    p = (np.minimum(ge, le) + 1.0) / (draws + 1.0)

    target = np.flatnonzero(used)[rows]
    moran[target] = local_i[rows]
    quadrant[target] = quad[rows]
    gi_z[target] = gi[rows]
    p_value[target] = np.minimum(p, 1.0)
    perms[target] = draws
    return LocalAutocorrelation(moran, quadrant, gi_z, p_value, benjamini_hochberg(p_value), perms, chosen)
