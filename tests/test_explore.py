"""The 'describe' command and explore.describe: terminal summary and the GeoPackage it writes.

Outputs are read back with pyogrio (an independent reader) and checked against
published figures (meuse zinc) and pandas recomputations.
"""


import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from click.testing import CliRunner

from pointsift.cli import cli, main
from pointsift.config import ScreenConfig
from pointsift.explore import describe, description_layers
from pointsift.prepare import prepare

from conftest import build_wells, write_points


@pytest.fixture
def meuse_gpkg(tmp_path):
    skgstat = pytest.importorskip("skgstat")
    coords, zinc = skgstat.data.meuse(variable="zinc")["sample"]
    layer = gpd.GeoDataFrame(
        {"sample": [f"M{i:03d}" for i in range(len(zinc))], "zinc": np.asarray(zinc, dtype=float).ravel()},
        geometry=gpd.points_from_xy(coords[:, 0], coords[:, 1]),
        crs="EPSG:28992",  # Dutch RD New, the CRS of the meuse coordinates (R sp documentation)
    )
    return write_points(layer, tmp_path / "meuse.gpkg", layer="meuse")


def test_describe_meuse_prints_and_writes_the_published_summary(meuse_gpkg, tmp_path):
    out = tmp_path / "described.gpkg"
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--id", "sample", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "Described 155 rows of 'zinc'" in result.output
    assert "(n - 1 denominator)" in result.output and "adjusted Fisher-Pearson G1" in result.output
    assert "Stem-and-leaf display of 155 values" in result.output
    assert "west-east strips, numbered south to north" in result.output

    layers = dict(pyogrio.list_layers(out))
    assert set(layers) >= {"strips", "points", "summary", "stem_leaf", "unscreened", "trend", "run_info"}
    assert layers["strips"] == "Polygon" and layers["points"] == "Point"
    summary = pyogrio.read_dataframe(out, layer="summary").set_index("figure")["all"]
    # Reference: R sf documentation, summary(meuse$zinc): 113 / 198 / 326 / 469.7 / 674.5 / 1839.
    assert (summary["min"], summary["p25"], summary["median"], summary["p75"], summary["max"]) == (
        113.0, 198.0, 326.0, 674.5, 1839.0,
    )
    assert round(summary["mean"], 1) == 469.7
    # Reference: pandas' sample sd (ddof=1) of the same values.
    zinc = gpd.read_file(meuse_gpkg)["zinc"]
    assert summary["sd"] == pytest.approx(zinc.std(), rel=1e-12)


def test_strips_layer_agrees_with_the_points_layer(meuse_gpkg, tmp_path):
    out = tmp_path / "described.gpkg"
    assert main(["-q", "describe", str(meuse_gpkg), "--value", "zinc", "--strip-width", "400m", "--out", str(out)]) == 0
    strips = pyogrio.read_dataframe(out, layer="strips")
    points = pyogrio.read_dataframe(out, layer="points")
    assert strips.crs.to_epsg() == 28992
    assert sorted(strips["direction"].unique()) == [0.0, 90.0]
    assert (strips["width"] == 400.0).all()
    for direction, column in ((90.0, "strip_90"), (0.0, "strip_0")):
        family = strips[strips["direction"] == direction].set_index("strip")
        # Every usable point is in exactly one strip of the family.
        assert (points[column] >= 0).all()
        assert family["n"].sum() == len(points)
        # Recomputed from the points with pandas: n, mean, median per strip.
        grouped = points.groupby(column)["zinc"].agg(["size", "mean", "median"])
        np.testing.assert_array_equal(family.loc[grouped.index, "n"], grouped["size"])
        np.testing.assert_allclose(family.loc[grouped.index, "mean"], grouped["mean"], rtol=1e-12)
        np.testing.assert_allclose(family.loc[grouped.index, "median"], grouped["median"], rtol=1e-12)
        # Each point lies in its strip's footprint (reference: shapely covers).
        footprints = family.loc[points[column], "geometry"].to_numpy()
        assert shapely.covers(footprints, points.geometry.to_numpy()).all()
        # Too-small strips have an empty u and are not flagged.
        small = family[family["n"] < 5]
        assert small["u"].isna().all() and not small["flagged"].any()


