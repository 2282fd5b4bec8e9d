"""Directional strips: membership and per-strip figures (the calibration: test_strips_calibration.py)."""

import numpy as np
import pandas as pd
import pytest
import shapely

from pointsift.errors import ConfigError, InputError
from pointsift.methods.strips import (
    calibrate_u,
    flagged_strip_evidence,
    plot_strip_profiles,
    strip_summary,
    strip_width,
)


# --------------------------------------------------------------------------- strips over points


def _points(n=600, seed=21):
    rng = np.random.default_rng(seed)
    x = rng.uniform(500_000, 506_000, n)
    y = rng.uniform(4_200_000, 4_204_000, n)
    v = 50 + 0.001 * (y - 4_200_000) + rng.normal(0, 2, n)
    return x, y, v


def test_each_usable_point_is_in_exactly_one_strip_per_direction():
    x, y, v = _points()
    v[[3, 4]] = np.nan
    x[9] = np.nan
    result = strip_summary(x, y, v, directions=(90, 0, 45))
    usable = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    assert list(result.membership.columns) == ["strip_90", "strip_0", "strip_45"]
    for direction, column in zip((90.0, 0.0, 45.0), result.membership.columns):
        labels = result.membership[column].to_numpy()
        assert (labels[~usable] == -1).all() and (labels[usable] >= 0).all()
        part = result.table[result.table["direction"] == direction].set_index("strip")
        # Counts from membership equal the table's n, and the strip polygons cover their points
        # (reference: shapely's covers predicate; footprints do not overlap, so one strip each).
        np.testing.assert_array_equal(np.bincount(labels[usable], minlength=len(part)), part["n"].to_numpy())
        footprints = part["geometry"].to_numpy()[labels[usable]]
        assert shapely.covers(footprints, shapely.points(x[usable], y[usable])).all()
        areas = shapely.area(shapely.union_all(part["geometry"].to_numpy()))
        assert areas == pytest.approx(shapely.area(part["geometry"].to_numpy()).sum(), rel=1e-9)


def test_strip_numbers_recompute_from_their_points():
    x, y, v = _points()
    result = strip_summary(x, y, v, directions=(90, 0))
    for direction, column in ((90.0, "strip_90"), (0.0, "strip_0")):
        labels = result.membership[column].to_numpy()
        part = result.table[result.table["direction"] == direction]
        for _, row in part[part["n"] > 0].iterrows():
            sel = np.flatnonzero(labels == row["strip"])
            values = pd.Series(v[sel])
            # Reference: pandas (ddof=1 sd) and numpy linear percentiles.
            assert row["n"] == values.size
            assert row["mean"] == pytest.approx(values.mean(), rel=1e-12)
            assert row["median"] == pytest.approx(values.median(), rel=1e-12)
            if values.size > 1:
                assert row["sd"] == pytest.approx(values.std(), rel=1e-9)
            assert (row["min"], row["max"]) == (values.min(), values.max())
            p05, p25, p75, p95 = np.percentile(values, [5, 25, 75, 95])
            assert (row["p05"], row["p95"]) == (pytest.approx(p05), pytest.approx(p95))
            if values.size >= 5 and p75 > p25:
                t = (values.mean() - values.median()) / ((p75 - p25) / 1.349)
                assert row["u"] == pytest.approx(float(calibrate_u(t, values.size)), rel=1e-9)
                assert row["flagged"] == (abs(row["u"]) > 3)
            side = values.max() if values.mean() >= values.median() else values.min()
            assert row["extreme_value"] == side and v[row["extreme_row"]] == side


def test_west_east_strips_are_numbered_south_to_north():
    x = np.array([0.0, 10.0, 20.0, 0.0, 10.0])
    y = np.array([0.0, 0.0, 0.0, 250.0, 250.0])
    v = np.arange(5.0)
    result = strip_summary(x, y, v, directions=(90, 0), width=100.0)
    # Common practice (compass azimuths): direction 90 runs west-east, so strips stack along y.
    np.testing.assert_array_equal(result.membership["strip_90"], [0, 0, 0, 2, 2])
    np.testing.assert_array_equal(result.membership["strip_0"], [0, 0, 0, 0, 0])
    we = result.table[result.table["direction"] == 90.0]
    assert we["n"].tolist() == [3, 0, 2]
    assert we["note"].tolist() == ["too small to judge (n < 5)", "empty", "too small to judge (n < 5)"]
    assert we["u"].isna().all() and not we["flagged"].any()
    # Strip edges at whole multiples of the width: 0-100, 100-200, 200-300 m north.
    assert we["across_from"].tolist() == [0.0, 100.0, 200.0]
    assert shapely.bounds(we["geometry"].iloc[2]).tolist() == [0.0, 200.0, 20.0, 300.0]


