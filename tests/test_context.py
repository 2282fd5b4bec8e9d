"""Context columns and the land-surface raster (a small GeoTIFF written here with rasterio)."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import rasterio
from affine import Affine

from pointsift import InputError, ScreenConfig, screen_frame
from pointsift.context import read_context, sample_raster
from pointsift.prepare import prepare

from conftest import build_wells


def _tif(path, crs="EPSG:32633", nodata=-9999.0):
    # 10 x 10 cells of 100 m from (500000, 5301000) down to (501000, 5300000); cell (r, c) holds 100 + r * 10 + c
    data = (100.0 + np.arange(10)[:, None] * 10 + np.arange(10)[None, :]).astype("float32")
    data[0, 0] = nodata
    with rasterio.open(path, "w", driver="GTiff", width=10, height=10, count=1, dtype="float32", crs=crs,
                       transform=Affine(100.0, 0.0, 500_000.0, 0.0, -100.0, 5_301_000.0), nodata=nodata) as dst:
        dst.write(data, 1)
    return path


def test_sample_raster_cells_outside_and_no_data(tmp_path):
    path = _tif(tmp_path / "dem.tif")
    xy = np.array([[500_150.0, 5_300_950.0], [500_050.0, 5_300_950.0], [499_000.0, 5_300_500.0], [np.nan, np.nan],
                   [500_950.0, 5_300_050.0]])
    from pyproj import CRS

    values, why = sample_raster(str(path), xy, CRS.from_epsg(32633))
    # cell (row 0, col 1) = 101; (0, 0) is no-data; the third point lies west of the raster; (9, 9) = 199
    assert values[0] == 101.0 and values[4] == 199.0
    assert np.isnan(values[1]) and why[1] == "no data in the land-surface raster here"
    assert np.isnan(values[2]) and why[2] == "outside the land-surface raster"
    assert np.isnan(values[3])


def test_raster_in_another_crs_is_reprojected(tmp_path):
    path = _tif(tmp_path / "dem.tif")
    from pyproj import CRS, Transformer

    lon, lat = Transformer.from_crs(32633, 4326, always_xy=True).transform(500_150.0, 5_300_950.0)
    values, _ = sample_raster(str(path), np.array([[lon, lat]]), CRS.from_epsg(4326))
    assert values[0] == 101.0


def test_screen_with_raster_never_crashes_outside_and_says_so(tmp_path):
    path = _tif(tmp_path / "dem.tif")
    wells = build_wells(60, seed=3, extent=2000.0)  # half of them lie outside the 1 km raster
    result = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", land_surface=str(path), units="m",
                                              land_surface_use="none", permutations=99))
    out = result.frame
    x = wells.geometry.x.to_numpy()
    outside = (x > 501_000) & (out["screen_status"] != "unscreened").to_numpy()
    assert outside.any()
    assert all("land surface unknown here (outside the land-surface raster)" in r for r in out["screen_reasons"][outside])
    assert result.run_info["context"]["land_surface"] == str(path)
    assert result.run_info["context"]["raster_outside_or_no_data"] >= outside.sum()


def test_missing_context_column_names_the_fix():
    wells = build_wells(30, seed=1)
    with pytest.raises(InputError, match="no column 'gse' for --ground-elevation"):
        screen_frame(wells, ScreenConfig(value="level_m", ground_elevation="gse"))


def test_context_values_read_and_recorded():
    wells = build_wells(30, seed=1)
    wells["gse"] = (wells["level_m"] + 5.0).astype(object)
    wells.loc[3, "gse"] = "n/a"
    wells["depth"] = 40.0
    wells["flows"] = ["yes" if i == 2 else "" for i in range(30)]
    config = ScreenConfig(value="level_m", ground_elevation="gse", well_depth="depth", flowing="flows", units="m")
    prepared = prepare(wells, config)
    context = read_context(wells, config, prepared.xy, prepared.work_crs)
    assert np.isnan(context.ground[3]) and context.ground[0] == pytest.approx(wells["level_m"][0] + 5.0)
    assert context.flowing.tolist() == [i == 2 for i in range(30)]
    assert context.record["rows_with_ground_elevation"] == 29
    assert context.record["surface_tolerance"] == 0.5  # metres default, stated in docs/methods.md


def test_run_info_states_quantity_units_and_scale():
    wells = build_wells(80, seed=2)
    wells["gse"] = wells["level_m"] + 10.0
    info = screen_frame(wells, ScreenConfig(value="level_m", ground_elevation="gse", units="m", permutations=99)).run_info
    assert info["context"]["quantity"] == "level" and info["context"]["units"] == "m"
    assert info["judged_scale"]["scale"].startswith("depth to water")
    assert info["parameters"]["land_surface_use"] == "depth"
    default = screen_frame(wells, ScreenConfig(value="level_m", permutations=99)).run_info
    assert default["context"]["units"] == "not stated" and default["judged_scale"]["scale"] == "the values"


def test_aquifer_units_compared_only_within_unit():
    wells = build_wells(120, seed=4)
    wells["unit"] = np.where(np.arange(120) % 2 == 0, "upper", "lower")
    wells.loc[wells.index[-5:], "unit"] = ""
    # the lower unit stands 30 m lower: mixed, every well would look wrong
    wells.loc[wells["unit"] == "lower", "level_m"] -= 30.0
    result = screen_frame(wells, ScreenConfig(value="level_m", aquifer="unit", permutations=99))
    graph, unit = result.graph, wells["unit"].to_numpy()
    for row in range(120):
        nb = graph.indices[row][graph.indices[row] >= 0]
        if unit[row]:
            assert (unit[nb] == unit[row]).all()
        assert (unit[nb] != "").all() or unit[row] == ""
    ok = result.frame["screen_status"][unit != ""]
    assert (ok == "ok").mean() > 0.9
    assert "neighbours of none" in result.run_info["context"]["wells_without_unit"]


def test_skewness_matches_scipy_and_skew_is_said():
    from scipy.stats import skew

    from pointsift.judging import skewness

    rng = np.random.default_rng(5)
    sample = rng.lognormal(0.0, 1.0, 300)
    # reference: scipy.stats.skew with bias=False (adjusted Fisher-Pearson G1)
    assert skewness(sample) == pytest.approx(skew(sample, bias=False), rel=1e-12)
    wells = build_wells(200, seed=9)
    wells["zinc"] = np.exp(rng.normal(5.0, 0.9, 200))
    raw = screen_frame(wells, ScreenConfig(value="zinc", quantity="concentration", units="mg/kg", permutations=99))
    assert raw.run_info["judged_scale"]["strongly_skewed_positive"]
    assert any("strongly skewed" in note and "transform log" in note for note in raw.run_info["notes"])
    logged = screen_frame(wells, ScreenConfig(value="zinc", quantity="concentration", units="mg/kg", transform="auto",
                                              permutations=99))
    assert logged.run_info["judged_scale"]["scale"] == "log of the values"
    # reasons keep the original units: the expected value is back-transformed
    assert np.allclose(logged.frame["expected_value"] + logged.frame["local_residual"], wells["zinc"], equal_nan=True)
    assert (logged.counts["suspect"] <= raw.counts["suspect"])
    assert not logged.frame["screen_reasons"].str.contains("pumping cone").any()


def test_context_in_the_output_run_info_and_the_summary_json(tmp_path):
    import json

    import jsonschema
    import pyogrio

    from pointsift import screen_file
    from pointsift.report import load_summary_schema

    wells = build_wells(120, seed=6)
    wells["gse"] = wells["level_m"] + 12.0
    wells["site_name"] = wells["well_id"]
    source = tmp_path / "w.gpkg"
    wells.to_file(source, layer="wells")
    out, summary_path = tmp_path / "out.gpkg", tmp_path / "summary.json"
    screen_file(source, out, ScreenConfig(value="level_m", id="well_id", ground_elevation="gse", site="site_name",
                                          units="m", permutations=99), summary_json_path=summary_path)
    info = pyogrio.read_dataframe(out, layer="run_info")
    text = " ".join(str(v) for v in info.to_numpy().ravel())
    for word in ("ground_elevation", "land_surface_use", "depth to water", "chance_of_fitting_by_chance"):
        assert word in text, word
    summary = json.loads(summary_path.read_text(encoding="utf-8"))
    jsonschema.validate(summary, load_summary_schema(), cls=jsonschema.Draft202012Validator)
    assert summary["settings"]["context"]["quantity"] == "level" and summary["settings"]["context"]["units"] == "m"
    assert summary["settings"]["judged_scale"]["scale"].startswith("depth to water")
    assert summary["parameters"]["site"] == "site_name"
