"""Tests of pointsift.batch.index (reference: pyogrio, pyproj, shapely reading back).

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations


import numpy as np
import pandas as pd
import pyogrio
from pyproj import Transformer

from pointsift import batch
from pointsift.config import ScreenConfig
from batch_data import CRS


def test_index_written_as_csv_and_lonlat_extent_layer(tmp_path):
    config = ScreenConfig(value="level_m")
    units = [batch.Unit(name=f"u{i}", path=tmp_path / f"u{i}.gpkg", display=f"u{i}.gpkg", config=config)
             for i in range(3)]
    bounds = (500_000.0, 5_000_000.0, 520_000.0, 5_020_000.0)
    # reference: pyproj's own transform_bounds for the extent in longitude/latitude
    lonlat = Transformer.from_crs(CRS, "EPSG:4326", always_xy=True).transform_bounds(*bounds, densify_pts=21)
    outcomes = [
        batch.UnitOutcome(units[0], "done", counts={"suspect": 1, "review": 2, "ok": 96, "unscreened": 1},
                          points=100, seconds=0.5, output="u0.gpkg", input_crs="EPSG:32633",
                          extent_lonlat=batch.runner._lonlat_extent(bounds, CRS)),
        batch.UnitOutcome(units[1], "skipped-up-to-date", counts={"suspect": 0, "review": 0, "ok": 5, "unscreened": 0},
                          points=5, output="u1.gpkg"),
        batch.UnitOutcome(units[2], "failed", message="Layer has no CRS. Pass crs."),
    ]
    csv_path, gpkg_path = batch.write_index(outcomes, tmp_path)
    table = pd.read_csv(csv_path, keep_default_na=False, dtype=str)
    assert list(table.columns) == list(batch.INDEX_COLUMNS)
    assert table["outcome"].tolist() == ["done", "skipped-up-to-date", "failed"]
    assert table.loc[2, "message"] == "Layer has no CRS. Pass crs."
    assert table.loc[0, "suspect"] == "1" and table.loc[2, "suspect"] == ""
    layer = pyogrio.read_dataframe(gpkg_path, layer=batch.INDEX_LAYER)
    assert layer.crs.to_epsg() == 4326
    np.testing.assert_allclose(layer.geometry.iloc[0].bounds, lonlat, rtol=0, atol=1e-9)
    assert layer.geometry.iloc[2] is None or layer.geometry.iloc[2].is_empty
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp") or ".tmp." in p.name]


def test_batch_index_carries_the_caution(tmp_path):
    # Issue 10, item 19: the batch index had no caution.
    import sqlite3

    from batch_data import synthetic_points, write_gpkg

    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(60, seed=4)})
    assert main(["-q", "batch", str(tmp_path / "a.gpkg"), "--value", "level_m", "--out-dir", str(tmp_path / "o"),
                 "--permutations", "99"]) == 0
    with sqlite3.connect(tmp_path / "o" / "batch-index.gpkg") as db:  # Reference: gpkg_contents, read by sqlite3
        text = db.execute("SELECT description FROM gpkg_contents WHERE table_name = ?", (batch.INDEX_LAYER,)).fetchone()[0]
    assert "not determinations" in text
