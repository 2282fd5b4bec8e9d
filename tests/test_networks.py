"""Tests of the planted-error network generator (benchmarks/networks.py) and the demo data."""

from __future__ import annotations

import builtins
import importlib.util
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyogrio
import pytest
import scipy.constants
import scipy.stats
from pyproj import Geod, Transformer

ROOT = Path(__file__).resolve().parents[1]


def _load(name: str, path: Path):
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


networks = _load("networks", ROOT / "benchmarks" / "networks.py")
make_demo = _load("make_demo", ROOT / "data_demo" / "make_demo.py")

# WGS84 geodesics (Karney 2013, as implemented by PROJ's geod): an outside yardstick for distances
GEOD = Geod(ellps="WGS84")
SMALL = {"dense": 1200, "clustered": 1200, "sparse": 300, "trended": 1000, "large": 5000}


@pytest.fixture(scope="module", params=list(networks.NETWORK_KINDS))
def network(request):
    kind = request.param
    return kind, *networks.make_network(kind, SMALL[kind], seed=11)


def _rows(truth, kind):
    return truth.index[truth["kind"] == kind].to_numpy()


def test_same_seed_same_network_other_seed_other_network():
    first = networks.make_network("clustered", 800, seed=5)
    again = networks.make_network("clustered", 800, seed=5)
    other = networks.make_network("clustered", 800, seed=6)
    pd.testing.assert_frame_equal(first[1], again[1])
    pd.testing.assert_series_equal(first[0]["level_m"], again[0]["level_m"])
    assert first[0].geometry.geom_equals_exact(again[0].geometry, tolerance=0).all()
    assert not np.allclose(first[0]["level_m"].to_numpy(), other[0]["level_m"].to_numpy())


def test_shape_and_labels(network):
    kind, wells, truth = network
    assert len(wells) == len(truth) == SMALL[kind]
    assert truth["row"].tolist() == list(range(len(wells)))
    assert wells["well_id"].tolist() == truth["well_id"].tolist()
    assert np.array_equal(wells["level_m"].to_numpy(), truth["planted_level_m"].to_numpy())
    assert set(truth["kind"]) <= {"sound", "cone", *networks.ERROR_KINDS}
    assert np.array_equal(truth["is_error"].to_numpy(), ~truth["kind"].isin(["sound", "cone"]).to_numpy())
    per_kind = truth.attrs["errors_per_kind"]
    counts = truth["kind"].value_counts()
    for error in networks.ERROR_KINDS:
        assert counts.get(error, 0) == per_kind - truth.attrs["skipped"][error]
    assert wells.crs.to_epsg() == 4326


def test_levels_are_realistic(network):
    # monitoring-well levels of a few hundred metres above datum: common practice for a valley aquifer
    _, _, truth = network
    clean = truth.loc[~truth["is_error"], "clean_level_m"]
    assert clean.between(150, 600).all(), (clean.min(), clean.max())


def test_sound_and_cone_records_are_untouched(network):
    _, wells, truth = network
    sound = ~truth["is_error"].to_numpy()
    assert np.array_equal(truth["clean_level_m"].to_numpy()[sound], wells["level_m"].to_numpy()[sound])
    assert np.allclose(wells.geometry.x.to_numpy()[sound], truth["true_x"].to_numpy()[sound], rtol=0, atol=0)
    assert np.allclose(wells.geometry.y.to_numpy()[sound], truth["true_y"].to_numpy()[sound], rtol=0, atol=0)


def test_decimal_slip_is_a_factor_of_ten(network):
    _, _, truth = network
    rows = _rows(truth, "decimal_slip")
    ratio = truth.loc[rows, "planted_level_m"] / truth.loc[rows, "clean_level_m"]
    # values are recorded to the centimetre, so the ratio is 10 or 0.1 up to 0.005 / level
    near_ten = np.isclose(ratio, 10, rtol=1e-4)
    near_tenth = np.isclose(ratio, 0.1, rtol=2e-3)
    assert (near_ten | near_tenth).all()


def test_feet_entered_as_metres(network):
    _, _, truth = network
    rows = _rows(truth, "feet_as_metres")
    # the international foot is 0.3048 m exactly: scipy.constants.foot
    in_metres = truth.loc[rows, "planted_level_m"] * scipy.constants.foot
    assert np.allclose(in_metres, truth.loc[rows, "clean_level_m"], atol=0.005)


def test_depth_to_water_entered_as_level(network):
    _, _, truth = network
    rows = _rows(truth, "depth_as_level")
    assert truth.loc[rows, "planted_level_m"].between(5, 60).all()
    assert (truth.loc[rows, "clean_level_m"] >= 150).all()


