"""Tests of the history rules (pointsift.methods.history) on hand-built series."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats

from pointsift.methods.history import (
    constant_rule,
    copied_rule,
    history_screen,
    last_digit,
    range_rule,
    relative_series,
    seasonal_rule,
    series_statistics,
    spike_rule,
    step_rule,
    theil_sen,
)


def _wiggle(n: int, seed: int = 0, sd: float = 0.1) -> np.ndarray:
    """A quiet invented series: level 50 with small reading noise, rounded to 0.01."""
    return np.round(50.0 + np.random.default_rng(seed).normal(0, sd, n), 2)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_theil_sen_matches_scipy(seed):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1990, 2020, 40))
    v = 100 - 0.3 * (t - 1990) + rng.normal(0, 1, 40)
    v[[3, 17]] += 25.0  # outliers do not move a Theil-Sen slope much
    slope, intercept = theil_sen(t, v)
    # reference: scipy.stats.theilslopes (default method="separate")
    ref = scipy.stats.theilslopes(v, t)
    assert slope == pytest.approx(ref.slope, rel=1e-12)
    assert intercept == pytest.approx(ref.intercept, rel=1e-9)


def test_theil_sen_ties_in_time_and_too_short():
    t = np.array([0.0, 0.0, 1.0, 2.0])
    v = np.array([1.0, 2.0, 3.0, 5.0])
    # reference: scipy.stats.theilslopes leaves out pairs at equal times too
    assert theil_sen(t, v)[0] == pytest.approx(scipy.stats.theilslopes(v, t).slope)
    assert np.isnan(theil_sen(np.array([1.0]), np.array([2.0]))[0])


def test_series_statistics_against_scipy_mad():
    v = np.array([10.0, 10.4, 9.8, 10.1, 12.0, 10.2, 9.9])
    s = series_statistics(v)
    # reference: scipy.stats.median_abs_deviation with scale="normal" (1.4826 x MAD)
    assert s.change_sd == pytest.approx(scipy.stats.median_abs_deviation(np.diff(v), scale="normal"))
    assert s.level_sd == pytest.approx(scipy.stats.median_abs_deviation(v, scale="normal"))
    assert s.median == np.median(v)
    assert s.reading_sd == pytest.approx(s.change_sd / np.sqrt(2))


def test_spike_off_and_back():
    v = _wiggle(20)
    v[10] += 3.0
    u = relative_series(v)
    z, spike = spike_rule(u, series_statistics(u, 0.01).reading_sd)
    assert np.flatnonzero(spike).tolist() == [10]
    assert z[10] > 10


def test_step_is_not_a_spike_and_is_found_where_it_starts():
    v = _wiggle(24, seed=3)
    v[12:] += 4.0  # a changed reference point: every later reading moves
    u = relative_series(v)
    stats = series_statistics(u, 0.01)
    spike = spike_rule(u, stats.reading_sd)[1]
    assert not spike[10:14].any()  # the readings either side of the step are no spike
    z, step = step_rule(u, stats.reading_sd)
    assert np.flatnonzero(step).tolist() == [12]
    assert z[12] > 10


def test_slow_drift_is_no_step():
    # a random walk of small changes: the level moves, but never by a jump
    rng = np.random.default_rng(5)
    v = np.round(50 + np.cumsum(rng.normal(0, 0.15, 40)) + rng.normal(0, 0.05, 40), 2)
    u = relative_series(v)
    assert not step_rule(u, series_statistics(u, 0.01).reading_sd)[1].any()


def test_copied_record_found_and_coarse_series_left_alone():
    v = np.round(50 + np.random.default_rng(2).normal(0, 2.0, 15), 2)
    v[9] = v[4]
    stats = series_statistics(v, 0.01)
    assert copied_rule(v, stats.change_sd)[9] == 4
    # the same series written to whole units: equal readings are common by chance, not judged
    coarse = np.round(v)
    assert (copied_rule(coarse, 0.5) == -1).all()


def test_constant_run_and_last_digit():
    v = np.array([3.21, 3.5, 3.5, 3.5, 3.5, 3.5, 3.1])
    assert constant_rule(v).tolist() == [0, 5, 5, 5, 5, 5, 0]
    assert last_digit(v) == 0.01
    assert last_digit(np.array([10.0, 20.0])) == 1.0


def test_far_outside_the_own_range():
    v = _wiggle(30, seed=4, sd=0.5)
    v[20] = 80.0  # 60 robust sd away
    z, outside = range_rule(relative_series(v), 0.01)
    assert np.flatnonzero(outside).tolist() == [20]
    assert z[20] > 6


def test_seasonal_pattern_broken():
    years = np.repeat(np.arange(2000, 2012), 2)
    season = np.tile(["spring", "fall"], 12)
    v = np.where(season == "spring", 12.0, 10.0) + np.random.default_rng(0).normal(0, 0.1, 24)
    v[14] = 8.0  # spring of 2007 below its fall, usually 2 above
    out = seasonal_rule(v, years, season)
    assert np.flatnonzero(out["broken"]).tolist() == [14, 15]
    assert out["usual"] == pytest.approx(2.0, abs=0.2)
    assert out["seasons"] == ("spring", "fall")


def test_regional_movement_is_taken_out():
    # a basin-wide drop shared by the neighbours is no spike of this well
    regional = np.zeros(20)
    regional[8] = -5.0
    v = _wiggle(20, seed=7) + regional
    raw = relative_series(v)
    assert spike_rule(raw, series_statistics(raw, 0.01).reading_sd)[1][8]  # judged alone, it is a spike
    u = relative_series(v, regional)
    assert not spike_rule(u, series_statistics(u, 0.01).reading_sd)[1].any()


def test_too_few_campaigns_not_judged():
    v = _wiggle(5)
    v[2] += 9
    ev = history_screen(v, min_campaigns=6)
    assert not ev.judged and not ev.spike.any()
    ev = history_screen(np.append(v, 50.0), min_campaigns=6)
    assert ev.judged and ev.spike[2]