def test_unscreened_rows_are_counted_and_trend_reported(tmp_path):
    wells = build_wells(120, seed=3)
    wells.loc[[4, 9], "level_m"] = -9999.0
    path = write_points(wells, tmp_path / "wells.gpkg")
    out = tmp_path / "d.gpkg"
    result = CliRunner().invoke(
        cli, ["describe", str(path), "--value", "level_m", "--detrend", "surface1", "--out", str(out)]
    )
    assert result.exit_code == 0, result.output
    assert "118 used, 2 unscreened" in result.output
    unscreened = pyogrio.read_dataframe(out, layer="unscreened")
    assert unscreened["rows"].sum() == 2
    trend = pyogrio.read_dataframe(out, layer="trend").set_index("key")["value"]
    assert trend["method"].startswith("robust trend surface, order 1")
    # The invented field is a plane plus small noise (conftest): the plane explains nearly all variance.
    assert float(trend["variance_explained"]) > 0.99
    points = pyogrio.read_dataframe(out, layer="points")
    assert points["trend_residual"].iloc[[4, 9]].isna().all()
    summary = pyogrio.read_dataframe(out, layer="summary").set_index("figure")["all"]
    # Reference: pandas on the usable values.
    kept = wells["level_m"].drop(index=[4, 9])
    assert summary["n"] == 118 and summary["mean"] == pytest.approx(kept.mean(), rel=1e-12)


def test_with_screen_summarises_without_suspects(tmp_path):
    wells = build_wells(150, seed=5)
    wells.loc[17, "level_m"] += 25.0  # a planted wrong value (25 m off a 0.2 m-noise plane)
    path = write_points(wells, tmp_path / "wells.gpkg")
    out = tmp_path / "d.gpkg"
    result = CliRunner().invoke(
        cli,
        ["describe", str(path), "--value", "level_m", "--with-screen", "--out", str(out)],
    )
    assert result.exit_code == 0, result.output
    assert "Without the" in result.output
    table = pyogrio.read_dataframe(out, layer="summary").set_index("figure")
    dropped = int(table.loc["n", "all"] - table.loc["n", "without_suspects"])
    assert dropped >= 1
    # The planted value is among the dropped ones: dropping it alone lowers the mean by 25 / 150 = 0.17 m,
    # and the mean without suspects matches pandas' mean without row 17 to well within that.
    assert table.loc["mean", "without_suspects"] < table.loc["mean", "all"]
    assert table.loc["mean", "without_suspects"] == pytest.approx(
        wells["level_m"].drop(index=17).mean(), abs=0.03
    )


def test_figures_are_written_as_png(meuse_gpkg, tmp_path):
    folder = tmp_path / "figs"
    folder.mkdir()
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--figures", str(folder)])
    assert result.exit_code == 0, result.output
    for name in ("histogram.png", "strips.png"):
        data = (folder / name).read_bytes()
        # PNG signature (common practice: the 8-byte magic number of the PNG specification).
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000


def test_usage_and_data_errors_map_to_exit_codes(meuse_gpkg, tmp_path, capsys):
    assert main(["describe", str(tmp_path / "missing.gpkg"), "--value", "zinc"]) == 1
    assert "does not exist" in capsys.readouterr().err
    assert main(["describe", str(meuse_gpkg), "--value", "zinc", "--stem-unit", "3"]) == 2
    assert "stem_unit must be a power of ten" in capsys.readouterr().err
    assert main(["describe", str(meuse_gpkg), "--value", "zinc", "--strips", "east"]) == 2
    assert main(["describe", str(meuse_gpkg), "--value", "nickel"]) == 1
    assert "nickel" in capsys.readouterr().err
    out = tmp_path / "once.gpkg"
    assert main(["-q", "describe", str(meuse_gpkg), "--value", "zinc", "--out", str(out)]) == 0
    assert main(["-q", "describe", str(meuse_gpkg), "--value", "zinc", "--out", str(out)]) == 1
    assert "--overwrite" in capsys.readouterr().err
    assert main(["-q", "describe", str(meuse_gpkg), "--value", "zinc", "--out", str(meuse_gpkg), "--overwrite"]) == 1


def test_describe_function_on_a_prepared_layer():
    wells = build_wells(80, seed=9)
    prepared = prepare(wells, ScreenConfig(value="level_m"))
    description = describe(prepared, directions=(45,), trend="polish", figures=True)
    assert set(description.strips.table["direction"]) == {45.0}
    assert description.trend_info["method"].startswith("median polish on")
    assert set(description.figures) == {"histogram", "strip_profiles", "variogram", "variogram_cloud",
                                        "sqrt_difference_cloud"}
    layers = description_layers(description)
    assert list(layers["variogram"].columns) == ["direction", "estimator", "lag_low", "lag_high",
                                                 "mean_distance", "pairs", "gamma"]
    assert description.variogram_basis.startswith("residuals from the trend (median polish")
    assert isinstance(layers["strips"], gpd.GeoDataFrame) and layers["strips"].crs == prepared.work_crs
    assert list(layers["points"].columns[-3:]) == ["strip_45", "trend_fitted", "trend_residual"]
    none = describe(prepared, trend="none")
    assert none.trend is None and none.trend_info == {"method": "none"}


