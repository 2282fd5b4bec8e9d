"""Fuzz test of the whole screen over generated layers (hypothesis).

Layers are invented by hypothesis: odd values (NaN, infinities, no-data codes,
text and decimal commas in the value column), duplicated points, tiny and huge
coordinates, every kind of CRS (geographic, UTM, US feet, Web Mercator, a local
engineering CRS, none with --crs) and every input format. Whatever the layer,
the screen either finishes with one output row per input row or stops with a
pointsift error naming the problem; never an internal error. The input bytes
never change, and the output passes SQLite's own integrity check (sqlite3,
``PRAGMA integrity_check``), an independent reader of GeoPackages.
"""

from __future__ import annotations

import sqlite3
import tempfile
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from conftest import fingerprint, leftovers
from hypothesis import HealthCheck, event, given, reject, settings
from hypothesis import strategies as st
from pyproj import CRS

from pointsift.config import ScreenConfig
from pointsift.errors import PointsiftError
from pointsift.run import screen_file

_SITE_GRID = CRS.from_wkt(
    'ENGCRS["Site grid",EDATUM["Site datum"],CS[Cartesian,2],'
    'AXIS["easting (x)",east,ORDER[1],LENGTHUNIT["metre",1]],AXIS["northing (y)",north,ORDER[2],LENGTHUNIT["metre",1]]]'
)

#: CRS kind -> (CRS of the layer, centre of the invented points in it, spread in its units)
_CRS_KINDS = {
    "geographic": ("EPSG:4326", (15.0, 47.0), 0.05),
    "utm": ("EPSG:32633", (500_000.0, 5_300_000.0), 5_000.0),
    "us_feet": ("EPSG:2227", (6_000_000.0, 2_000_000.0), 15_000.0),
    "web_mercator": ("EPSG:3857", (1_670_000.0, 8_000_000.0), 8_000.0),
    "engineering": (_SITE_GRID, (1_000.0, 2_000.0), 500.0),
    "none": (None, (500_000.0, 5_300_000.0), 5_000.0),
}

_ODD_TEXT = ["dry", "n/a", "", " 12.5 ", "1,5", "319,910", "-9999", "1e400", "--", "12.5.3"]


@st.composite
def layers(draw):
    n = draw(st.integers(min_value=6, max_value=45))
    kind = draw(st.sampled_from(sorted(_CRS_KINDS)))
    suffix = draw(st.sampled_from([".gpkg", ".csv", ".shp", ".parquet"]))
    crs, (cx, cy), spread = _CRS_KINDS[kind]
    scale = draw(st.sampled_from([1e-7, 1e-3, 1.0, 1.0, 1.0, 50.0]))
    seed = draw(st.integers(min_value=0, max_value=2**16))
    rng = np.random.default_rng(seed)
    x = cx + rng.uniform(-1, 1, n) * spread * scale
    y = cy + rng.uniform(-1, 1, n) * spread * scale
    duplicates = draw(st.integers(min_value=0, max_value=n // 3))
    for row in range(duplicates):  # points at the very same spot as another
        x[row + 1], y[row + 1] = x[0], y[0]
    extremes = draw(st.lists(st.sampled_from([1e300, -1e10, 1e-300, np.nan, 0.0]), max_size=3))
    for row, value in enumerate(extremes):
        x[n - 1 - row] = value
    values = list(100 + 0.01 * rng.uniform(0, 1, n) * spread + rng.normal(0, 0.3, n))
    odd = draw(st.lists(st.tuples(st.integers(0, n - 1), st.one_of(
        st.sampled_from([np.nan, np.inf, -np.inf, -9999.0, 0.0, 1e308, -1e-308]),
        st.sampled_from(_ODD_TEXT),
        st.floats(allow_nan=True, allow_infinity=True),
    )), max_size=8))
    for row, value in odd:
        values[row] = value
    if any(isinstance(v, str) for v in values):
        values = [v if isinstance(v, str) else repr(float(v)) for v in values]  # text in a numeric column
        column = pd.Series(values, dtype=object)
    else:
        column = pd.Series(values, dtype=float)
    frame = gpd.GeoDataFrame(
        {"well_id": [f"F{i}" for i in range(n)], "level_m": column},
        geometry=gpd.points_from_xy(x, y), crs=crs,
    )
    return frame, suffix, kind


def _write(frame: gpd.GeoDataFrame, path: Path) -> None:
    import pyogrio

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the fixture's own writes (odd CRSs, odd numbers)
        if path.suffix == ".csv":
            table = pd.DataFrame(frame.drop(columns="geometry"))
            table["x"], table["y"] = frame.geometry.x.to_numpy(), frame.geometry.y.to_numpy()
            table.to_csv(path, index=False)
        elif path.suffix == ".parquet":
            frame.to_parquet(path)
        elif path.suffix == ".shp":
            pyogrio.write_dataframe(frame, path, driver="ESRI Shapefile")
        else:
            pyogrio.write_dataframe(frame, path, layer="wells", driver="GPKG")


@settings(max_examples=30, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(layers())
def test_no_internal_error_no_row_lost_input_unchanged_output_sound(layer):
    frame, suffix, kind = layer
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        source = folder / f"layer{suffix}"
        try:
            _write(frame, source)
        except Exception:
            reject()  # the fixture's writer cannot store this layer: not pointsift's doing
        before = fingerprint(source)
        crs = None  # the layer's own
        if kind == "none":
            crs = "EPSG:32633"
        elif suffix == ".csv":  # a table has no CRS: say it as --crs would
            crs = _SITE_GRID.to_wkt() if kind == "engineering" else _CRS_KINDS[kind][0]
        config = ScreenConfig(value="level_m", id="well_id", crs=crs, permutations=99)
        out = folder / "out.gpkg"
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                run = screen_file(source, out, config)
        except PointsiftError as exc:
            event(f"stopped: {type(exc).__name__}")
            assert str(exc).strip(), "a pointsift error must say what is wrong"
            assert not out.exists()
        else:
            event(f"screened ({kind})")
            assert sum(run.counts.values()) == len(frame)  # rows out == rows in
            with sqlite3.connect(out) as db:  # Reference: SQLite's own integrity check
                assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
                assert db.execute('SELECT COUNT(*) FROM "screened"').fetchone()[0] == len(frame)
        assert fingerprint(source) == before  # the input is never modified
        assert leftovers(folder) == []
