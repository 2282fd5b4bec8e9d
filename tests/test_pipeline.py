"""The screening pipeline end to end on invented layers (no files)."""

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from conftest import ORIGIN, build_wells, to_lonlat
from scipy import stats
from scipy.spatial.distance import cdist

from pointsift import screen
from pointsift.config import ScreenConfig
from pointsift.errors import InputError
from pointsift.pipeline import ADDED_COLUMNS, automatic_max_distance, screen_frame
from pointsift.verdict import STATUSES

FAST = {"permutations": 99}


def test_screen_returns_the_input_rows_and_columns_plus_the_added_ones():
    wells = build_wells(150, seed=11)
    before = wells.copy()
    out = screen(wells, value="level_m", id="well_id", **FAST)
    pd.testing.assert_frame_equal(wells, before)  # the input is not modified
    assert list(out.columns) == list(wells.columns) + list(ADDED_COLUMNS)
    # every input column kept exactly: names, values, row count, row order, index, CRS
    pd.testing.assert_frame_equal(out[list(wells.columns)], wells)
    assert out.crs.equals(wells.crs)
    assert set(out["screen_status"]) <= set(STATUSES)
    assert out["screen_reasons"].map(lambda s: isinstance(s, str) and len(s) > 0).all()


def test_geographic_input_comes_back_in_its_own_crs():
    wells = to_lonlat(build_wells(120, seed=12))
    result = screen_frame(wells, ScreenConfig(value="level_m", **FAST))
    assert result.frame.crs.equals(wells.crs)
    assert result.frame.geometry.geom_equals(wells.geometry).all()
    info = result.run_info
    assert info["input_crs"] == "EPSG:4326" and info["work_crs"] == "EPSG:32633"
    assert any("Distances computed in WGS 84 / UTM zone 33N" in note for note in info["notes"])


def test_added_column_name_colliding_with_an_input_column_is_an_error():
    wells = build_wells(50, seed=13)
    wells["screen_score"] = 1.0
    wells["neighbour_count"] = 3
    with pytest.raises(InputError, match=r"already has column\(s\) screen_score, neighbour_count .*Rename or drop them"):
        screen(wells, value="level_m")


def test_added_column_collision_ignores_case():
    # GeoPackage (SQLite) column names are case-insensitive
    wells = build_wells(50, seed=13)
    wells["Screen_Status"] = "checked"
    with pytest.raises(InputError, match=r"already has column\(s\) Screen_Status"):
        screen(wells, value="level_m")


def test_isolated_points_are_unscreened_with_why():
    wells = build_wells(200, seed=14)
    far = wells.iloc[[0, 1, 2]].copy()
    far["well_id"] = ["FAR", "PAIR_A", "PAIR_B"]
    # one well 60 km away, and a pair 40 km away (each other's only neighbour)
    far = far.set_geometry(
        [shapely.Point(ORIGIN[0] + 60_000, ORIGIN[1]), shapely.Point(ORIGIN[0], ORIGIN[1] + 40_000), shapely.Point(ORIGIN[0] + 300, ORIGIN[1] + 40_000)],
        crs=wells.crs,
    )
    wells = pd.concat([wells, far], ignore_index=True)
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", **FAST))
    out = result.frame
    assert len(out) == 203
    limit = result.graph.max_distance
    assert np.isfinite(limit) and limit < 40_000
    assert out.loc[200, "screen_status"] == "unscreened"
    assert out.loc[200, "screen_reasons"].startswith("no neighbour within ")
    assert out.loc[200, "neighbour_count"] == 0
    for row in (201, 202):
        assert out.loc[row, "screen_status"] == "unscreened"
        assert out.loc[row, "screen_reasons"].startswith("only 1 neighbour within ")
        assert "too isolated to judge" in out.loc[row, "screen_reasons"]
    assert (out.loc[:199, "screen_status"] != "unscreened").all()


def test_explicit_max_distance_names_the_distance():
    wells = build_wells(100, seed=15)
    result = screen_frame(wells, ScreenConfig(value="level_m", max_distance=50.0, **FAST))
    reasons = result.frame["screen_reasons"]
    unscreened = result.frame["screen_status"] == "unscreened"
    assert unscreened.sum() > 50
    assert reasons[unscreened].str.contains(r"(?:no neighbour|only \d neighbours?) within 50 m").all()
    assert (result.graph.distances[result.graph.mask] <= 50.0).all()


def test_automatic_max_distance_is_the_far_fence_of_nearest_distances():
    rng = np.random.default_rng(16)
    xy = rng.uniform(0, 5000, (300, 2))
    d = cdist(xy, xy)
    np.fill_diagonal(d, np.inf)
    logs = np.log(d.min(axis=1))
    # Reference: Tukey's far fence (Q3 + 3 IQR) of log nearest-neighbour distance,
    # with scipy.stats.iqr (linear percentiles) and a brute-force cdist.
    q3 = np.percentile(logs, 75)
    iqr = max(stats.iqr(logs), np.log(2.0))
    assert automatic_max_distance(xy) == pytest.approx(np.exp(q3 + 3 * iqr), rel=1e-12)


