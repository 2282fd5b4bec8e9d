"""Calibration of the strips' mean-minus-median statistic: its null distribution at each strip size.

The statistic of a strip of n values is (Cressie 1993, *Statistics for
Spatial Data*, rev. ed., sect. 2.2)::

    T = (mean - median) / sigma_hat,   sigma_hat = IQR / 1.349

For Gaussian data ``T`` has mean 0 and, as n grows, variance
``(pi/2 - 1) / n``; the robust scale in the denominator gives it heavy tails
at small n. This module maps ``T`` through its own simulated null
distribution at the strip's n (:func:`build_null_table`, shipped in
:mod:`pointsift.methods._strips_null_table`) so that ``u`` is a
z-equivalent: ``P(|u| > z) = P(|Z| > z)`` for Gaussian data of any n. The
rules of the interpolation (between tabulated quantiles, between sizes above
200, and towards the asymptote beyond n = 2000) are set out in the docstring
of :mod:`pointsift.methods.strips`, which uses it.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from ..errors import InputError
from .summary import SIGMA_FROM_IQR

__all__ = [
    "calibrate_u",
    "null_abs_quantiles",
    "simulate_mean_median_ratio",
    "build_null_table",
    "NULL_TABLE_SEED",
    "Z_LEVELS",
    "TABLE_SIZES",
]

#: Seed of the simulation behind the shipped calibration table.
NULL_TABLE_SEED = 20261202
#: Two-sided Gaussian levels at which the null quantiles of ``|T|`` are tabulated.
Z_LEVELS: tuple[float, ...] = tuple(float(z) for z in np.round(np.arange(0.25, 3.5001, 0.25), 2))
#: Strip sizes in the calibration table.
TABLE_SIZES: tuple[int, ...] = tuple(range(5, 201)) + (250, 300, 400, 500, 750, 1000, 1500, 2000)

_ASYMPTOTIC_FACTOR = math.pi / 2.0 - 1.0



def _reps_for(n: int) -> int:
    if n <= 100:
        return 1_000_000
    if n <= 200:
        return 500_000
    return 200_000


def simulate_mean_median_ratio(n: int, reps: int, seed, chunk: int | None = None) -> np.ndarray:
    """Draw ``T = (mean - median) / (IQR / 1.349)`` for Gaussian samples of size n.

    This is the simulation behind the shipped calibration table.

    Parameters
    ----------
    n : int
        Sample (strip) size.
    reps : int
        Number of samples.
    seed : int, numpy.random.SeedSequence or numpy.random.Generator
        Seed of the draws.
    chunk : int, optional
        Samples per batch (memory bound).

    Returns
    -------
    ndarray of float, shape (reps,)
    """
    n = int(n)
    rng = np.random.default_rng(seed)
    h = np.array([0.25, 0.5, 0.75]) * (n - 1)
    lo = np.floor(h).astype(np.intp)
    hi = np.ceil(h).astype(np.intp)
    frac = h - lo
    kth = np.unique(np.r_[lo, hi])
    if chunk is None:
        chunk = max(1000, 4_000_000 // n)
    out = np.empty(reps)
    done = 0
    while done < reps:
        m = min(chunk, reps - done)
        x = rng.standard_normal((m, n), dtype=np.float32)
        mean = x.mean(axis=1, dtype=np.float64)
        part = np.partition(x, kth, axis=1).astype(np.float64)
        q = part[:, lo] * (1 - frac) + part[:, hi] * frac
        out[done : done + m] = (mean - q[:, 1]) / ((q[:, 2] - q[:, 0]) / SIGMA_FROM_IQR)
        done += m
    return out


def _null_row(n: int) -> tuple[int, int, np.ndarray]:
    from scipy.stats import norm

    reps = _reps_for(n)
    seed = np.random.SeedSequence([NULL_TABLE_SEED, n])
    t = np.abs(simulate_mean_median_ratio(n, reps, np.random.default_rng(seed)))
    probs = 1.0 - 2.0 * norm.sf(np.asarray(Z_LEVELS))
    return n, reps, np.quantile(t, probs)


def build_null_table(sizes=TABLE_SIZES, processes: int = 1) -> dict:
    """Simulate the calibration table (about 15 minutes on 2 cores for the full table).

    Parameters
    ----------
    sizes : sequence of int
        Strip sizes to tabulate.
    processes : int
        Worker processes.

    Returns
    -------
    dict
        ``{"seed", "z_levels", "sizes", "reps", "quantiles"}``; ``quantiles[i][k]``
        is the quantile of ``|T|`` at n = ``sizes[i]`` exceeded with the
        probability that ``|Z|`` exceeds ``z_levels[k]``.
    """
    sizes = [int(n) for n in sizes]
    if processes > 1:
        from multiprocessing import Pool

        with Pool(processes) as pool:
            rows = pool.map(_null_row, sorted(sizes, key=lambda n: -n * _reps_for(n)), chunksize=1)
    else:
        rows = [_null_row(n) for n in sizes]
    rows.sort(key=lambda row: row[0])
    return {
        "seed": NULL_TABLE_SEED,
        "z_levels": list(Z_LEVELS),
        "sizes": [row[0] for row in rows],
        "reps": [row[1] for row in rows],
        "quantiles": [[float(f"{v:.6g}") for v in row[2]] for row in rows],
    }


@lru_cache(maxsize=1)
def _table() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    from . import _strips_null_table as shipped

    sizes = np.asarray(shipped.SIZES, dtype=float)
    quantiles = np.asarray(shipped.QUANTILES, dtype=float)
    z = np.asarray(shipped.Z_LEVELS, dtype=float)
    return sizes, quantiles, z


def null_abs_quantiles(n: int) -> np.ndarray:
    """Null quantiles of ``|T|`` for strips of n Gaussian values, at :data:`Z_LEVELS`.

    Parameters
    ----------
    n : int
        Strip size, at least 5.

    Returns
    -------
    ndarray of float, shape (len(Z_LEVELS),)
        From the shipped table, interpolated above n = 200 (see the module
        docstring).
    """
    n = int(n)
    sizes, quantiles, z = _table()
    if n < sizes[0]:
        raise InputError(f"The mean-median statistic is calibrated from n = {int(sizes[0])}; got n = {n}.")
    exact = np.searchsorted(sizes, n)
    if exact < sizes.size and sizes[exact] == n:
        return quantiles[exact].copy()
    scaled = quantiles * np.sqrt(sizes)[:, None]
    if n > sizes[-1]:
        lo_inv, hi_inv = 0.0, 1.0 / sizes[-1]
        lo_q, hi_q = z * math.sqrt(_ASYMPTOTIC_FACTOR), scaled[-1]
    else:
        lo_inv, hi_inv = 1.0 / sizes[exact], 1.0 / sizes[exact - 1]
        lo_q, hi_q = scaled[exact], scaled[exact - 1]
    w = (1.0 / n - lo_inv) / (hi_inv - lo_inv)
    return (lo_q + w * (hi_q - lo_q)) / math.sqrt(n)


def calibrate_u(t, n) -> np.ndarray:
    """Turn ``T = (mean - median) / (IQR / 1.349)`` into the calibrated z-equivalent ``u``.

    Parameters
    ----------
    t : array_like of float
        Values of ``T``.
    n : int or array_like of int
        Strip size of each ``t`` (broadcast), at least 5.

    Returns
    -------
    ndarray of float
        ``u`` with ``P(|u| > z) = P(|Z| > z)`` under Gaussian data (for
        ``z <= 3.5``); NaN where ``t`` is NaN.

    Examples
    --------
    >>> float(calibrate_u(0.0, 10))
    0.0

    At n = 5 a mean one robust sd above the median is unremarkable, although
    the asymptotic formula ``T sqrt(n / (pi/2 - 1))`` would give 2.96:

    >>> round(float(calibrate_u(1.0, 5)), 1)
    1.9
    >>> round(float(calibrate_u(-0.3, 50)), 1)  # at n = 50 close to the asymptote (-2.81)
    -2.8
    """
    t, n = np.broadcast_arrays(np.asarray(t, dtype=float), np.asarray(n))
    out = np.full(t.shape, np.nan)
    _, _, z = _table()
    knots_z = np.r_[0.0, z]
    for size in np.unique(n[np.isfinite(t)]):
        sel = (n == size) & np.isfinite(t)
        q = null_abs_quantiles(int(size))
        knots_t = np.r_[0.0, q]
        magnitude = np.abs(t[sel])
        mapped = np.interp(magnitude, knots_t, knots_z)
        beyond = magnitude > q[-1]
        mapped[beyond] = z[-1] * magnitude[beyond] / q[-1]
        out[sel] = np.sign(t[sel]) * mapped
    return out