def test_a_screened_layer_is_summarised_without_its_suspects(tmp_path):
    wells = build_wells(150, seed=6)
    wells.loc[[11, 40], "level_m"] += 30.0  # two planted wrong values
    path = write_points(wells, tmp_path / "wells.gpkg")
    screened = tmp_path / "screened.gpkg"
    assert main(["-q", "screen", str(path), "--value", "level_m", "--permutations", "99", "--out", str(screened)]) == 0
    out = tmp_path / "d.gpkg"
    code = main(["-q", "describe", str(screened), "--layer", "screened", "--value", "level_m", "--out", str(out)])
    assert code == 0
    layer = pyogrio.read_dataframe(screened, layer="screened")
    suspect = (layer["screen_status"] == "suspect").to_numpy()
    assert suspect[[11, 40]].all()
    table = pyogrio.read_dataframe(out, layer="summary").set_index("figure")
    # Reference: pandas on the screened layer's values without its suspect rows.
    assert table.loc["n", "all"] - table.loc["n", "without_suspects"] == suspect.sum()
    assert table.loc["mean", "without_suspects"] == pytest.approx(layer.loc[~suspect, "level_m"].mean(), rel=1e-12)


def test_describe_writes_the_variogram_of_the_lag_classes_asked_for(meuse_gpkg, tmp_path):
    # --lag-count / --lag-width: 15 classes of 106.4415 m on meuse hold the pair counts that
    # the gstat R package prints in tests/variogram.Rout.save (57 ... 415); the counts do not
    # depend on the values, so raw zinc without a trend is enough here.
    import json

    out = tmp_path / "variogram.gpkg"
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--detrend", "none",
                                      "--lag-count", "15", "--lag-width", "106.4415", "--out", str(out)])
    assert result.exit_code == 0, result.output
    table = pyogrio.read_dataframe(out, layer="variogram")
    omni = table[(table["direction"] == "all") & (table["estimator"] == "matheron")]
    assert omni["pairs"].tolist() == [57, 299, 419, 457, 547, 533, 574, 564, 589, 543, 500, 477, 452, 457, 415]
    assert omni["lag_high"].iloc[-1] == pytest.approx(15 * 106.4415)
    info = pyogrio.read_dataframe(out, layer="run_info").set_index("key")["value"]
    variogram = json.loads(info["variogram"])
    assert variogram["values"] == "values" and variogram["model"]["estimator"] == "cressie_hawkins"
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--lag-width", "-5"])
    assert result.exit_code == 2


@pytest.mark.parametrize("demo, options", [(True, []), (False, ["--lag-count", "8", "--detrend", "surface1"])])
def test_describe_and_screen_give_the_same_variogram(tmp_path, demo, options):
    # Both commands call pipeline.spatial_structure with the same options and seed; the stored models are read
    # back with sqlite3 (an independent reader of the GeoPackage run_info tables), so they must be equal exactly.
    # The bundled (invented) demo network is where they used to differ (nugget 0.0606 against 0.0288).
    import json
    import sqlite3
    from pathlib import Path

    demo_path = Path(__file__).resolve().parents[1] / "data_demo" / "wells.gpkg"
    source = demo_path if demo else write_points(build_wells(400, seed=31), tmp_path / "wells.gpkg")
    screened, described = tmp_path / "s.gpkg", tmp_path / "d.gpkg"
    assert main(["-q", "screen", str(source), "--value", "level_m", "--out", str(screened), *options]) == 0
    assert main(["-q", "describe", str(source), "--value", "level_m", "--out", str(described), *options]) == 0

    def stored(path):
        with sqlite3.connect(path) as db:
            row = db.execute("SELECT value FROM run_info WHERE key = 'variogram'").fetchone()
        return json.loads(row[0])

    a, b = stored(screened), stored(described)
    assert a["model"]["nugget"] is not None
    for key in ("model", "directional_models", "lag_edges", "anisotropy", "values"):
        assert a[key] == b[key], key


# --------------------------------------------------------------------------- skew, transform, context (issue 11)


def _run_info(out):
    import json

    table = pyogrio.read_dataframe(out, layer="run_info")
    return {k: json.loads(v) if isinstance(v, str) and v[:1] in "{[" else v for k, v in zip(table.iloc[:, 0], table.iloc[:, 1])}


def test_describe_says_a_strongly_skewed_positive_variable_and_offers_log(meuse_gpkg, tmp_path):
    scipy_stats = pytest.importorskip("scipy.stats")
    zinc = gpd.read_file(meuse_gpkg)["zinc"].to_numpy(float)
    # Reference: scipy.stats.skew(bias=False), the adjusted Fisher-Pearson G1 (meuse zinc, about 1.4).
    reference = scipy_stats.skew(zinc, bias=False)
    out = tmp_path / "d.gpkg"
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert f"strongly skewed (skewness {reference:.2f}, all positive)" in result.output
    assert "--transform log" in result.output
    record = _run_info(out)
    assert record["described_scale"]["strongly_skewed_positive"] is True
    assert record["described_scale"]["skewness"] == pytest.approx(reference, abs=5e-4)
    assert record["described_scale"]["scale"] == "the values"


