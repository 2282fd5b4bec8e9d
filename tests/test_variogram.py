"""Tests of pointsift.methods.variogram: estimators, lag classes, model fits, screen hints."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import skgstat
from scipy.spatial.distance import cdist

from pointsift.errors import ConfigError
from pointsift.methods.lagpairs import find_pairs
from pointsift.methods.variogram import (
    anisotropy_hint,
    analyse_variogram,
    cressie_hawkins,
    empirical_variogram,
    expected_difference_sd,
    fit_variogram,
    lag_edges,
    matheron,
    neighbourhood_from_fit,
    plot_sqrt_difference_cloud,
    plot_variogram,
    plot_variogram_cloud,
    practical_range,
    variogram_model,
    variogram_table,
)

# gstat R package, tests/variogram.Rout.save (r-spatial/gstat, commit
# 9b299a2045d1d01d4626a628248b49275529b2a2): variogram(log(zinc) ~ 1, ~x+y, meuse),
# default cutoff and width; columns np, dist, gamma.
GSTAT_MEUSE_LOG_ZINC = [
    (57, 79.29244, 0.1234479),
    (299, 163.97367, 0.2162185),
    (419, 267.36483, 0.3027859),
    (457, 372.73542, 0.4121448),
    (547, 478.47670, 0.4634128),
    (533, 585.34058, 0.5646933),
    (574, 693.14526, 0.5689683),
    (564, 796.18365, 0.6186769),
    (589, 903.14650, 0.6471479),
    (543, 1011.29177, 0.6915705),
    (500, 1117.86235, 0.7033984),
    (477, 1221.32810, 0.6038770),
    (452, 1329.16407, 0.6517158),
    (457, 1437.25620, 0.5665318),
    (415, 1543.20248, 0.5748227),
]
MEUSE_WIDTH = 106.4415  # gstat's default class width for meuse (cutoff diagonal/3 over 15 classes)


@pytest.fixture(scope="module")
def meuse():
    """log(zinc) of the meuse data shipped by scikit-gstat (skgstat.data.meuse)."""
    xy, z = skgstat.data.meuse("zinc")["sample"]
    return xy.astype(float), np.log(z.ravel().astype(float))


@pytest.fixture(scope="module")
def meuse_variogram(meuse):
    xy, z = meuse
    return empirical_variogram(xy, z, MEUSE_WIDTH * np.arange(16))


# --------------------------------------------------------------------------- estimators on meuse

def test_matheron_meuse_log_zinc_matches_gstat(meuse_variogram):
    got = meuse_variogram.curve("all", "matheron")
    ref = pd.DataFrame(GSTAT_MEUSE_LOG_ZINC, columns=["np", "dist", "gamma"])
    # gstat tests/variogram.Rout.save: pair counts exactly, gamma and mean distance to the printed digits
    np.testing.assert_array_equal(got["pairs"], ref["np"])
    np.testing.assert_allclose(got["gamma"], ref["gamma"], rtol=0, atol=5e-8)
    np.testing.assert_allclose(got["mean_distance"], ref["dist"], rtol=0, atol=5e-6)
    assert got["gamma"].iloc[0] == pytest.approx(0.1234479, abs=5e-8)
    assert got["gamma"].iloc[-1] == pytest.approx(0.5748227, abs=5e-8)


def test_default_lag_classes_reproduce_gstat_defaults_on_meuse(meuse):
    # gstat's defaults (from memory): cutoff = bounding-box diagonal / 3, 15 classes;
    # for meuse this is the width 106.4415 that reproduces the Rout.save counts above.
    e = lag_edges(meuse[0])
    assert e.size == 16
    assert e[1] == pytest.approx(MEUSE_WIDTH, abs=5e-5)


def test_matheron_meuse_matches_skgstat_on_the_same_edges(meuse, meuse_variogram):
    xy, z = meuse
    upper = MEUSE_WIDTH * np.arange(1, 16)
    # skgstat classes are [lo, hi) given by upper edges; meuse has no pair exactly on an edge
    # and no coincident points, so its classes hold the same pairs as our (lo, hi].
    v = skgstat.Variogram(xy, z, estimator="matheron", bin_func=upper, fit_method=None)
    got = meuse_variogram.curve("all", "matheron")
    np.testing.assert_array_equal(got["pairs"], v.bin_count)
    np.testing.assert_allclose(got["gamma"], v.experimental, rtol=1e-12)


def test_cressie_hawkins_meuse_matches_the_formula(meuse, meuse_variogram):
    xy, z = meuse
    d = cdist(xy, xy)
    iu = np.triu_indices(len(z), k=1)
    dist, dz = d[iu], (z[:, None] - z[None, :])[iu]
    got = meuse_variogram.curve("all", "cressie_hawkins")
    for k in range(15):
        sel = (dist > MEUSE_WIDTH * k) & (dist <= MEUSE_WIDTH * (k + 1))
        n = sel.sum()
        # Cressie (1993) eq. 2.4.12 gives 2*gamma; the semivariogram is half of it
        ref = (np.mean(np.abs(dz[sel]) ** 0.5) ** 4 / (0.457 + 0.494 / n)) / 2
        assert got["gamma"].iloc[k] == pytest.approx(ref, rel=1e-12)
        assert cressie_hawkins(dz[sel]) == pytest.approx(ref, rel=1e-12)
        assert matheron(dz[sel]) == pytest.approx(np.sum(dz[sel] ** 2) / (2 * n), rel=1e-12)


def test_cressie_hawkins_meuse_close_to_skgstat(meuse, meuse_variogram):
    xy, z = meuse
    upper = MEUSE_WIDTH * np.arange(1, 16)
    v = skgstat.Variogram(xy, z, estimator="cressie", bin_func=upper, fit_method=None)
    got = meuse_variogram.curve("all", "cressie_hawkins")["gamma"].to_numpy()
    n = np.asarray(v.bin_count, dtype=float)
    # skgstat follows Cressie & Hawkins (1980): denominator 0.457 + 0.494/N + 0.045/N^2;
    # Cressie (1993) eq. 2.4.12 drops the last term. With N >= 57 pairs the relative
    # difference is at most 0.045/57^2/0.466 = 3.0e-5, hence rtol 1e-4 ...
    np.testing.assert_allclose(got, v.experimental, rtol=1e-4)
    # ... and after putting the term back the two agree to rounding.
    corrected = got * (0.457 + 0.494 / n) / (0.457 + 0.494 / n + 0.045 / n**2)
    np.testing.assert_allclose(corrected, v.experimental, rtol=1e-12)


def test_directional_matheron_meuse_equals_brute_force(meuse, meuse_variogram):
    xy, z = meuse
    i, j = np.triu_indices(len(z), k=1)
    dx, dy = xy[j, 0] - xy[i, 0], xy[j, 1] - xy[i, 1]
    dist = np.hypot(dx, dy)
    az = np.degrees(np.arctan2(dx, dy)) % 180.0  # axial azimuth, either orientation gives the same value
    dz = z[j] - z[i]
    for direction in (0.0, 45.0, 90.0, 135.0):
        off = np.abs((az - direction + 90.0) % 180.0 - 90.0)
        got = meuse_variogram.curve(f"{direction:g}", "matheron")
        for k in range(15):
            sel = (off <= 22.5) & (dist > MEUSE_WIDTH * k) & (dist <= MEUSE_WIDTH * (k + 1))
            assert got["pairs"].iloc[k] == sel.sum()  # numpy all-pairs reference
            assert got["gamma"].iloc[k] == pytest.approx(np.mean(dz[sel] ** 2) / 2, rel=1e-12)


def test_variogram_table_columns_and_labels(meuse_variogram):
    t = variogram_table(meuse_variogram)
    assert list(t.columns) == ["direction", "estimator", "lag_low", "lag_high", "mean_distance", "pairs", "gamma"]
    assert set(t["direction"]) == {"all", "90", "45", "0", "135"}
    assert set(t["estimator"]) == {"matheron", "cressie_hawkins"}
    assert len(t) == 5 * 2 * 15
    first = t.iloc[0]
    assert first["lag_low"] == 0 and first["lag_high"] == pytest.approx(MEUSE_WIDTH)


def test_empty_classes_and_coincident_pairs():
    xy = np.array([[0.0, 0.0], [0.0, 0.0], [3.0, 0.0], [50.0, 0.0]])
    v = np.array([1.0, 2.0, 4.0, 8.0])
    emp = empirical_variogram(xy, v, [0.0, 5.0, 10.0], directions=())
    c = emp.curve("all", "matheron")
    # pairs at separation 0 belong to no class (0, 5]; (10, ...] reaches nothing
    assert c["pairs"].tolist() == [2, 0]
    assert c["gamma"].iloc[0] == pytest.approx(((4 - 1) ** 2 + (4 - 2) ** 2) / 4)
    assert math.isnan(c["gamma"].iloc[1]) and math.isnan(c["mean_distance"].iloc[1])


def test_lag_edges_options():
    assert lag_edges(lag_count=3, lag_width=2.0).tolist() == [0.0, 2.0, 4.0, 6.0]
    xy = np.array([[0.0, 0.0], [30.0, 40.0], [10, 10]])  # diagonal 50, cutoff 16.67
    assert lag_edges(xy, lag_width=5.0).tolist() == [0.0, 5.0, 10.0, 15.0, 20.0]
    np.testing.assert_allclose(lag_edges(xy, lag_count=4), np.arange(5) * 50 / 12)
    with pytest.raises(ConfigError, match="strictly increasing"):
        lag_edges(edges=[0, 10, 5])
    with pytest.raises(ConfigError, match="not both"):
        lag_edges(edges=[0, 10], lag_count=3)


# --------------------------------------------------------------------------- models

@pytest.mark.parametrize("model", ["spherical", "exponential", "gaussian"])
def test_models_match_skgstat(model):
    h = np.linspace(0.5, 60, 40)
    a, c0, c = 12.0, 0.3, 1.7
    ours = variogram_model(model, h, c0, c, a)
    # skgstat.models take the effective range r: spherical r = a, exponential r = 3a, gaussian r = 2a
    r = {"spherical": a, "exponential": 3 * a, "gaussian": 2 * a}[model]
    ref = np.array([getattr(skgstat.models, model)(x, r, c, c0) for x in h])
    np.testing.assert_allclose(ours, ref, rtol=1e-12)
    assert variogram_model(model, [0.0], c0, c, a)[0] == 0.0


def test_practical_range_reaches_95_percent_of_the_sill():
    # definition of practical range (Cressie 1993 sec. 2.3.1, from memory): about 95 % of the sill
    for model, expected in (("exponential", 1 - math.exp(-3)), ("gaussian", 1 - math.exp(-3)), ("spherical", 1.0)):
        r = practical_range(model, 10.0)
        assert variogram_model(model, [r], 0.0, 1.0, 10.0)[0] == pytest.approx(expected)


@pytest.mark.parametrize("model", ["spherical", "exponential", "gaussian"])
def test_fit_recovers_exact_model_values(model):
    h = np.linspace(5, 150, 15)
    g = variogram_model(model, h, 0.4, 2.0, 40.0)
    fit = fit_variogram(h, g, np.full(15, 200), model=model, cutoff=155.0)
    assert fit.converged and fit.trustworthy
    assert fit.nugget == pytest.approx(0.4, abs=1e-4)
    assert fit.partial_sill == pytest.approx(2.0, rel=1e-4)
    assert fit.range_parameter == pytest.approx(40.0, rel=1e-4)
    auto = fit_variogram(h, g, np.full(15, 200), model="auto", cutoff=155.0)
    assert auto.model == model
    assert set(auto.candidates) == {"spherical", "exponential", "gaussian"}


def simulate_field(n, model, nugget, psill, a, realisations, seed):
    """Gaussian random field at n random points by Cholesky factorisation of the known covariance.

    Covariance C(h) = psill * (1 - structure(h)) plus nugget on the diagonal (iid error).
    """
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, (n, 2))
    d = cdist(xy, xy)
    cov = psill - (variogram_model(model, d, 0.0, psill, a))
    cov[np.diag_indices(n)] = psill + nugget
    chol = np.linalg.cholesky(cov + 1e-10 * np.eye(n))
    z = chol @ rng.standard_normal((n, realisations))
    return xy, z, cov


@pytest.mark.parametrize("model", ["exponential", "spherical"])
def test_fit_recovers_parameters_of_a_simulated_random_field(model):
    nugget, psill, a = 0.2, 1.0, {"exponential": 8.0, "spherical": 25.0}[model]
    xy, z, _ = simulate_field(250, model, nugget, psill, a, realisations=60, seed=42)
    edges = np.arange(13) * 4.0
    pairs = find_pairs(xy, float(edges[-1]))
    curves = [empirical_variogram(xy, z[:, r], edges, directions=(), pairs=pairs).curve("all", "matheron")
              for r in range(z.shape[1])]
    gamma = np.mean([c["gamma"].to_numpy() for c in curves], axis=0)
    c = curves[0]
    # Matheron's estimator is unbiased, so the mean over 60 realisations is close to the known model
    fit = fit_variogram(c["mean_distance"], gamma, c["pairs"], model=model, cutoff=float(edges[-1]))
    assert fit.converged and fit.trustworthy
    assert fit.nugget == pytest.approx(nugget, abs=0.08)
    assert fit.sill == pytest.approx(nugget + psill, rel=0.15)
    assert fit.range_parameter == pytest.approx(a, rel=0.2)


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


def test_too_few_classes_is_not_trustworthy():
    fit = fit_variogram([10.0, 20.0], [1.0, 2.0], [50, 50])
    assert not fit.trustworthy and "at least 3" in fit.reasons[0]


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


def directional_fits_of_mean_variograms(stretch, seed, realisations=30):
    """Exponential field (range 3) on coordinates divided by (stretch, 1), Cholesky-simulated;
    directional Matheron variograms averaged over realisations, then fitted per direction."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, (400, 2))
    d = cdist(xy / np.array([stretch, 1.0]), xy / np.array([stretch, 1.0]))
    z = np.linalg.cholesky(np.exp(-d / 3.0) + 1e-9 * np.eye(400)) @ rng.standard_normal((400, realisations))
    edges = np.arange(17) * 2.5
    pairs = find_pairs(xy, float(edges[-1]))
    tables = [empirical_variogram(xy, z[:, r], edges, pairs=pairs).table for r in range(realisations)]
    fits = {}
    for label in ("90", "45", "0", "135"):
        rows = [t[(t["direction"] == label) & (t["estimator"] == "matheron")] for t in tables]
        gamma = np.mean([r["gamma"].to_numpy() for r in rows], axis=0)
        fits[label] = fit_variogram(rows[0]["mean_distance"], gamma, rows[0]["pairs"], model="exponential",
                                    cutoff=float(edges[-1]), direction=label)
    return fits


def test_anisotropy_hint_on_a_stretched_field():
    # ranges 3x longer W-E than S-N by construction: practical ranges 27 and 9
    an = anisotropy_hint(directional_fits_of_mean_variograms(3.0, seed=21))
    assert an["hint"], an
    assert an["major_direction"] == "90" and an["minor_direction"] == "0"
    assert an["ratio"] == pytest.approx(3.0, rel=0.3)


def test_no_anisotropy_hint_on_an_isotropic_field():
    an = anisotropy_hint(directional_fits_of_mean_variograms(1.0, seed=22))
    assert an["ratio"] is not None and not an["hint"], an


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
