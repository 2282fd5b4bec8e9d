"""Tests of pointsift.methods.variogram: the analysis, screen hints and figures (estimators: test_variogram_empirical.py; fits: test_variogram_fit.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial.distance import cdist
from variogram_references import load_meuse, simulate_field

from pointsift.methods.variogram import (
    analyse_variogram,
    expected_difference_sd,
    fit_variogram,
    neighbourhood_from_fit,
    plot_sqrt_difference_cloud,
    plot_variogram,
    plot_variogram_cloud,
    variogram_model,
)

@pytest.fixture(scope="module")
def meuse():
    """log(zinc) of the meuse data shipped by scikit-gstat (skgstat.data.meuse)."""
    return load_meuse()


# --------------------------------------------------------------------------- models

def test_single_realisation_fit_is_trusted_and_sets_a_neighbourhood():
    xy, z, _ = simulate_field(400, "exponential", 0.1, 1.0, 6.0, realisations=1, seed=3)
    res = analyse_variogram(xy, z[:, 0], edges=np.arange(13) * 4.0, model="exponential")
    assert res.fit.trustworthy, res.fit.reasons
    hint = neighbourhood_from_fit(res.fit)
    assert hint.usable and hint.distance == pytest.approx(res.fit.practical_range)
    # true practical range 18; one realisation of 400 points: generous tolerance
    assert 9.0 < hint.distance < 36.0
    info = res.run_info()
    assert info["model"]["trustworthy"] and info["neighbourhood"]["usable"]
    assert info["pair_search"]["sampled"] is False


def test_pure_noise_is_not_trustworthy_and_falls_back():
    rng = np.random.default_rng(8)
    xy = rng.uniform(0, 100, (300, 2))
    res = analyse_variogram(xy, rng.normal(size=300))
    assert not res.fit.trustworthy
    hint = neighbourhood_from_fit(res.fit)
    assert hint.distance is None and hint.difference_sd(10.0) is None
    assert "not trustworthy" in hint.reason
    assert any(r.startswith("failed:") for r in res.fit.reasons)
    assert neighbourhood_from_fit(None).distance is None


def test_expected_difference_scales_follow_the_covariance():
    nugget, psill, a = 0.2, 1.0, 8.0
    xy, _, cov = simulate_field(60, "exponential", nugget, psill, a, realisations=1, seed=1)
    h = np.linspace(5, 150, 15)
    fit = fit_variogram(h, variogram_model("exponential", h, nugget, psill, a), np.full(15, 100),
                        model="exponential", cutoff=155.0)
    # Var(Z_i - Z_j) = C_ii + C_jj - 2 C_ij, straight from the covariance matrix (reference)
    d = cdist(xy, xy)
    i, j = 0, 1
    assert expected_difference_sd(fit, d[i, j]) == pytest.approx(math.sqrt(cov[i, i] + cov[j, j] - 2 * cov[i, j]),
                                                                 rel=1e-6)


def test_variogram_pair_budget_is_reported():
    rng = np.random.default_rng(2)
    xy = rng.uniform(0, 100, (600, 2))
    res = analyse_variogram(xy, xy[:, 0] * 0.1 + rng.normal(size=600), pair_budget=5000, seed=4)
    ps = res.run_info()["pair_search"]
    assert ps["sampled"] and ps["pairs_used"] <= 5000 < ps["pairs_in_reach"]
    assert res.table["pairs"][res.table["direction"] == "all"].sum() // 2 <= 5000


def test_figures_are_made(meuse):
    xy, z = meuse
    res = analyse_variogram(xy, z)
    fig = plot_variogram(res)
    assert len(fig.axes) == 2 and len(fig.axes[1].get_lines()) >= 4
    cloud = plot_variogram_cloud(res.empirical, max_points=1000)
    assert len(cloud.axes[0].collections[0].get_offsets()) == 1000
    root = plot_sqrt_difference_cloud(res.empirical)
    assert len(root.axes[0].collections[0].get_offsets()) == int((res.empirical.pairs.distance > 0).sum())


def test_run_info_is_strict_json_even_when_the_fit_fails():
    import json

    xy = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    res = analyse_variogram(xy, np.array([1.0, 2.0, 3.0]), lag_count=2)
    assert not res.fit.trustworthy
    text = json.dumps(res.run_info(), allow_nan=False)  # raises on NaN
    assert '"trustworthy": false' in text


def test_estimator_and_fit_names_stay_importable_from_variogram():
    # The estimators and the fits moved to their own modules; callers that import
    # them from variogram keep working (the same objects).
    import pointsift.methods.variogram as variogram
    import pointsift.methods.variogram_empirical as empirical
    import pointsift.methods.variogram_fit as fitting

    for module in (empirical, fitting):
        for name in module.__all__:
            assert getattr(variogram, name) is getattr(module, name), name
    assert set(variogram.__all__) <= set(dir(variogram))
