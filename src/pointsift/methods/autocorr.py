"""Local Moran's I and Getis-Ord Gi* with conditional permutation inference.

Local Moran's I follows Anselin (1995), "Local indicators of spatial
association - LISA", Geographical Analysis 27, in the form esda computes:
``I_i = (n - 1) z_i lag_i / sum(z^2)`` with ``z`` the values centred and
scaled by their standard deviation and ``lag`` the row-standardized mean of
the neighbours. Gi* is the Getis and Ord (1992) / Ord and Getis (1995) statistic
with the point itself included (binary weights plus self), reported as its
standard normal form ``z(Gi*)``, valid for values of either sign.

Inference is by conditional permutation (Anselin 1995): the point's own
value stays in place, and its k neighbours' values are drawn without
replacement from the other n - 1 values. For a point with value ``z_i`` both
statistics are increasing functions of the sum of the neighbours' values, so
one set of draws of that sum serves both; the p-value is esda's folded
one-sided ``(min(#>=, #<=) + 1) / (P + 1)``.

The draws depend on nothing but the run seed, the point itself and the
multiset of values, so shuffling the rows, or splitting the work over
threads, processes or partitions, cannot change any point's p-value:

* Candidates. For each neighbour count k, ``D = 100 (P + 1) - 1`` exact
  uniform k-subsets of the n slots of the values *in sorted order* (a
  canonical order, whatever the row order) are drawn once, from a stream
  keyed by the seed, k and n: Floyd's algorithm (Bentley and Floyd 1987, "A
  sample of brilliance", CACM 30) below 24 neighbours, a partial Fisher-Yates
  shuffle (Durstenfeld 1964) undone after each draw from 24 on; any k up to
  n - 1, never a retry that may give up. Their sums are computed once.
* Each point's own draws. A point picks its ``P`` draws uniformly, with
  replacement, among the candidates that do not hold its own slot, from its
  own stream, keyed by the seed and the point's identity (its work-CRS
  coordinates and its value as read, :func:`point_keys`). Each pick is thus
  a uniform k-subset of the *other* n - 1 values: the conditional
  permutation distribution. Picking among ``D`` candidates instead of
  drawing k fresh values costs one lookup instead of k random reads of the
  whole value array (ten times faster at a million points); the candidates
  add a variance of ``p (1 - p) / D``, a hundredth of that of the ``P``
  draws themselves.
* The stream is SplitMix64 (Steele, Lea and Flood 2014, "Fast splittable
  pseudorandom number generators", OOPSLA); bounded integers are drawn
  exactly by Lemire's (2019) multiply-and-reject method. The kernels are
  compiled by numba (cached on disk: only the first run after an install
  compiles them, about 5 s of one core) and the picks run on every core.
* A point that no candidate can serve (k = n - 1 and every candidate holds
  its slot: possible only for tiny layers) draws its ``P`` k-subsets
  directly from its own stream.

Benjamini-Hochberg needs p-values below ``alpha / m`` for the smallest; with
999 permutations the floor is 0.001, so over a thousand points nothing could
ever be rejected. pointsift therefore uses more permutations for the points
at the floor: every point whose count of more extreme draws is zero after its
own ``P`` draws is judged on every candidate that does not hold its slot
(about ``100 (P + 1) - 1``; floor about 1e-5 by default): the candidates'
sums are sorted once and each such point's counts read off by binary search,
less the candidates holding its slot. The run record says how many points
got them.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numba
import numpy as np

from ..graph import NeighbourGraph
from ..vocabulary import QUADRANT_WORDS

__all__ = [
    "LocalAutocorrelation",
    "local_autocorrelation",
    "benjamini_hochberg",
    "point_keys",
    "QUADRANT_WORDS",
    "KERNEL",
]


#: How the permutations are drawn (the run record's ``kernel``).
KERNEL = "per-point streams (SplitMix64 keyed by seed and point) picking among exact k-subset candidates per k"

#: Below this many neighbours a draw uses Floyd's algorithm (read-only); from it
#: on, a partial Fisher-Yates shuffle of a per-thread copy of the values.
_FLOYD_MAX_K = 24


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
        How the draws were made (:data:`KERNEL`).
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


# --- the random stream: SplitMix64, bounded integers by Lemire's method ----------------------

_GAMMA = np.uint64(0x9E3779B97F4A7C15)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)
_LOW32 = np.uint64(0xFFFFFFFF)
_TWO32 = np.uint64(1 << 32)
_EMPTY = np.uint64(1 << 32)  # no spare half word (halves are < 2**32)


@numba.njit(cache=True, inline="always")
def _mix64(x):
    x = (x ^ (x >> np.uint64(30))) * _MIX1
    x = (x ^ (x >> np.uint64(27))) * _MIX2
    return x ^ (x >> np.uint64(31))


@numba.njit(cache=True)
def splitmix64(state, count):
    """The first ``count`` outputs of SplitMix64 started at ``state`` (for tests)."""
    out = np.empty(count, dtype=np.uint64)
    s = np.uint64(state)
    for i in range(count):
        s = s + _GAMMA
        out[i] = _mix64(s)
    return out


@numba.njit(cache=True, inline="always")
def _next32(state, spare):
    if spare != _EMPTY:
        return spare, state, _EMPTY
    state = state + _GAMMA
    word = _mix64(state)
    return word >> np.uint64(32), state, word & _LOW32


@numba.njit(cache=True, inline="always")
def _below(state, spare, bound):
    """A uniform integer in [0, bound), bound < 2**32 (Lemire 2019, exact)."""
    s = np.uint64(bound)
    x, state, spare = _next32(state, spare)
    product = x * s
    low = product & _LOW32
    if low < s:
        threshold = (_TWO32 - s) % s
        while low < threshold:
            x, state, spare = _next32(state, spare)
            product = x * s
            low = product & _LOW32
    return np.int64(product >> np.uint64(32)), state, spare


@numba.njit(cache=True)
def draw_subsets(key, draws, k, population):
    """``draws`` k-subsets of range(population) from the stream at ``key``, as the
    permutation kernel draws them (Floyd below :data:`_FLOYD_MAX_K`, partial
    Fisher-Yates from it on); for tests of uniformity."""
    out = np.empty((draws, k), dtype=np.int64)
    state, spare = np.uint64(key), _EMPTY
    scratch = np.arange(population)
    swaps = np.empty(max(k, 1), dtype=np.int64)
    for d in range(draws):
        if k < _FLOYD_MAX_K:
            for c, j in enumerate(range(population - k, population)):
                t, state, spare = _below(state, spare, j + 1)
                for q in range(c):
                    if out[d, q] == t:
                        t = j
                        break
                out[d, c] = t
        else:
            for t in range(k):
                j, state, spare = _below(state, spare, population - t)
                j += t
                v = scratch[j]
                scratch[j] = scratch[t]
                scratch[t] = v
                swaps[t] = j
                out[d, t] = v
            for t in range(k - 1, -1, -1):
                j = swaps[t]
                v = scratch[j]
                scratch[j] = scratch[t]
                scratch[t] = v
    return out


@numba.njit(cache=True)
def _hash_points(x_bits, y_bits, v_bits):
    out = np.empty(x_bits.size, dtype=np.uint64)
    for i in range(x_bits.size):
        h = _mix64(x_bits[i] + _GAMMA)
        h = _mix64(h ^ y_bits[i])
        out[i] = _mix64(h ^ v_bits[i])
    return out


def point_keys(xy: np.ndarray, values: np.ndarray) -> np.ndarray:
    """A stable 64-bit identity per point, from its coordinates and value.

    The same point (same coordinates, same value, to the bit) gets the same
    key in any row order and any partition of the layer; records identical
    in both get the same key, which is harmless (they are the same record).

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates (work CRS).
    values : ndarray
        The values as read (not detrended: a fitted trend may differ in its
        last bits with the row order).

    Returns
    -------
    ndarray of uint64

    Examples
    --------
    >>> keys = point_keys(np.array([[0.0, 1.0], [2.0, 3.0]]), np.array([5.0, 6.0]))
    >>> bool(keys[0] == point_keys(np.array([[0.0, 1.0]]), np.array([5.0]))[0])
    True
    """
    xy = np.asarray(xy, dtype=np.float64)
    # + 0.0 makes -0.0 into 0.0, so both zeros give one key
    bits = [np.ascontiguousarray(a + 0.0).view(np.uint64) for a in (xy[:, 0], xy[:, 1], np.asarray(values, dtype=np.float64))]
    return _hash_points(*bits)


def _stream_keys(keys: np.ndarray, seed: int) -> np.ndarray:
    """Per-point stream starts: the point's key mixed with the run seed."""
    salt = splitmix64(np.uint64(int(seed) % (1 << 64)), 1)[0]
    return _hash_points(keys, np.full(keys.size, salt, dtype=np.uint64), np.zeros(keys.size, dtype=np.uint64))