def test_opposite_azimuths_are_one_family():
    x, y, v = _points(200)
    a = strip_summary(x, y, v, directions=(270,))
    b = strip_summary(x, y, v, directions=(90,))
    pd.testing.assert_frame_equal(a.table.drop(columns="geometry"), b.table.drop(columns="geometry"))
    with pytest.raises(ConfigError, match="repeat one family"):
        strip_summary(x, y, v, directions=(90, 270))


def test_default_width_from_density():
    x, y, v = _points(600)
    # Hand-worked rule: across extent ~4000 m (y) x 25 / 600 = 166.6 m, rounded to the nice 200 m.
    assert strip_width(x, y, 90, target_per_strip=25) == 200.0
    # South-north strips: ~6000 m x 25 / 600 = 250 m.
    assert strip_width(x, y, 0, target_per_strip=25) == 250.0
    result = strip_summary(x, y, v)
    assert result.widths == {90.0: 200.0, 0.0: 250.0}
    # Large layers: about 100 strips per family. Hand-worked: 20,000 points over 10 km, 200 per strip,
    # 10,000 m x 200 / 20,000 = 100 m.
    rng = np.random.default_rng(2)
    big_x, big_y = rng.uniform(0, 10_000, (2, 20_000))
    assert strip_width(big_x, big_y, 90) == 100.0


def test_a_wild_value_flags_its_strip_and_is_its_extreme():
    rng = np.random.default_rng(8)
    n = 400
    x = rng.uniform(0, 4000, n)
    y = rng.uniform(0, 4000, n)
    v = rng.normal(20, 1, n)
    v[123] = 400.0
    result = strip_summary(x, y, v, directions=(90,), width=500.0)
    strip = result.membership["strip_90"][123]
    row = result.table.set_index("strip").loc[strip]
    assert row["flagged"] and row["u"] > 3 and row["extreme_row"] == 123
    assert result.flagged["strip"].tolist() == [strip]
    evidence = flagged_strip_evidence(result, n)
    assert evidence[123].startswith(f"extreme value of west-east strip {strip}, whose mean")
    assert (evidence[np.arange(n) != 123] == "").all()


def test_zero_iqr_strip_is_not_judged():
    x = np.zeros(8)
    y = np.arange(8.0)
    v = np.array([1, 1, 1, 1, 1, 1, 1, 9], dtype=float)
    row = strip_summary(x, y, v, directions=(0,), width=100.0).table.iloc[0]
    assert np.isnan(row["u"]) and not row["flagged"] and "IQR 0" in row["note"]


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        ({"min_n": 3}, ConfigError, "min_n must be a whole number of at least 5"),
        ({"width": -5.0}, ConfigError, "Strip width must be a positive length in metres, got -5.0"),
        ({"directions": ("east",)}, ConfigError, "Strip direction 'east' is not a number"),
    ],
)
def test_bad_options(kwargs, error, message):
    x, y, v = _points(50)
    with pytest.raises(error, match=message):
        strip_summary(x, y, v, **kwargs)


def test_no_usable_point():
    with pytest.raises(InputError, match="No usable point"):
        strip_summary([1.0], [2.0], [np.nan])
    with pytest.raises(InputError, match="got 2, 2 and 3"):
        strip_summary([1.0, 2.0], [2.0, 3.0], [1.0, 2.0, 3.0])


def test_plot_strip_profiles_has_one_panel_per_direction():
    x, y, v = _points()
    fig = plot_strip_profiles(strip_summary(x, y, v).table, label="level_m")
    assert len(fig.axes) == 2
    assert "west-east" in fig.axes[0].get_title() and "south-north" in fig.axes[1].get_title()