def test_transposed_digits_swap_two_neighbouring_digits_and_matter(network):
    _, _, truth = network
    rows = _rows(truth, "transposed_digits")
    assert rows.size > 0
    for row in rows:
        before = f"{truth.at[row, 'clean_level_m']:.2f}".replace(".", "")
        after = f"{truth.at[row, 'planted_level_m']:.2f}".replace(".", "")
        differ = [i for i, (a, b) in enumerate(zip(before, after)) if a != b]
        assert len(before) == len(after) and len(differ) == 2 and differ[1] == differ[0] + 1
        i = differ[0]
        assert before[i] == after[i + 1] and before[i + 1] == after[i]
        change = abs(truth.at[row, "planted_level_m"] - truth.at[row, "clean_level_m"])
        assert change >= 2 * truth.at[row, "local_sd_m"] - 1e-9


def test_transpose_digits_skips_small_swaps():
    rng = np.random.default_rng(0)
    # 433.33 has no unequal neighbouring digits except 4-3; swapping them moves the value by 90
    assert networks.transpose_digits(433.33, rng, min_change=100.0) is None
    new, _ = networks.transpose_digits(433.33, rng, min_change=50.0)
    assert new == 343.33


def test_spikes_are_four_to_eight_local_sd(network):
    _, _, truth = network
    rows = _rows(truth, "spike")
    size = (truth.loc[rows, "planted_level_m"] - truth.loc[rows, "clean_level_m"]).abs()
    in_sd = size / truth.loc[rows, "local_sd_m"]
    # rounding to the centimetre moves a spike by at most 0.005 m
    slack = 0.005 / truth.loc[rows, "local_sd_m"]
    assert (in_sd >= 4 - slack).all() and (in_sd <= 8 + slack).all()


def test_misplaced_wells_moved_two_to_ten_km_value_kept(network):
    _, wells, truth = network
    rows = _rows(truth, "misplaced")
    assert rows.size > 0
    _, _, metres = GEOD.inv(wells.geometry.x.to_numpy()[rows], wells.geometry.y.to_numpy()[rows],
                            truth.loc[rows, "true_x"].to_numpy(), truth.loc[rows, "true_y"].to_numpy())
    # moves are drawn 2-10 km in UTM grid metres; the grid scale within 160 km of the central
    # meridian differs from 1 by under 0.1 % (UTM scale factor 0.9996 on the meridian)
    assert (metres >= 2000 * 0.998).all() and (metres <= 10000 * 1.002).all()
    assert np.array_equal(truth.loc[rows, "planted_level_m"], truth.loc[rows, "clean_level_m"])


def test_duplicate_conflict_is_a_second_record_at_the_same_spot(network):
    _, wells, truth = network
    rows = _rows(truth, "duplicate_conflict")
    assert rows.size > 0
    for row in rows:
        twins = np.flatnonzero((wells["well_id"] == wells.at[row, "well_id"]).to_numpy())
        assert twins.size == 2
        other = twins[twins != row][0]
        assert wells.geometry.iloc[other].equals_exact(wells.geometry.iloc[row], tolerance=0)
        assert truth.at[other, "kind"] == "sound"
        assert abs(wells.at[row, "level_m"] - wells.at[other, "level_m"]) >= 2.0 - 0.01


def test_cone_wells_are_inside_a_cone_and_low_together(network):
    kind, wells, truth = network
    cone = truth["kind"].to_numpy() == "cone"
    assert cone.sum() >= 3
    to_metres = Transformer.from_crs("EPSG:4326", networks.WORK_CRS, always_xy=True)
    x, y = to_metres.transform(wells.geometry.x.to_numpy(), wells.geometry.y.to_numpy())
    x_km = (x - networks.ORIGIN_EASTING) / 1000
    y_km = (y - networks.ORIGIN_NORTHING) / 1000
    centres = np.asarray(truth.attrs["cone_centres_km"])
    widths = np.asarray(truth.attrs["cone_sds_km"])
    reach = np.hypot(x_km[:, None] - centres[:, 0], y_km[:, None] - centres[:, 1]) / widths
    assert (reach[cone].min(axis=1) <= 2.0 + 1e-9).all()
    # the wells closest to a cone centre sit lower than the sound wells in a ring 3-6 widths out
    nearest_centre = reach.argmin(axis=0)
    for c in range(len(centres)):
        inner = cone & (reach[:, c] <= 1.0)
        ring = (truth["kind"].to_numpy() == "sound") & (reach[:, c] >= 3) & (reach[:, c] <= 6)
        if inner.sum() >= 2 and ring.sum() >= 5:
            assert np.median(truth["clean_level_m"].to_numpy()[inner]) < np.median(
                truth["clean_level_m"].to_numpy()[ring]
            ), (kind, c, nearest_centre)


def test_local_sd_matches_lstsq_and_scipy_mad():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 10, (60, 2))
    values = 100 + 2 * xy[:, 0] - xy[:, 1] + rng.normal(0, 0.3, 60)
    from scipy.spatial import cKDTree

    tree = cKDTree(xy)
    # leave-one-out plane residuals computed independently with numpy.linalg.lstsq
    loo = np.empty(60)
    for i in range(60):
        _, near = tree.query(xy[i], k=9)
        near = [j for j in near if j != i][:8]
        design = np.column_stack([np.ones(8), xy[near] - xy[i]])
        coef, *_ = np.linalg.lstsq(design, values[near], rcond=None)
        loo[i] = values[i] - coef[0]
    expected = np.empty(60)
    for i in range(60):
        _, pool = tree.query(xy[i], k=25)
        # scipy.stats.median_abs_deviation about 0 with scale="normal" is 1.4826 x median |r|
        expected[i] = scipy.stats.median_abs_deviation(loo[pool], center=lambda a, axis: 0, scale="normal")
    got = networks.local_sd(xy, values)
    assert np.allclose(got, expected, rtol=2e-4)


