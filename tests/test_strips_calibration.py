"""Calibration of the strips' mean-median statistic: the shipped null table and calibrate_u."""

import math

import numpy as np
import pytest
from scipy.stats import norm

from pointsift.errors import InputError
from pointsift.methods.strips_calibration import (
    TABLE_SIZES,
    Z_LEVELS,
    calibrate_u,
    null_abs_quantiles,
)

TWO_SIDED_3 = 2 * norm.sf(3.0)  # 0.0027, the false-flag rate of |z| > 3


def _mc_ratio(n, reps, seed):
    """Independent Monte Carlo of (mean - median) / (IQR / 1.349) with plain numpy percentiles."""
    x = np.random.default_rng(seed).standard_normal((reps, n))
    q25, med, q75 = np.percentile(x, [25, 50, 75], axis=1)
    return (x.mean(axis=1) - med) / ((q75 - q25) / 1.349)


@pytest.mark.parametrize("n", [5, 6, 9, 20, 37, 120])
def test_table_quantiles_match_an_independent_monte_carlo(n):
    reps = 40_000
    t = np.abs(_mc_ratio(n, reps, seed=1000 + n))
    q = null_abs_quantiles(n)
    for z in (1.0, 2.0, 3.0):
        nominal = 2 * norm.sf(z)
        exceed = np.mean(t > q[Z_LEVELS.index(z)])
        # Reference: seeded Monte Carlo (independent of the table's seed and code); 4 binomial SE.
        assert abs(exceed - nominal) < 4 * math.sqrt(nominal * (1 - nominal) / reps) + 1e-12, (n, z, exceed)


def test_asymptotic_rule_is_wrong_at_small_n_and_calibrated_rule_is_not():
    reps = 200_000
    t = _mc_ratio(5, reps, seed=55)
    asymptotic_u = t * math.sqrt(5 / (math.pi / 2 - 1))
    # Issue 3 (and Cressie 1993 sect. 2.2's asymptotic variance): |u| > 3 with the asymptote flags ~6 % at n = 5.
    assert 0.05 < np.mean(np.abs(asymptotic_u) > 3) < 0.07
    u = calibrate_u(t, 5)
    # Nominal two-sided 0.27 %, within 4 binomial SE.
    assert abs(np.mean(np.abs(u) > 3) - TWO_SIDED_3) < 4 * math.sqrt(TWO_SIDED_3 / reps)


FALSE_FLAG_SIZES = [5, 6, 7, 8, 10, 13, 16, 20, 25, 31, 40, 50, 64, 75, 100, 128, 150, 175, 200]


def test_false_flag_rate_on_gaussian_strips_is_nominal_for_n_5_to_200():
    reps = 50_000
    flagged = []
    for n in FALSE_FLAG_SIZES:
        u = calibrate_u(_mc_ratio(n, reps, seed=7 * n + 1), n)
        rate = np.mean(np.abs(u) > 3)
        flagged.append(rate)
        # Each size: within 4.5 binomial SE of the nominal 0.27 % (reference: the Gaussian tail, scipy.stats.norm).
        assert abs(rate - TWO_SIDED_3) < 4.5 * math.sqrt(TWO_SIDED_3 / reps), (n, rate)
    pooled = np.mean(flagged)
    assert abs(pooled - TWO_SIDED_3) < 4 * math.sqrt(TWO_SIDED_3 / (reps * len(FALSE_FLAG_SIZES)))


@pytest.mark.parametrize("n", [350, 2600])
def test_interpolated_and_asymptotic_sizes(n):
    # Sizes off the table (interpolated in 1/n, then towards the Gaussian asymptote): the |u| > 2 rate
    # should be the Gaussian 4.55 % (reference: scipy.stats.norm), within 4 binomial SE.
    assert n not in TABLE_SIZES
    reps = 10_000
    u = calibrate_u(_mc_ratio(n, reps, seed=n), n)
    nominal = 2 * norm.sf(2.0)
    assert abs(np.mean(np.abs(u) > 2) - nominal) < 4 * math.sqrt(nominal * (1 - nominal) / reps)


def test_calibrate_u_is_odd_monotone_and_keeps_nan():
    t = np.linspace(-3, 3, 61)
    u = calibrate_u(t, 12)
    # T is symmetric about 0 under the Gaussian null (mean - median changes sign with the data), so a
    # quantile mapping of it must be odd and strictly increasing.
    np.testing.assert_allclose(u, -u[::-1])
    assert np.all(np.diff(u) > 0)
    assert np.isnan(calibrate_u(np.nan, 12))
    with pytest.raises(InputError, match="calibrated from n = 5; got n = 4"):
        null_abs_quantiles(4)
