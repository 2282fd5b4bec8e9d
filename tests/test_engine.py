"""The Dask engine gives the single-process result exactly (a real distributed.LocalCluster on loopback).

The reference is pointsift's own single-process screen: the engine must not
change any number, status or reason. Data are invented (clustered towns,
rural wells, duplicate records, decimal slips).
"""

from __future__ import annotations

import sys

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest

from pointsift import cli
from pointsift.config import OptionError, ScreenConfig
from pointsift.errors import ConfigError
from pointsift.pipeline import screen_frame

from conftest import METRIC_CRS, ORIGIN


def invented_network(n: int, seed: int = 0) -> gpd.GeoDataFrame:
    """Towns of wells and rural wells over a square growing with n; 0.5 % duplicate records, 0.1 % slips."""
    rng = np.random.default_rng(seed)
    side = 60_000.0 * np.sqrt(n / 50_000)
    towns = rng.uniform(0.05 * side, 0.95 * side, (60, 2))
    in_towns = int(0.7 * n)
    xy = np.vstack([towns[rng.integers(0, 60, in_towns)] + rng.normal(0, 1, (in_towns, 2)) * rng.uniform(300, 2000),
                    rng.uniform(0, side, (n - in_towns, 2))])
    twins = rng.choice(n, n // 200, replace=False)
    xy[rng.choice(np.setdiff1d(np.arange(n), twins), twins.size, replace=False)] = xy[twins]
    level = 150 + 0.002 * xy[:, 0] - 0.001 * xy[:, 1] + 3 * np.sin(xy[:, 0] / 7000) + rng.normal(0, 0.3, n)
    slips = rng.choice(n, n // 1000, replace=False)
    level[slips] *= 10
    return gpd.GeoDataFrame(
        {"well_id": [f"W{i:06d}" for i in range(n)], "level_m": np.round(level, 2),
         "aquifer": np.where(rng.random(n) < 0.5, "upper", "lower").astype(object)},
        geometry=gpd.points_from_xy(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1]), crs=METRIC_CRS)


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed", reason="the dask extra is not installed: pip install 'pointsift[dask]'")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=":0") as local:
        yield local


def assert_same_layers(path_a, path_b, layers=("screened", "lag_pairs", "strips")):
    for layer in layers:
        a = gpd.read_file(path_a, layer=layer)
        b = gpd.read_file(path_b, layer=layer)
        pd.testing.assert_frame_equal(a, b, check_exact=True)


@pytest.mark.distributed
def test_dask_engine_through_the_command_line_equals_one_process(cluster, tmp_path):
    wells = invented_network(50_000, seed=13)
    source = tmp_path / "wells.gpkg"
    wells.to_file(source, layer="wells")
    common = ["screen", str(source), "--value", "level_m", "--id", "well_id"]
    assert cli.main([*common, "--out", str(tmp_path / "one.gpkg")]) == 0
    assert cli.main([*common, "--out", str(tmp_path / "dask.gpkg"), "--engine", "dask", "--scheduler",
                     cluster.scheduler_address, "--partition-size", "10000"]) == 0
    assert_same_layers(tmp_path / "one.gpkg", tmp_path / "dask.gpkg")
    screened = gpd.read_file(tmp_path / "dask.gpkg", layer="screened")
    assert (screened["coincident_role"].notna()).sum() >= 400  # the duplicates were judged as such
    assert (screened["screen_status"] == "suspect").sum() >= 40  # the slips


@pytest.mark.distributed
def test_dask_engine_equals_one_process_within_aquifer_units_and_a_band(cluster):
    # several graphs per run (one per aquifer unit), and a distance band with its cap and limit
    for n, options in ((6_000, dict(aquifer="aquifer")), (2_500, dict(within="1500m"))):
        wells = invented_network(n, seed=5)
        config = ScreenConfig(value="level_m", id="well_id", permutations=99, **options)
        one = screen_frame(wells, config)
        spread = screen_frame(wells, config.replace(engine="dask", scheduler=cluster.scheduler_address,
                                                    partition_size=500))
        pd.testing.assert_frame_equal(one.frame, spread.frame, check_exact=True)
        record = spread.run_info["engine"]
        assert record["workers"] == 2 and all(g["partitions"] == n // 500 for g in record["graphs"])
        assert len(record["graphs"]) == (3 if "aquifer" in options else 1)  # all wells, then one graph per unit


@pytest.mark.distributed
def test_dask_engine_starts_and_closes_its_own_cluster(tmp_path):
    pytest.importorskip("distributed", reason="the dask extra is not installed: pip install 'pointsift[dask]'")
    import psutil

    before = {p.pid for p in psutil.Process().children(recursive=True)}
    wells = invented_network(1_500, seed=2)
    config = ScreenConfig(value="level_m", id="well_id", permutations=99)
    spread = screen_frame(wells, config.replace(engine="dask", partition_size=500))
    pd.testing.assert_frame_equal(screen_frame(wells, config).frame, spread.frame, check_exact=True)
    left = [p for p in psutil.Process().children(recursive=True) if p.pid not in before and p.is_running()
            and p.status() != psutil.STATUS_ZOMBIE]
    assert not left, f"worker processes left running: {left}"


def test_scheduler_without_the_dask_engine_is_refused():
    with pytest.raises(OptionError, match=r"engine='dask'"):
        ScreenConfig(value="level_m", scheduler="tcp://127.0.0.1:8786")


def test_dask_engine_without_dask_names_the_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    with pytest.raises(ConfigError, match=r"pip install 'pointsift\[dask\]'"):
        screen_frame(invented_network(300), ScreenConfig(value="level_m", engine="dask"))