def test_no_usable_row_is_an_input_error():
    wells = build_wells(20, seed=17)
    wells["level_m"] = "dry"
    with pytest.raises(InputError, match=r"No row of the layer has both a location and a value \(first reason: value 'dry' is not a number\)"):
        screen(wells, value="level_m")


def test_bad_rows_are_kept_unscreened_with_their_reasons():
    wells = build_wells(120, seed=18)
    level = wells["level_m"].astype(object)
    level.iloc[[3, 4, 5]] = ["n/a", -9999.0, None]
    wells["level_m"] = level
    geometry = wells.geometry.copy()
    geometry.iloc[6] = None
    geometry.iloc[7] = shapely.Point()
    geometry.iloc[8] = shapely.MultiPoint([(1, 2), (3, 4)])
    wells = wells.set_geometry(geometry)
    result = screen_frame(wells, ScreenConfig(value="level_m", **FAST))
    out = result.frame
    assert len(out) == 120 and list(out.index) == list(wells.index)
    assert (out.loc[3:8, "screen_status"] == "unscreened").all()
    assert out.loc[3:8, "screen_reasons"].tolist() == [
        "value 'n/a' is not a number",
        "no-data code -9999",
        "no value (blank)",
        "no location (no geometry)",
        "no location (empty geometry)",
        "location has 2 points (multi-part); split it into single points",
    ]
    assert out.loc[3:8, "screen_score"].isna().all()
    # unscreened rows are nobody's neighbour
    assert not np.isin(result.graph.indices, np.arange(3, 9)).any()


def test_counts_and_run_record():
    wells = build_wells(150, seed=19)
    wells.loc[9, "level_m"] = -9999.0
    result = screen_frame(wells, ScreenConfig(value="level_m", **FAST))
    counts = result.frame["screen_status"].value_counts().to_dict()
    assert result.counts == {s: counts.get(s, 0) for s in STATUSES}
    assert result.run_info["counts"] == result.counts
    assert sum(result.counts.values()) == 150 and result.counts["unscreened"] >= 1
    assert result.run_info["parameters"]["value"] == "level_m"
    assert result.run_info["rows"] == 150
    assert "not determinations" in result.run_info["caution"]


def test_planted_errors_found_and_pumping_cone_not_suspect():
    # invented network: regional gradient, a pumping cone sampled by ~25 wells,
    # three planted mistakes (decimal slip, feet entered as metres, a spike)
    rng = np.random.default_rng(20)
    gx, gy = np.meshgrid(np.arange(0, 6000, 200.0), np.arange(0, 6000, 200.0))
    xy = np.column_stack([gx.ravel(), gy.ravel()]) + rng.uniform(-50, 50, (gx.size, 2))
    dist = np.hypot(xy[:, 0] - 2500, xy[:, 1] - 3500)
    cone = dist < 650
    level = 150 + 0.002 * xy[:, 0] + 0.001 * xy[:, 1] - 6 * np.exp(-(dist**2) / (2 * 450**2)) + rng.normal(0, 0.05, len(xy))
    level = np.round(level, 2)
    planted = {100: level[100] * 10, 400: level[400] / 0.3048, 700: level[700] + 2.0}
    for row, value in planted.items():
        assert not cone[row]
        level[row] = round(value, 2)
    wells = gpd.GeoDataFrame({"level_m": level}, geometry=gpd.points_from_xy(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1]), crs="EPSG:32633")
    out = screen(wells, value="level_m", **FAST)
    status = out["screen_status"].to_numpy()
    assert (status[list(planted)] == "suspect").all()
    # issue 2: at most 5 % of the pumping-cone wells called suspect, and <= 1 % of sound wells
    assert cone.sum() >= 20
    assert np.mean(status[cone] == "suspect") <= 0.05
    sound = np.ones(len(xy), bool)
    sound[list(planted)] = False
    assert np.mean(status[sound] == "suspect") <= 0.01
    assert "decimal" in out.loc[100, "screen_reasons"]


@pytest.mark.slow
def test_regional_gradient_alone_makes_no_clusters():
    # issue 2: compute the cluster statistics on detrended values, or the gradient
    # alone makes every point part of a cluster
    wells = build_wells(400, seed=21, extent=8000, noise=0.3, wave=0.0, gradient=(0.005, 0.003))
    detrended = screen_frame(wells, ScreenConfig(value="level_m", permutations=199)).frame
    raw = screen_frame(wells, ScreenConfig(value="level_m", permutations=199, detrend="none")).frame
    def clustered(frame):
        significant = frame["local_moran_p_adjusted"] <= 0.05
        return (significant & frame["local_moran_quadrant"].isin(["high among high", "low among low"])).mean()

    assert clustered(raw) > 0.3
    assert clustered(detrended) < 0.02


