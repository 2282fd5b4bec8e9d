"""Shared fixtures: tiny invented point layers built in code and written to tmp_path.

Nothing here is real data. A "well field" is a regional plane (the general
gradient of a water table), a gentle smooth undulation and independent normal
noise, with points placed uniformly at random in a square of projected metres
(UTM zone 33N, EPSG:32633). The undulation gives the layer spatial structure,
as real water levels have (a pure plane plus white noise leaves nothing for the
variogram fits of the screen but a nugget, which they fit slowly).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

#: Projected CRS of the invented layers (metres).
METRIC_CRS = "EPSG:32633"
#: Offset of the invented square inside the UTM zone (metres), so that the
#: points have plausible UTM coordinates.
ORIGIN = (500_000.0, 5_300_000.0)


def build_wells(
    n: int = 200,
    *,
    seed: int = 0,
    extent: float = 5000.0,
    noise: float = 0.2,
    gradient: tuple[float, float] = (0.01, -0.004),
    base: float = 200.0,
    wave: float = 1.0,
    crs: str | None = METRIC_CRS,
) -> gpd.GeoDataFrame:
    """An invented well layer: ``well_id`` (text), ``level_m`` (float),
    ``aquifer`` (text), ``depth_m`` (int64), ``sampled`` (text date), point geometry.

    ``level_m = base + gx * x + gy * y + wave * sin(x / 700) * cos(y / 900) + N(0, noise)``
    with x, y in metres from the south-west corner of the square.
    """
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0.0, extent, (2, n))
    level = base + gradient[0] * x + gradient[1] * y + wave * np.sin(x / 700) * np.cos(y / 900) + rng.normal(0.0, noise, n)
    return gpd.GeoDataFrame(
        {
            "well_id": [f"W{i:04d}" for i in range(n)],
            "level_m": np.round(level, 3),
            "aquifer": np.where(rng.random(n) < 0.5, "upper", "lower").astype(object),
            "depth_m": rng.integers(10, 120, n).astype("int64"),
            "sampled": [f"2026-04-{1 + i % 28:02d}" for i in range(n)],
        },
        geometry=gpd.points_from_xy(x + ORIGIN[0], y + ORIGIN[1]),
        crs=crs,
    )


def invented_programme(wells: int, campaigns: int, **options) -> gpd.GeoDataFrame:
    """An invented monitoring programme in long form (``benchmarks/programme.py``, seeded; not a real survey)."""
    import importlib.util
    import sys

    spec = importlib.util.spec_from_file_location("programme", Path(__file__).resolve().parents[1] / "benchmarks"
                                                  / "programme.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["programme"] = module
    spec.loader.exec_module(module)
    return module.make_programme(wells, campaigns, **options)


def to_lonlat(gdf: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """The same layer in EPSG:4326 (longitude/latitude)."""
    return gdf.to_crs("EPSG:4326")


def write_points(gdf: gpd.GeoDataFrame, path: Path, *, layer: str = "wells", xy_names=("x", "y")) -> Path:
    """Write a layer as GeoPackage / shapefile / CSV / GeoParquet, chosen by suffix.

    CSV files hold the coordinates in columns ``xy_names`` instead of a geometry.
    """
    import pyogrio

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".gpkg":
        pyogrio.write_dataframe(gdf, path, layer=layer, driver="GPKG", append=path.exists())
    elif suffix == ".shp":
        pyogrio.write_dataframe(gdf, path, driver="ESRI Shapefile")
    elif suffix == ".csv":
        table = pd.DataFrame(gdf.drop(columns=gdf.geometry.name))
        located = ~(gdf.geometry.isna() | gdf.geometry.is_empty)
        xs = np.full(len(gdf), np.nan)
        ys = np.full(len(gdf), np.nan)
        xs[located.to_numpy()] = shapely.get_x(gdf.geometry.array[located.to_numpy()])
        ys[located.to_numpy()] = shapely.get_y(gdf.geometry.array[located.to_numpy()])
        table[xy_names[0]] = xs
        table[xy_names[1]] = ys
        table.to_csv(path, index=False)
    elif suffix in (".parquet", ".geoparquet"):
        gdf.to_parquet(path)
    else:  # pragma: no cover - a mistake in a test
        raise ValueError(f"no writer for {suffix}")
    return path


def fingerprint(path: Path) -> str:
    """SHA-256 (hashlib) over a file and, for a shapefile, every side file with its stem.

    Independent of :func:`pointsift.io.file_sha256`: used to prove an input was
    not touched.
    """
    path = Path(path)
    files = sorted(p for p in path.parent.iterdir() if p.stem == path.stem) if path.suffix.lower() == ".shp" else [path]
    digest = hashlib.sha256()
    for item in files:
        digest.update(item.name.encode())
        digest.update(item.read_bytes())
    return digest.hexdigest()


def leftovers(folder: Path) -> list[str]:
    """Temporary or partial files left in a folder."""
    return sorted(p.name for p in Path(folder).iterdir() if "partial" in p.name or p.name.endswith(("-journal", "-wal", "-shm")))


@pytest.fixture
def make_wells():
    """Factory: ``make_wells(n=200, seed=0, ...)`` -> invented GeoDataFrame (see :func:`build_wells`)."""
    return build_wells


@pytest.fixture
def write_layer():
    """Function ``write_layer(gdf, path, layer="wells", xy_names=("x", "y"))`` (format from the suffix)."""
    return write_points


@pytest.fixture
def file_fingerprint():
    """Function ``file_fingerprint(path)`` -> hashlib SHA-256 of the file (and shapefile side files)."""
    return fingerprint


@pytest.fixture
def wells_gpkg(tmp_path):
    """A one-layer GeoPackage of 200 invented wells (layer ``wells``, EPSG:32633)."""
    return write_points(build_wells(200, seed=1), tmp_path / "wells.gpkg")