def test_describe_with_transform_log_describes_the_logs_and_keeps_original_units(meuse_gpkg, tmp_path):
    scipy_stats = pytest.importorskip("scipy.stats")
    zinc = gpd.read_file(meuse_gpkg)["zinc"].to_numpy(float)
    out = tmp_path / "d.gpkg"
    result = CliRunner().invoke(cli, ["describe", str(meuse_gpkg), "--value", "zinc", "--transform", "log",
                                      "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "Described on the log scale (transform log" in result.output
    table = pyogrio.read_dataframe(out, layer="summary").set_index("figure")
    # the original units stay in "all" (R sf documentation: median zinc 326); the logs beside them
    assert table.loc["median", "all"] == 326.0
    # Reference: numpy's log and scipy's skew of the same values.
    assert table.loc["mean", "log_of_values"] == pytest.approx(np.log(zinc).mean(), rel=1e-12)
    assert table.loc["skewness", "log_of_values"] == pytest.approx(scipy_stats.skew(np.log(zinc), bias=False), rel=1e-9)
    # the strips describe the logs: their means are means of log(zinc) (pandas recomputation)
    strips = pyogrio.read_dataframe(out, layer="strips")
    points = pyogrio.read_dataframe(out, layer="points")
    family = strips[strips["direction"] == 90.0].set_index("strip")
    grouped = np.log(points["zinc"]).groupby(points["strip_90"]).mean()
    np.testing.assert_allclose(family.loc[grouped.index, "mean"], grouped.to_numpy(), rtol=1e-12)
    assert _run_info(out)["described_scale"]["scale"].startswith("log of the values")


def test_transform_auto_logs_a_skewed_concentration_but_not_a_level(meuse_gpkg):
    prepared = prepare(gpd.read_file(meuse_gpkg), ScreenConfig(value="zinc"))
    concentration = describe(prepared, config=ScreenConfig(value="zinc", transform="auto", quantity="concentration"))
    assert concentration.judged_summary is not None and concentration.scale["scale"].startswith("log")
    level = describe(prepared, config=ScreenConfig(value="zinc", transform="auto"))
    assert level.judged_summary is None and level.scale["scale"] == "the values"
    assert any("consider transform log" in note for note in level.notes)


def test_a_symmetric_variable_gets_no_skew_note_and_log_leaves_out_non_positive_values():
    wells = build_wells(80, seed=2)  # a plane plus small noise: not skewed
    prepared = prepare(wells, ScreenConfig(value="level_m"))
    plain = describe(prepared, config=ScreenConfig(value="level_m"))
    assert plain.scale["strongly_skewed_positive"] is False and not plain.notes
    wells.loc[[3, 5], "level_m"] = [0.0, -2.0]
    logged = describe(prepare(wells, ScreenConfig(value="level_m")), config=ScreenConfig(value="level_m", transform="log"))
    assert logged.scale["rows_not_positive"] == 2 and logged.judged_summary.n == 78
    assert "2 values not positive left out" in logged.notes[0]
    assert logged.summary.n == 80  # the original-unit summary keeps every usable row


def test_describe_uses_the_context_columns():
    wells = build_wells(60, seed=4)
    wells["ground"] = wells["level_m"] + 10.0 + np.arange(60) % 5  # depth to water 10-14 m
    wells["site"] = [f"S{i // 3}" if i < 9 else f"W{i}" for i in range(60)]  # three sites of three completions
    wells["unit"] = np.where(np.arange(60) < 20, "upper", "lower")
    wells.loc[59, "unit"] = None
    config = ScreenConfig(value="level_m", ground_elevation="ground", site="site", aquifer="unit", units="m")
    d = describe(prepare(wells, config), config=config)
    depth = wells["ground"] - wells["level_m"]
    # Reference: pandas median and quartiles of land surface minus level.
    assert d.depth_summary.median == pytest.approx(depth.median()) and d.depth_summary.p25 == pytest.approx(depth.quantile(0.25))
    assert "depth_to_water" in d.summary_table().columns
    assert d.context_info["sites_with_several_records"] == 3
    assert d.context_info["aquifer_units"] == {"lower": 39, "upper": 20, "(none)": 1}
    text = " ".join(d.notes)
    assert "Depth to water (land surface minus level) of 60 rows: median 12.00 m" in text
    assert "3 with several records (9 rows)" in text and "Aquifer units (2): lower 39, upper 20, (none) 1" in text