def test_small_scale_variation_has_the_gaussian_covariance():
    # random Fourier features (Rahimi & Recht, 2007): E[f(0) f(h)] = sd^2 exp(-h^2 / (2 l^2))
    spec = networks.spec_for("dense")
    sd, length = spec.wander_sd_m, spec.wander_km
    lags = np.array([0.0, 1.5, 3.0, 6.0])
    products = []
    for seed in range(400):
        rng = np.random.default_rng(seed)
        field = networks._Field(spec, np.zeros(2), np.zeros((0, 2)), np.zeros(0), np.zeros(0),
                                rng.normal(0, 1 / length, (2, 64)), rng.uniform(0, 2 * np.pi, 64))
        values = field.wander(lags, np.zeros_like(lags))
        products.append(values[0] * values)
    empirical = np.mean(products, axis=0)
    theory = sd**2 * np.exp(-(lags**2) / (2 * length**2))
    # 400 draws: the standard error of each mean product is about sd^2 * 1.4 / 20 = 0.1 m2
    assert np.allclose(empirical, theory, atol=0.3), (empirical, theory)


def test_generator_reads_no_file(monkeypatch):
    # invented from the seed alone: no file (real data or otherwise) is opened from Python
    def refuse(*args, **kwargs):
        raise AssertionError(f"make_network opened a file: {args[:1]}")

    monkeypatch.setattr(builtins, "open", refuse)
    wells, _ = networks.make_network("sparse", seed=1)
    assert len(wells) == 300


def test_unknown_kind_lists_the_known_ones():
    with pytest.raises(ValueError, match="choose one of dense, clustered, sparse, trended, large"):
        networks.make_network("urban")


def test_large_network_grows_its_extent():
    assert networks.spec_for("large", 1_000_000).width_km == pytest.approx(100 * np.sqrt(10))
    wells, truth = networks.make_network("large", 20_000, seed=2)
    assert len(wells) == 20_000 and truth["is_error"].sum() > 0


def test_demo_files_are_what_the_seeded_script_writes(tmp_path):
    written = make_demo.write_demo(tmp_path)
    demo = ROOT / "data_demo"
    assert (demo / "wells.csv").read_bytes() == written["csv"].read_bytes()
    assert (demo / "wells_truth.csv").read_bytes() == written["truth"].read_bytes()
    # the GeoPackage read back with pyogrio (GDAL) holds the CSV's records
    layer = pyogrio.read_dataframe(demo / "wells.gpkg", layer="wells")
    table = pd.read_csv(demo / "wells.csv", dtype={"level_m": str})
    assert len(layer) == len(table) == 2000
    assert layer["well_id"].tolist() == table["well_id"].tolist()
    assert np.allclose(layer.geometry.x, table["lon"]) and np.allclose(layer.geometry.y, table["lat"])
    numeric = pd.to_numeric(table["level_m"], errors="coerce")
    assert np.allclose(layer["level_m"], numeric, equal_nan=True)
    assert (demo / "wells.gpkg").stat().st_size < 2_000_000


def test_demo_truth_points_at_the_planted_records():
    table = pd.read_csv(ROOT / "data_demo" / "wells.csv", dtype={"level_m": str})
    truth = pd.read_csv(ROOT / "data_demo" / "wells_truth.csv")
    by_kind = truth.groupby("kind")["row"].apply(list).to_dict()
    assert table.at[by_kind["sentinel"][0], "level_m"] == "-9999.0"
    assert pd.isna(table.at[by_kind["blank"][0], "level_m"])
    assert table.at[by_kind["text_value"][0], "level_m"] == "dry"
    for kind in networks.ERROR_KINDS:
        assert len(by_kind[kind]) == 1
    assert len(by_kind["cone"]) >= 10
    assert (table.loc[truth["row"], "well_id"].to_numpy() == truth["well_id"].to_numpy()).all()
    # the depth-to-water slip equals ground minus the true level of that well
    row = by_kind["depth_as_level"][0]
    assert 5 <= float(table.at[row, "level_m"]) <= 60


def test_demo_is_declared_invented_and_placed_at_sea():
    readme = (ROOT / "data_demo" / "README.md").read_text()
    assert "invented" in readme.lower()
    table = pd.read_csv(ROOT / "data_demo" / "wells.csv", usecols=["lon", "lat"])
    # open South Atlantic, far from any coast (the nearest land, Tristan da Cunha, is near 12 W 37 S)
    assert table["lon"].between(-21.5, -20.5).all() and table["lat"].between(-32.8, -32.2).all()
