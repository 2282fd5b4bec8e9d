"""Tests of pointsift.methods.variogram_empirical: lag classes and the Matheron / Cressie-Hawkins estimators."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import skgstat
from scipy.spatial.distance import cdist
from variogram_references import GSTAT_MEUSE_LOG_ZINC, MEUSE_WIDTH, load_meuse

from pointsift.errors import ConfigError
from pointsift.methods.variogram_empirical import (
    cressie_hawkins,
    empirical_variogram,
    lag_edges,
    matheron,
    variogram_table,
)


@pytest.fixture(scope="module")
def meuse():
    """log(zinc) of the meuse data shipped by scikit-gstat (skgstat.data.meuse)."""
    return load_meuse()


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
