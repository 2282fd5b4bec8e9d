"""Median polish and robust trend surfaces against published and library references."""

import numpy as np
import pandas as pd
import pytest

from pointsift.errors import ConfigError, InputError
from pointsift.methods.trend import (
    median_polish,
    median_polish_surface,
    surface_design,
    trend_surface,
)

# Mosteller and Tukey (1977), *Data Analysis and Regression*, p. 168: monthly normal temperatures (deg F),
# rows Caribou, Washington, Laredo; columns January to July. Transcribed from the public R notebook
# smithjd "medpol" (GitHub), which also prints R's stats::medpolish of the table (rows swept first):
# overall 54.4, row effects -19.7 / 0.0 / 21.5, column effects -18.3 -17.3 -9.1 0.0 10.3 19.0 22.9.
TEMPERATURES = np.array(
    [
        [8.7, 9.8, 21.7, 34.7, 48.5, 58.4, 64.0],
        [36.2, 37.1, 45.3, 54.4, 64.7, 73.4, 77.3],
        [57.6, 61.9, 68.4, 75.9, 81.2, 85.8, 87.7],
    ]
)


def test_median_polish_temperature_table_rows_first():
    fit = median_polish(TEMPERATURES)
    # Reference: Mosteller and Tukey 1977 p. 168 table, polished by R medpolish (see TEMPERATURES).
    assert fit.overall == pytest.approx(54.4, abs=1e-9)
    np.testing.assert_allclose(fit.row_effects, [-19.7, 0.0, 21.5], atol=1e-9)
    np.testing.assert_allclose(fit.column_effects, [-18.3, -17.3, -9.1, 0.0, 10.3, 19.0, 22.9], atol=1e-9)
    np.testing.assert_allclose(
        fit.residuals,
        [
            [-7.7, -7.6, -3.9, 0.0, 3.5, 4.7, 6.4],
            [0.1, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
            [0.0, 3.3, 1.6, 0.0, -5.0, -9.1, -11.1],
        ],
        atol=1e-9,
    )
    assert fit.converged


@pytest.mark.parametrize("sweep_first", ["rows", "columns"])
def test_median_polish_defining_property(sweep_first):
    # Defining property (Tukey 1977, ch. 11): at convergence every row and column median of the
    # residuals is zero, and fit + residual reproduces the table.
    for table in (TEMPERATURES, np.random.default_rng(7).normal(0, 1, (6, 9)) + np.arange(9)):
        fit = median_polish(table, sweep_first=sweep_first, max_iter=200, tol=0.0)
        np.testing.assert_allclose(np.median(fit.residuals, axis=1), 0.0, atol=1e-9)
        np.testing.assert_allclose(np.median(fit.residuals, axis=0), 0.0, atol=1e-9)
        np.testing.assert_allclose(fit.fitted + fit.residuals, table, atol=1e-9)


def test_sweep_order_matters_on_the_temperature_table():
    # Hand-worked: sweeping columns first takes out Washington's value as every column median, so
    # Laredo's row effect is the median of 21.4 24.8 23.1 21.5 16.5 12.4 10.4 = 21.4 (not 21.5), and the
    # January effect becomes 36.2 - 54.4 = -18.2. The printed 54.4 / 21.5 solution needs rows first.
    fit = median_polish(TEMPERATURES, sweep_first="columns")
    assert fit.overall == pytest.approx(54.4, abs=1e-9)
    assert fit.row_effects[2] == pytest.approx(21.4, abs=1e-9)
    assert fit.column_effects[0] == pytest.approx(-18.2, abs=1e-9)
    np.testing.assert_allclose(fit.fitted + fit.residuals, TEMPERATURES, atol=1e-9)


def test_median_polish_skips_empty_cells():
    table = TEMPERATURES.copy()
    table[1, 3] = np.nan
    fit = median_polish(table, max_iter=100, tol=0.0)
    assert np.isnan(fit.residuals[1, 3]) and np.isfinite(fit.residuals[~np.isnan(table)]).all()
    # Defining property over the non-empty cells.
    np.testing.assert_allclose(np.nanmedian(fit.residuals, axis=1), 0.0, atol=1e-9)
    np.testing.assert_allclose(np.nanmedian(fit.residuals, axis=0), 0.0, atol=1e-9)


def test_polish_surface_recovers_an_additive_field():
    rng = np.random.default_rng(11)
    n = 400
    x = rng.uniform(0, 1000, n)
    y = rng.uniform(0, 1000, n)
    # Additive in cells: a value depending on the 100 m column and row band only.
    col, row = np.floor(x / 100), np.floor(y / 100)
    v = 3.0 * col + np.sin(row)
    v[[5, 6]] = np.nan
    surface = median_polish_surface(x, y, v, cell_size=100.0)
    ok = np.isfinite(v)
    # An additive table is fitted exactly by the polish (Tukey 1977, ch. 11).
    np.testing.assert_allclose(surface.residual[ok], 0.0, atol=1e-9)
    assert np.isnan(surface.fitted[5]) and surface.cell_row[5] == -1
    # Cell values are medians of the points in each cell (reference: pandas groupby median).
    frame = pd.DataFrame({"r": surface.cell_row[ok], "c": surface.cell_column[ok], "v": v[ok]})
    medians = frame.groupby(["r", "c"])["v"].median()
    np.testing.assert_allclose(surface.cells[medians.index.get_level_values(0), medians.index.get_level_values(1)], medians)
    assert surface.variance_explained == pytest.approx(1.0)


def test_polish_surface_default_cell_size_and_residuals():
    rng = np.random.default_rng(12)
    x, y = rng.uniform(0, 5000, 300), rng.uniform(0, 2000, 300)
    v = 0.01 * x + rng.normal(0, 1, 300)
    surface = median_polish_surface(x, y, v)
    # sqrt(5000 * 2000 * 4 / 300) = 365 m, rounded to the nice 500 m.
    assert surface.cell_size == 500.0
    fit = surface.polish
    expected = fit.overall + fit.row_effects[surface.cell_row] + fit.column_effects[surface.cell_column]
    np.testing.assert_allclose(surface.fitted, expected)
    np.testing.assert_allclose(surface.residual, v - expected)
    assert 0.9 < surface.variance_explained < 1.0


def _field(seed=3, n=300):
    rng = np.random.default_rng(seed)
    x = rng.uniform(440_000, 445_000, n)
    y = rng.uniform(5_300_000, 5_303_000, n)
    v = 10 + 0.002 * (x - 440_000) - 0.001 * (y - 5_300_000) + 1e-7 * (x - 440_000) * (y - 5_300_000)
    v = v + rng.standard_t(3, n)
    v[:10] += 30.0
    return x, y, v


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("weight_function", ["huber", "bisquare"])
def test_trend_surface_matches_statsmodels_rlm(order, weight_function):
    sm = pytest.importorskip("statsmodels.api")
    x, y, v = _field()
    fit = trend_surface(x, y, v, order, weight_function, tol=1e-12, max_iter=200)
    X = surface_design(x, y, order, fit.centre, fit.scale)
    norm = sm.robust.norms.HuberT() if weight_function == "huber" else sm.robust.norms.TukeyBiweight()
    # Reference: statsmodels RLM (IRLS from OLS, MAD scale about 0, same tuning constants).
    ref = sm.RLM(v, X, M=norm).fit(tol=1e-12, maxiter=200)
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(fit.fitted, ref.fittedvalues, rtol=1e-9)
    np.testing.assert_allclose(fit.weights, ref.weights, atol=1e-7)
    assert fit.residual_scale == pytest.approx(ref.scale, rel=1e-7)
    assert fit.converged


def test_trend_surface_with_unbounded_huber_is_least_squares():
    sm = pytest.importorskip("statsmodels.api")
    x, y, v = _field(seed=4)
    v[7] = np.nan
    fit = trend_surface(x, y, v, order=2, weight_function="huber", tuning=1e12)
    ok = np.isfinite(v)
    X = surface_design(x[ok], y[ok], 2, fit.centre, fit.scale)
    # Reference: statsmodels OLS; its R^2 is the share of variance explained.
    ols = sm.OLS(v[ok], X).fit()
    np.testing.assert_allclose(fit.coefficients, ols.params, rtol=1e-8)
    assert fit.variance_explained == pytest.approx(ols.rsquared, rel=1e-9)
    assert np.isnan(fit.residual[7]) and np.isnan(fit.weights[7])
    np.testing.assert_allclose(fit.predict(x[ok], y[ok]), fit.fitted[ok])


def test_robust_fit_resists_wild_values():
    x, y, v = _field(seed=5)
    robust = trend_surface(x, y, v, 1, "bisquare")
    # The ten values raised by 30 get (near) zero bisquare weight (common practice: weight < 0.1 = rejected).
    assert (robust.weights[:10] < 0.1).all()
    assert robust.robust_variance_explained > robust.variance_explained


def test_trend_surface_errors():
    x, y, v = _field()
    with pytest.raises(ConfigError, match="order 3 is not supported; choose 1 or 2"):
        trend_surface(x, y, v, order=3)
    with pytest.raises(ConfigError, match="weight_function 'cauchy' is not known; choose one of huber, bisquare"):
        trend_surface(x, y, v, weight_function="cauchy")
    line = np.linspace(0, 100, 20)
    with pytest.raises(InputError, match="lie on one line"):
        trend_surface(line, 2 * line, line, order=1)
    with pytest.raises(InputError, match="needs more than 3 usable points; got 3"):
        trend_surface([0, 1, 2], [0, 1, 5], [1, 2, 3])
