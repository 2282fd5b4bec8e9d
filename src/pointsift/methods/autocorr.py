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

Each point's draws are its own, and depend on nothing but the run seed, the
point itself and the multiset of values: they come from a stream keyed by
the seed and the point's identity (its work-CRS coordinates and its value,
see :func:`point_keys`), and index the values in sorted order (a canonical
order, whatever the row order). So shuffling the rows, or splitting the work
over threads, processes or partitions, cannot change any point's p-value.
The stream is SplitMix64 (Steele, Lea and Flood 2014, "Fast splittable
pseudorandom number generators", OOPSLA) started at the point's key; bounded
integers are drawn exactly by Lemire's (2019) multiply-and-reject method.
Each draw is an exact uniform k-subset of the other n - 1 values, never a
retry that may give up: Floyd's algorithm (Bentley and Floyd 1987, "A sample
of brilliance", CACM 30) for small k, and a partial Fisher-Yates shuffle
(Durstenfeld 1964) undone after each draw for large k; any k up to n - 1.
The kernel is compiled by numba (cached on disk, so only the first run after
an install compiles it) and runs over points in parallel threads.

Benjamini-Hochberg needs p-values below ``alpha / m`` for the smallest; with
999 permutations the floor is 0.001, so over a thousand points nothing could
ever be rejected. pointsift therefore uses more permutations for the points
at the floor: every point whose count of more extreme draws is zero after its
own first ``P`` draws is judged on ``100 (P + 1) - 1`` draws in all. The
extra draws are shared by the floor points with the same neighbour count (in
a smooth field a large share of the points sit at the floor, and 99,000 own
draws each would cost minutes at a million points): ``100 (P + 1) - 1 - P``
k-subsets of the sorted-value slots are drawn once per k, from a stream keyed
by the seed, k and n, their sums sorted, and each point's counts read off by
binary search, leaving out the draws that hold its own slot (so each point's
reference is still a uniform sample of k-subsets of the *other* values).
They too depend on nothing but the seed and the multiset of values, so row
order and partitions cannot change them. The run record says how many points
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
KERNEL = "per-point streams (SplitMix64 keyed by seed and point; exact k-subsets); floor extension shared per k"

#: Below this many neighbours a draw uses Floyd's algorithm (read-only); from it
#: on, a partial Fisher-Yates shuffle of a per-thread copy of the values.
_FLOYD_MAX_K = 24
#: Draws whose indices are made before their values are read (Floyd path).
_BATCH = 16


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


@numba.njit(cache=True, nogil=True)
def _permutation_counts(z_sorted, self_pos, observed, k_rows, keys, permutations, tolerance,
                        first, stride, ge, le, done):
    """Counts of permuted neighbour sums >= / <= the observed one, per row.

    Row r keeps its value (at ``self_pos[r]`` of ``z_sorted``); each draw is a
    uniform ``k_rows[r]``-subset of the other values, from the stream at
    ``keys[r]``. This call does rows ``first, first + stride, ...``
    (threads take interleaved rows, so they share the slow, refined rows
    evenly) and writes ``ge``, ``le`` and ``done``; no row's counts depend on
    any other row.
    """
    m = observed.size
    n = z_sorted.size
    population = n - 1
    big_k = k_rows.max() if m else 0
    picks = np.empty(_BATCH * _FLOYD_MAX_K, dtype=np.int64)
    swaps = np.empty(max(big_k, 1), dtype=np.int64)
    scratch = z_sorted.copy() if big_k >= _FLOYD_MAX_K else z_sorted[:1].copy()
    for r in range(first, m, stride):
        k = k_rows[r]
        pos = self_pos[r]
        obs = observed[r]
        state, spare = keys[r], _EMPTY
        g = 0
        l = 0
        d = 0
        target = permutations
        if k >= _FLOYD_MAX_K:
            # population = scratch[:n-1]: the point's own value moved to the end
            v = scratch[pos]
            scratch[pos] = scratch[n - 1]
            scratch[n - 1] = v
        while d < target:
            if k < _FLOYD_MAX_K:
                # a batch of draws' indices first, then their values: the
                # loads are independent and overlap (the values are large
                # enough at a million points to miss the caches)
                batch = min(_BATCH, target - d)
                for b in range(batch):
                    base = b * k
                    for c2 in range(k):
                        j = population - k + c2
                        t, state, spare = _below(state, spare, j + 1)
                        for q in range(base, base + c2):
                            if picks[q] == t:
                                t = j
                                break
                        picks[base + c2] = t
                for b in range(batch):
                    base = b * k
                    total = 0.0
                    for c2 in range(k):
                        t = picks[base + c2]
                        total += z_sorted[t if t < pos else t + 1]
                    if total >= obs - tolerance:
                        g += 1
                    if total <= obs + tolerance:
                        l += 1
                d += batch
            else:
                total = 0.0
                for t in range(k):
                    j, state, spare = _below(state, spare, population - t)
                    j += t
                    v = scratch[j]
                    scratch[j] = scratch[t]
                    scratch[t] = v
                    swaps[t] = j
                    total += v
                for t in range(k - 1, -1, -1):
                    j = swaps[t]
                    v = scratch[j]
                    scratch[j] = scratch[t]
                    scratch[t] = v
                if total >= obs - tolerance:
                    g += 1
                if total <= obs + tolerance:
                    l += 1
                d += 1
        if k >= _FLOYD_MAX_K:
            v = scratch[pos]
            scratch[pos] = scratch[n - 1]
            scratch[n - 1] = v
        ge[r] = g
        le[r] = l
        done[r] = d


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


@numba.njit(cache=True)
def _exclusions(hit_pos, hit_sum, row_pos, row_obs, tolerance):
    """Per row: how many of the draws holding its own slot (``hit_pos`` sorted)
    have sums >= / <= its observed sum, and how many there are."""
    m = row_pos.size
    ge = np.zeros(m, dtype=np.int64)
    le = np.zeros(m, dtype=np.int64)
    count = np.zeros(m, dtype=np.int64)
    for r in range(m):
        lo = np.searchsorted(hit_pos, row_pos[r], side="left")
        hi = np.searchsorted(hit_pos, row_pos[r], side="right")
        for h in range(lo, hi):
            if hit_sum[h] >= row_obs[r] - tolerance:
                ge[r] += 1
            if hit_sum[h] <= row_obs[r] + tolerance:
                le[r] += 1
        count[r] = hi - lo
    return ge, le, count


def _refine_at_floor(z_sorted, self_pos, observed, k_rows, extra, seed, tolerance):
    """``extra`` more draws for the rows at the floor, shared by the rows with
    one neighbour count (see the module notes).

    The draws are k-subsets of the slots of ``z_sorted`` from a stream keyed
    by the seed, k and n (so the same in any row order or partition); for
    each row, the draws holding its own slot are left out, so what remains
    is a uniform sample of k-subsets of the other values.
    """
    n = z_sorted.size
    ge, le, valid = (np.zeros(observed.size, dtype=np.int64) for _ in range(3))
    salt = splitmix64(np.uint64(int(seed) % (1 << 64)), 2)[1]
    for k in np.unique(k_rows):
        group = np.flatnonzero(k_rows == k)
        key = _hash_points(np.array([salt]), np.array([k], dtype=np.uint64), np.array([n], dtype=np.uint64))[0]
        subsets = draw_subsets(key, extra, int(k), n)
        sums = z_sorted[subsets].sum(axis=1)
        ordered = np.sort(sums)
        obs = observed[group]
        g = extra - np.searchsorted(ordered, obs - tolerance, side="left")
        l = np.searchsorted(ordered, obs + tolerance, side="right")
        wanted = np.zeros(n, dtype=bool)
        wanted[self_pos[group]] = True
        hit = np.flatnonzero(wanted[subsets.ravel()])
        hit_pos = subsets.ravel()[hit]
        order = np.argsort(hit_pos, kind="stable")
        out_g, out_l, out_n = _exclusions(hit_pos[order], sums[hit // k][order], self_pos[group], obs, tolerance)
        ge[group], le[group], valid[group] = g - out_g, l - out_l, extra - out_n
    return ge, le, valid


def _threads() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _run_kernel(z_sorted, self_pos, observed, k_rows, keys, permutations, tolerance):
    """The permutation kernel over all rows, on every core (threads; it releases the GIL)."""
    m = observed.size
    ge, le, done = (np.zeros(m, dtype=np.int64) for _ in range(3))
    stride = max(1, min(m, _threads()))
    args = (z_sorted, self_pos, observed, k_rows, keys, permutations, tolerance)
    if stride == 1:
        _permutation_counts(*args, 0, 1, ge, le, done)
        return ge, le, done
    with ThreadPoolExecutor(stride) as pool:
        jobs = [pool.submit(_permutation_counts, *args, first, stride, ge, le, done) for first in range(stride)]
        for job in jobs:
            job.result()
    return ge, le, done


def local_autocorrelation(
    values: np.ndarray,
    graph: NeighbourGraph,
    *,
    permutations: int = 999,
    seed: int = 0,
    refine: bool = True,
    keys: np.ndarray | None = None,
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
    self_pos = np.searchsorted(z_sorted, z[rows], side="left")
    observed, k_used = lag_sum[rows], k_rows[rows].astype(np.int64)
    ge, le, draws = _run_kernel(z_sorted, self_pos, observed, k_used, _stream_keys(identity, seed), int(permutations), tolerance)
    floor = np.minimum(ge, le) == 0
    if extended > permutations and floor.any():
        more_ge, more_le, more = _refine_at_floor(
            z_sorted, self_pos[floor], observed[floor], k_used[floor], extended - permutations, seed, tolerance
        )
        ge[floor] += more_ge
        le[floor] += more_le
        draws[floor] += more
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
