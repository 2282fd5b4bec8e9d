"""Tests of pointsift.methods.variogram_fit: variogram models, weighted least-squares fits, anisotropy hint."""

from __future__ import annotations

import math

import numpy as np
import pytest
import skgstat
from scipy.spatial.distance import cdist
from variogram_references import simulate_field

from pointsift.methods.pairsearch import find_pairs
from pointsift.methods.variogram_empirical import empirical_variogram
from pointsift.methods.variogram_fit import anisotropy_hint, fit_variogram, practical_range, variogram_model


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


def test_too_few_classes_is_not_trustworthy():
    fit = fit_variogram([10.0, 20.0], [1.0, 2.0], [50, 50])
    assert not fit.trustworthy and "at least 3" in fit.reasons[0]


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
