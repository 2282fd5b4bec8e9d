"""Peak memory of `pointsift screen` with and without one very long id.

Invented data only: 400 wells of the seeded test layer (tests/conftest.py's
field model, rebuilt here), once as they are and once with one id of
1,000,000 characters. Each run is a fresh `pointsift screen` process; the peak
resident memory is the child's ru_maxrss (POSIX getrusage). Memory must not
depend on the longest text cell (issue: fixed-width numpy strings of ids).

    python benchmarks/long_cell_memory.py [--length 1000000]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import geopandas as gpd
import numpy as np


def _layer(n: int, long_id: int | None):
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 5000, (2, n))
    level = 200 + 0.01 * x - 0.004 * y + np.sin(x / 700) * np.cos(y / 900) + rng.normal(0, 0.2, n)
    ids = [f"W{i:04d}" for i in range(n)]
    if long_id:
        ids[5] = "X" * long_id
    return gpd.GeoDataFrame({"well_id": ids, "level_m": np.round(level, 3)},
                            geometry=gpd.points_from_xy(x + 500_000, y + 5_300_000), crs="EPSG:32633")


def _peak_mb(path: Path, out: Path) -> float:
    command = [sys.executable, "-c", "import sys; from pointsift.cli import main; sys.exit(main())",
               "-q", "screen", str(path), "--value", "level_m", "--id", "well_id", "--out", str(out), "--overwrite"]
    child = subprocess.Popen(command)
    _, status, usage = os.wait4(child.pid, 0)
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"screen failed ({status})")
    return usage.ru_maxrss / 1024  # kilobytes on Linux


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--length", type=int, default=1_000_000)
    parser.add_argument("--n", type=int, default=400)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        for label, long_id in (("short ids", None), (f"one id of {args.length:,} characters", args.length)):
            path = folder / "wells.gpkg"
            _layer(args.n, long_id).to_file(path, layer="wells")
            print(f"{args.n} points, {label}: peak {_peak_mb(path, folder / 'out.gpkg'):,.0f} MB")


if __name__ == "__main__":
    main()
