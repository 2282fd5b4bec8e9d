"""Global summary figures against numpy/scipy/pandas and a published summary of the meuse zinc data."""

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from pointsift.errors import InputError
from pointsift.methods.summary import (
    global_summary,
    histogram_bin_width,
    plot_histogram,
    summary_shift,
)


def _meuse_zinc():
    skgstat = pytest.importorskip("skgstat")
    _, zinc = skgstat.data.meuse(variable="zinc")["sample"]
    return np.asarray(zinc, dtype=float).ravel()


SAMPLES = {
    "lognormal_40": np.random.default_rng(1).lognormal(3.0, 0.8, 40),
    "normal_7": np.random.default_rng(2).normal(10.0, 2.0, 7),
    "with_ties_12": np.array([3, 3, 3, 4, 4, 5, 6, 6, 9, 12, 12, 30], dtype=float),
    "negative_25": np.random.default_rng(3).normal(-50.0, 15.0, 25),
}


@pytest.mark.parametrize("name", sorted(SAMPLES))
def test_figures_match_reference_libraries(name):
    x = SAMPLES[name]
    s = global_summary(x)
    series = pd.Series(x)
    # Reference: pandas (ddof=1 variance, adjusted skew G1 and excess kurtosis G2).
    assert s.n == series.count()
    assert s.mean == pytest.approx(series.mean(), rel=1e-12)
    assert s.variance == pytest.approx(series.var(), rel=1e-12)
    assert s.sd == pytest.approx(series.std(), rel=1e-12)
    assert s.skewness == pytest.approx(series.skew(), rel=1e-10)
    assert s.kurtosis == pytest.approx(series.kurt(), rel=1e-10)
    # Reference: scipy.stats, unbiased (bias=False) skewness and Fisher kurtosis.
    assert s.skewness == pytest.approx(stats.skew(x, bias=False), rel=1e-10)
    assert s.kurtosis == pytest.approx(stats.kurtosis(x, fisher=True, bias=False), rel=1e-10)
    # Reference: numpy linear percentiles (R type 7) and scipy's IQR / MAD.
    for field, q in (("p05", 5), ("p25", 25), ("median", 50), ("p75", 75), ("p95", 95)):
        assert getattr(s, field) == pytest.approx(np.percentile(x, q), rel=1e-12)
    assert s.iqr == pytest.approx(stats.iqr(x), rel=1e-12)
    assert s.mad == pytest.approx(stats.median_abs_deviation(x), rel=1e-12)
    # scipy's "normal" MAD scale is 1 / 0.67449 = 1.482602..., the 1.4826 quoted in the docstring.
    assert s.robust_sd_mad == pytest.approx(stats.median_abs_deviation(x, scale="normal"), rel=1e-4)
    assert s.robust_sd_iqr == pytest.approx(stats.iqr(x) / 1.349, rel=1e-12)
    assert (s.min, s.max) == (x.min(), x.max())


def test_meuse_zinc_matches_published_summary():
    zinc = _meuse_zinc()
    s = global_summary(zinc)
    # Reference: R sf package documentation, summary(meuse$zinc):
    # Min 113, 1st Qu. 198, Median 326, Mean 469.7, 3rd Qu. 674.5, Max 1839 (155 samples).
    assert s.n == 155
    assert (s.min, s.p25, s.median, s.p75, s.max) == (113.0, 198.0, 326.0, 674.5, 1839.0)
    assert round(s.mean, 1) == 469.7


def test_nan_and_inf_are_left_out_and_counted():
    x = np.array([1.0, np.nan, 2.0, np.inf, 4.0, -np.inf])
    s = global_summary(x)
    # Reference: numpy on the finite values only.
    assert (s.n, s.n_missing) == (3, 3)
    assert s.mean == pytest.approx(np.mean([1.0, 2.0, 4.0]))


def test_degenerate_inputs():
    empty = global_summary([np.nan])
    assert empty.n == 0 and math.isnan(empty.mean)
    one = global_summary([5.0])
    # n - 1 denominator: undefined for one value (pandas gives NaN too).
    assert one.median == 5.0 and math.isnan(one.sd) and np.isnan(pd.Series([5.0]).std())
    equal = global_summary([7.0] * 6)
    # No spread: sd 0, shape undefined (scipy returns NaN skewness for constant data as well).
    assert equal.sd == 0.0 and math.isnan(equal.skewness) and math.isnan(equal.kurtosis)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # scipy warns about the cancellation
        assert np.isnan(stats.skew(np.full(6, 7.0), bias=False))


def test_summary_shift_equals_summary_of_kept_values():
    rng = np.random.default_rng(5)
    x = rng.normal(100.0, 5.0, 60)
    x[[3, 17]] = [400.0, -250.0]
    x[20] = np.nan
    mask = np.zeros(60, dtype=bool)
    mask[[3, 17, 20]] = True
    shift = summary_shift(x, mask)
    kept = pd.Series(np.delete(x, [3, 17, 20]))
    every = pd.Series(x).dropna()
    # Reference: pandas on the values with and without the suspects.
    assert shift.n_suspects == 2
    assert shift.without_suspects.mean == pytest.approx(kept.mean(), rel=1e-12)
    assert shift.mean_shift == pytest.approx(kept.mean() - every.mean(), rel=1e-10)
    assert shift.sd_shift == pytest.approx(kept.std() - every.std(), rel=1e-10)
    assert shift.sd_shift_ratio == pytest.approx(kept.std() / every.std(), rel=1e-10)
    assert shift.table().loc["n"].tolist() == [59, 57]


def test_summary_shift_rejects_mask_of_wrong_length():
    with pytest.raises(InputError, match="suspect_mask has 2 entries but there are 3 values"):
        summary_shift([1.0, 2.0, 3.0], [True, False])


def test_freedman_diaconis_width_matches_numpy():
    x = SAMPLES["lognormal_40"]
    # Reference: numpy.histogram_bin_edges(bins="fd") uses 2 IQR n^(-1/3).
    edges = np.histogram_bin_edges(x, bins="fd")
    numpy_width = edges[1] - edges[0]
    ours = histogram_bin_width(x)
    n_bins = math.ceil((x.max() - x.min()) / ours)
    assert (x.max() - x.min()) / n_bins == pytest.approx(numpy_width, rel=1e-9)
    assert histogram_bin_width(x, 2.5) == 2.5
    with pytest.raises(InputError, match="bin_width must be a positive number, got -1"):
        histogram_bin_width(x, -1)


def test_plot_histogram_draws_all_values():
    x = SAMPLES["lognormal_40"]
    fig = plot_histogram(x, label="level_m")
    ax = fig.axes[0]
    heights = [patch.get_height() for patch in ax.patches]
    # Every value lands in a bar; the title names the rule (common practice: say the bin rule).
    assert sum(heights) == x.size
    assert "Freedman-Diaconis" in ax.get_title()
