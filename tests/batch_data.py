"""Invented batch inputs shared by the batch tests (smooth synthetic levels, EPSG:32633)."""

from __future__ import annotations

import textwrap
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio


CRS = "EPSG:32633"


def synthetic_points(n: int = 120, seed: int = 0, *, crs: str | None = CRS, extra: dict | None = None) -> gpd.GeoDataFrame:
    """Scattered points with a smooth level surface plus small noise (invented data)."""
    rng = np.random.default_rng(seed)
    x = 500_000 + rng.uniform(0, 20_000, n)
    y = 5_000_000 + rng.uniform(0, 20_000, n)
    level = 100 + 0.001 * (x - 500_000) - 0.0005 * (y - 5_000_000) + rng.normal(0, 0.2, n)
    frame = pd.DataFrame({"well": [f"W{seed}-{i:04d}" for i in range(n)], "level_m": level})
    for name, values in (extra or {}).items():
        frame[name] = values
    return gpd.GeoDataFrame(frame, geometry=gpd.points_from_xy(x, y), crs=crs)


def write_gpkg(path: Path, layers: dict[str, gpd.GeoDataFrame]) -> Path:
    for name, frame in layers.items():
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="'crs' was not provided")  # layers without CRS on purpose
            pyogrio.write_dataframe(frame, path, layer=name, driver="GPKG", append=path.exists())
    return path


FAST = {"value": "level_m", "id": "well", "permutations": 99}


def make_programme(root: Path) -> Path:
    """A monitoring programme with good and bad inputs; returns the plan path."""
    data = root / "data"
    data.mkdir()
    write_gpkg(data / "north.gpkg", {"wells": synthetic_points(90, seed=11)})
    write_gpkg(data / "south.gpkg", {"wells": synthetic_points(70, seed=12)})
    (data / "corrupt.gpkg").write_bytes(b"SQLite format 3\x00" + bytes(4096))  # a truncated download
    write_gpkg(data / "no_value.gpkg", {"wells": synthetic_points(60, seed=13).rename(columns={"level_m": "head_m"})})
    write_gpkg(data / "no_crs.gpkg", {"wells": synthetic_points(60, seed=14, crs=None)})
    grouped = root / "grouped"
    grouped.mkdir()
    network = np.repeat(np.array(["A", "B", "C"], dtype=object), [50, 40, 30])
    write_gpkg(grouped / "regional.gpkg", {"wells": synthetic_points(120, seed=15, extra={"network": network})})
    springs = synthetic_points(50, seed=16)
    table = pd.DataFrame({"well": springs["well"], "level_m": springs["level_m"],
                          "easting": springs.geometry.x, "northing": springs.geometry.y})
    table.to_csv(root / "springs.csv", index=False)
    plan = root / "plan.toml"
    plan.write_text(textwrap.dedent("""
        [batch]
        out_dir = "screened"

        [defaults]
        value = "level_m"
        id = "well"
        permutations = 99

        [[input]]
        path = "data"

        [[input]]
        path = "grouped/regional.gpkg"
        by = "network"

        [[input]]
        path = "springs.csv"
        x = "easting"
        y = "northing"
        crs = "EPSG:32633"
    """))
    return plan


def read_index(out_dir: Path) -> pd.DataFrame:
    return pd.read_csv(out_dir / "batch-index.csv", keep_default_na=False, dtype=str).set_index("unit")


def line_of(text: str, fragment: str, start: int = 0) -> int:
    """1-based number of the first line containing ``fragment`` at or after line ``start``."""
    lines = text.splitlines()
    for number in range(start, len(lines)):
        if fragment in lines[number]:
            return number + 1
    raise AssertionError(f"{fragment!r} not in text")