def test_lag_pairs_layer_variogram_table_and_reasons(tmp_path):
    # lag-pair screen and variogram wired into the screen (issue 4): a spike on a smooth
    # surface is the culprit of its flagged pairs; outputs read back with pyogrio
    import pyogrio

    from pointsift.run import write_screen

    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 4000, (400, 2))
    level = 100 + 0.003 * xy[:, 0] + 2 * np.sin(xy[:, 0] / 700) * np.cos(xy[:, 1] / 900) + rng.normal(0, 0.02, 400)
    spike = int(np.argmin(np.hypot(xy[:, 0] - 2000, xy[:, 1] - 2000)))
    level[spike] += 4.0
    ids = np.array([f"W{i:03d}" for i in range(400)], dtype=object)
    wells = gpd.GeoDataFrame({"well": ids, "level_m": level},
                             geometry=gpd.points_from_xy(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1]), crs="EPSG:32633")
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well", **FAST))
    assert "lag pairs:" in result.frame.loc[spike, "screen_reasons"]
    assert result.frame["screen_reasons"].str.contains("lag pairs:").sum() == 1
    layer = result.tables["lag_pairs"]
    assert len(layer) >= 3 and (layer.geom_type == "LineString").all()
    assert layer.crs == result.prepared.work_crs
    touching = (layer["tail_id"] == ids[spike]) | (layer["head_id"] == ids[spike])
    assert (layer.loc[touching, "culprit_id"] == ids[spike]).all()
    assert list(result.tables["variogram"].columns) == [
        "direction", "estimator", "lag_low", "lag_high", "mean_distance", "pairs", "gamma"]
    model = result.run_info["variogram"]["model"]
    assert {"nugget", "partial_sill", "practical_range", "range_parameter", "trustworthy", "reasons"} <= set(model)
    assert result.run_info["lag_pairs"]["culprits"] == 1
    out = write_screen(result, tmp_path / "out.gpkg")
    names = {name for name, _ in pyogrio.list_layers(out)}
    assert {"lag_pairs", "variogram", "run_info"} <= names
    back = pyogrio.read_dataframe(out, layer="variogram")
    assert len(back) == len(result.tables["variogram"])
    lines = pyogrio.read_dataframe(out, layer="lag_pairs")
    np.testing.assert_allclose(shapely.length(lines.geometry.values), lines["separation"], rtol=1e-9)


# --- issue 10 reproductions ---------------------------------------------------------------


def test_output_carries_the_crs_the_run_used(tmp_path):
    # Issue 10, item 10: a layer without a CRS screened with --crs was written
    # with an undefined SRS (srs_id 99999).
    import sqlite3

    from pointsift.io import write_geopackage

    wells = build_wells(120, seed=12, crs=None)
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", crs="EPSG:32633", **FAST))
    assert result.frame.crs.to_epsg() == 32633
    out = write_geopackage(tmp_path / "out.gpkg", {"screened": result.frame})
    with sqlite3.connect(out) as db:  # Reference: gpkg_geometry_columns, read by sqlite3
        srs = db.execute("SELECT srs_id FROM gpkg_geometry_columns WHERE table_name = 'screened'").fetchone()[0]
    assert srs == 32633


def test_text_columns_are_null_where_there_is_nothing_to_say():
    # Issue 10, item 18: quadrant and role were "" on unscreened rows.
    wells = build_wells(120, seed=13)
    wells.loc[5, "level_m"] = np.nan
    out = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", **FAST)).frame
    assert out.loc[5, "screen_status"] == "unscreened"
    assert pd.isna(out.loc[5, "local_moran_quadrant"]) and pd.isna(out.loc[5, "coincident_role"])  # written as NULL
    assert not (out["local_moran_quadrant"] == "").any() and not (out["coincident_role"] == "").any()


def test_shuffled_rows_give_each_well_the_same_p_value_and_status():
    # issue 13: a point's permutation p-value depends on the run seed and the point,
    # not on the row order (per-point streams, canonical tie-breaks in the graph)
    wells = build_wells(500, seed=31)
    twins = wells.iloc[:15].copy()
    twins["well_id"] = [f"D{i}" for i in range(15)]
    twins["level_m"] = twins["level_m"] + 0.05  # records at the same spot that differ a little
    wells = pd.concat([wells, twins], ignore_index=True)
    base = screen(wells, value="level_m", id="well_id", permutations=999).set_index("well_id")
    order = np.random.default_rng(2).permutation(len(wells))
    shuffled = screen(wells.iloc[order].reset_index(drop=True), value="level_m", id="well_id", permutations=999)
    shuffled = shuffled.set_index("well_id").loc[base.index]
    np.testing.assert_array_equal(shuffled["local_moran_p"].to_numpy(), base["local_moran_p"].to_numpy())
    assert (shuffled["screen_status"] == base["screen_status"]).all()
    np.testing.assert_allclose(shuffled["local_moran_i"], base["local_moran_i"], rtol=1e-9, atol=1e-12)