def _pool(seed: int, k: int, n: int, size: int):
    """The candidate draws for neighbour count ``k``: ``size`` exact k-subsets of the
    ``n`` sorted-value slots from a stream keyed by the seed, k and n, and for
    each slot the (sorted) candidates that hold it, as CSR arrays."""
    salt = splitmix64(np.uint64(int(seed) % (1 << 64)), 2)[1]
    key = _hash_points(np.array([salt]), np.array([k], dtype=np.uint64), np.array([n], dtype=np.uint64))[0]
    subsets = draw_subsets(key, size, int(k), n)
    flat = subsets.ravel()
    by_slot = np.argsort(flat, kind="stable")  # candidates in ascending order within a slot
    holders = (by_slot // k).astype(np.int64)
    slot_start = np.searchsorted(flat[by_slot], np.arange(n + 1))
    # holders[j] - (its rank within its slot): how many valid candidates lie before it
    rank = np.arange(holders.size) - np.repeat(slot_start[:-1], np.diff(slot_start))
    return subsets, holders, holders - rank, slot_start


@numba.njit(cache=True, nogil=True)
def _pick_counts(sums, before, slot_start, self_pos, observed, keys, permutations, tolerance,
                 first, stride, ge, le, done):
    """Rows ``first, first + stride, ...``: ``permutations`` candidates picked
    uniformly (with replacement) from the stream at ``keys[r]`` among the
    candidates that do not hold the row's own slot; counts of sums >= / <= the
    observed. A row with no valid candidate gets ``done = -1``."""
    size = sums.size
    for r in range(first, observed.size, stride):
        lo = slot_start[self_pos[r]]
        hi = slot_start[self_pos[r] + 1]
        valid = size - (hi - lo)
        if valid <= 0:
            done[r] = -1
            continue
        state, spare = keys[r], _EMPTY
        obs = observed[r]
        g = 0
        l = 0
        for _ in range(permutations):
            u, state, spare = _below(state, spare, valid)
            # the u-th valid candidate: u plus the holders that come before it
            skip = 0
            if hi > lo:
                skip = np.searchsorted(before[lo:hi], u, side="right")
            total = sums[u + skip]
            if total >= obs - tolerance:
                g += 1
            if total <= obs + tolerance:
                l += 1
        ge[r] = g
        le[r] = l
        done[r] = permutations


@numba.njit(cache=True)
def _pool_counts(ordered, sums, holders, slot_start, self_pos, observed, tolerance):
    """Counts over every valid candidate (for rows at the floor)."""
    m = observed.size
    ge = np.zeros(m, dtype=np.int64)
    le = np.zeros(m, dtype=np.int64)
    done = np.zeros(m, dtype=np.int64)
    size = sums.size
    for r in range(m):
        obs = observed[r]
        g = size - np.searchsorted(ordered, obs - tolerance, side="left")
        l = np.searchsorted(ordered, obs + tolerance, side="right")
        lo = slot_start[self_pos[r]]
        hi = slot_start[self_pos[r] + 1]
        for h in range(lo, hi):
            s = sums[holders[h]]
            if s >= obs - tolerance:
                g -= 1
            if s <= obs + tolerance:
                l -= 1
        ge[r] = g
        le[r] = l
        done[r] = size - (hi - lo)
    return ge, le, done


def _own_draws(z_sorted, pos, obs, k, key, permutations, tolerance):
    """Exact draws from the point's own stream (a row that no candidate can serve)."""
    picks = draw_subsets(key, permutations, int(k), z_sorted.size - 1)
    sums = z_sorted[picks + (picks >= pos)].sum(axis=1)
    return int((sums >= obs - tolerance).sum()), int((sums <= obs + tolerance).sum()), permutations


def _threads() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _run_picks(sums, before, slot_start, self_pos, observed, keys, permutations, tolerance):
    """:func:`_pick_counts` over all rows, on every core (threads; it releases the GIL)."""
    m = observed.size
    ge, le, done = (np.zeros(m, dtype=np.int64) for _ in range(3))
    stride = max(1, min(m, _threads()))
    args = (sums, before, slot_start, self_pos, observed, keys, permutations, tolerance)
    if stride == 1:
        _pick_counts(*args, 0, 1, ge, le, done)
        return ge, le, done
    with ThreadPoolExecutor(stride) as pool:
        jobs = [pool.submit(_pick_counts, *args, first, stride, ge, le, done) for first in range(stride)]
        for job in jobs:
            job.result()
    return ge, le, done


def _conditional_counts(z_sorted, self_pos, observed, k_rows, keys, permutations, extended, seed, tolerance):
    """Counts of permuted sums >= / <= the observed and the draws behind them, per row."""
    m = observed.size
    ge, le, done = (np.zeros(m, dtype=np.int64) for _ in range(3))
    n = z_sorted.size
    for k in np.unique(k_rows):
        group = np.flatnonzero(k_rows == k)
        subsets, holders, before, slot_start = _pool(seed, int(k), n, 100 * (permutations + 1) - 1)
        sums = z_sorted[subsets].sum(axis=1)
        del subsets
        pos, obs = self_pos[group], observed[group]
        g, l, d = _run_picks(sums, before, slot_start, pos, obs, keys[group], int(permutations), tolerance)
        floor = (d > 0) & (np.minimum(g, l) == 0)
        if extended > permutations and floor.any():  # judged on every candidate
            fg, fl, fd = _pool_counts(np.sort(sums), sums, holders, slot_start, pos[floor], obs[floor], tolerance)
            g[floor], l[floor], d[floor] = fg, fl, fd
        for i in np.flatnonzero(d < 0):
            g[i], l[i], d[i] = _own_draws(z_sorted, pos[i], obs[i], k, keys[group][i], int(permutations), tolerance)
        ge[group], le[group], done[group] = g, l, d
    return ge, le, done


def local_autocorrelation(
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    permutations: int = 999,
    seed: int = 0,
    refine: bool = True,
    keys: np.ndarray | None = None,
    counts=None,
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
        Run seed; with ``keys`` it starts each point's stream.
    refine : bool
        Draw more permutations for points at the p-value floor.
    keys : ndarray of uint64, optional
        Identity of each point (:func:`point_keys`). Without it the row
        number is the identity, so results then depend on the row order.
    counts : callable, optional
        Counts the draws of the rows (default: here, on every core); an
        engine passes its own (:mod:`pointsift.engine`: the rows on a
        cluster's workers). It takes the arguments of the module's
        ``_conditional_counts`` and must return its result; rows are
        independent, so any split of them gives the same counts.

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

    # every global quantity from the sorted values: the same in any row order
    y_sorted = np.sort(y)
    mean = y_sorted.mean()
    sd = y_sorted.std()
    z = (y - mean) / sd if sd > 0 else np.zeros(n)
    z_sorted = (y_sorted - mean) / sd if sd > 0 else np.zeros(n)  # rounding is monotone: still sorted
    lag_sum = np.where(mask, z[idx], 0.0).sum(axis=1)
    lag = np.where(has, lag_sum / np.maximum(k_rows, 1), np.nan)
    local_i = (n - 1) * z * lag / (z_sorted * z_sorted).sum() if sd > 0 else np.zeros(n)
    quad = np.where(z > 0, np.where(lag > 0, 1, 4), np.where(lag > 0, 2, 3))

    # Gi*, binary weights with self: W_i = k_i + 1, S1_i = W_i (Ord and Getis 1995, eq. 3.2)
    total_w = k_rows + 1.0
    star_sum = np.where(mask, y[idx], 0.0).sum(axis=1) + y
    s = np.sqrt((y_sorted * y_sorted).mean() - mean * mean)
    with np.errstate(all="ignore"):
        gi = (star_sum - mean * total_w) / (s * np.sqrt((n * total_w - total_w**2) / (n - 1)))

    rows = np.flatnonzero(has)
    if keys is None:
        identity = np.flatnonzero(used)[rows].astype(np.uint64)
    else:
        identity = np.asarray(keys, dtype=np.uint64)[used][rows]
    extended = 100 * (permutations + 1) - 1 if refine else permutations
    tolerance = 1e-12 * max(1.0, float(np.abs(z_sorted[[0, -1]]).max()))
    ge, le, draws = (counts or _conditional_counts)(
        z_sorted, np.searchsorted(z_sorted, z[rows], side="left"), lag_sum[rows], k_rows[rows].astype(np.int64),
        _stream_keys(identity, seed), int(permutations), int(extended), seed, tolerance,
    )
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
    return LocalAutocorrelation(moran, quadrant, gi_z, p_value, benjamini_hochberg(p_value), perms, KERNEL,
                                standardized, neighbour_mean)
