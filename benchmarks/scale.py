"""Scale benchmark: 10k, 100k and 1M generated wells, each step timed, beside the I/O floor.

For each size and layout the script writes an invented, seeded layer (not
timed) and then runs, each as a fresh process (imports included, peak
memory from ``os.wait4`` through the launcher of ``speed.py``):

1. the **floor**: read the GeoPackage (``pyogrio.read_dataframe``, Arrow),
   project lon/lat to the metric work CRS with a raw ``pyproj.Transformer``,
   a ``scipy.spatial.cKDTree`` 9-nearest query (the point and 8 neighbours,
   all cores), the median of the 8 neighbours' values, and write the layer
   with that one added column (``pyogrio.write_dataframe``, Arrow);
2. ``pointsift screen IN.gpkg --value level_m --id well_id --out OUT.gpkg``
   with every default method and 999 permutations, through the real command
   line (``pointsift.cli.main``), with the time of each step: read, prepare
   (values, CRS, reprojection, coincident records), graph, each method,
   verdict and write. The read and write steps are timed by wrapping
   ``pointsift.run.read_points`` / ``write_screen`` in the child; the rest
   come from the run's own ``timings_s``.

Layouts (``benchmarks/scale.py`` makes them; nothing real):

* ``clustered``: 200 towns (wells around each centre, sd 0.5-3 km, sizes
  from a Pareto law) and 30 % rural wells, over a square that grows with n
  (100 km at 100,000 wells, so the density stays the same);
* ``uniform``: the same number of wells uniformly over the same square.

Both carry 0.5 % duplicate records (a second record at a well's spot, its
value 0.05-1 m off), 0.1 % decimal slips, a text id (``W0000001``) and a
text column; levels are a regional gradient, a smooth undulation and noise.
The coordinates are written in lon/lat (EPSG:4326), so the screen reprojects.

The cost exponent is the slope of log(seconds, less the imports) against
log(n) between the smallest and largest sizes run (n log n gives about 1.08 between 100,000 and 1,000,000).

Run ``python benchmarks/scale.py`` (10,000 and 100,000 points),
``python benchmarks/scale.py --sizes 1000000 --layouts clustered`` for a
million (minutes on 2 cores), ``--json scale.json`` to keep the figures. The
numba kernel cache is warmed once before timing (a fresh install compiles
it once, a few seconds; see ``speed.py`` for the cold start).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import sqlite3
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from speed import cli_command, timed_process  # noqa: E402

__all__ = ["make_layer", "main"]

#: Metric frame of the generated layers (UTM zone 33N); written as lon/lat.
WORK_CRS = "EPSG:32633"
ORIGIN = (400_000.0, 5_000_000.0)

_FLOOR = r"""
import json, sys, time
t0 = time.perf_counter()
import numpy as np, pyogrio
from pyproj import Transformer
from scipy.spatial import cKDTree
steps = {"import_s": time.perf_counter() - t0}
source, out, work_crs = sys.argv[1:4]
t = time.perf_counter()
frame = pyogrio.read_dataframe(source, use_arrow=True)
steps["read_s"] = time.perf_counter() - t
t = time.perf_counter()
lon, lat = frame.geometry.x.to_numpy(), frame.geometry.y.to_numpy()
x, y = Transformer.from_crs("EPSG:4326", work_crs, always_xy=True).transform(lon, lat)
steps["reproject_s"] = time.perf_counter() - t
t = time.perf_counter()
_, nearest = cKDTree(np.column_stack([x, y])).query(np.column_stack([x, y]), k=9, workers=-1)
steps["knn_query_s"] = time.perf_counter() - t
t = time.perf_counter()
frame["neighbour_median"] = np.median(frame["level_m"].to_numpy()[nearest[:, 1:]], axis=1)
steps["neighbour_median_s"] = time.perf_counter() - t
t = time.perf_counter()
pyogrio.write_dataframe(frame, out, layer="floor", driver="GPKG", use_arrow=True)
steps["write_s"] = time.perf_counter() - t
json.dump(steps, open(sys.argv[4], "w"))
"""

_SCREEN = r"""
import json, sys, time
t0 = time.perf_counter()
from pointsift import run as run_module
from pointsift.cli import main
steps = {"import_s": time.perf_counter() - t0}
def timed(name, function):
    def wrapper(*args, **kwargs):
        t = time.perf_counter()
        try:
            return function(*args, **kwargs)
        finally:
            steps[name] = steps.get(name, 0.0) + time.perf_counter() - t
    return wrapper
screen_frame = run_module.screen_frame
def screen_and_record(*args, **kwargs):
    result = screen_frame(*args, **kwargs)
    steps.update(result.run_info["timings_s"])
    return result
run_module.read_points = timed("read_s", run_module.read_points)
run_module.write_screen = timed("write_s", run_module.write_screen)
run_module.screen_frame = screen_and_record
record = sys.argv[1]
code = main(sys.argv[2:])
json.dump({"exit_code": code, "steps": steps}, open(record, "w"))
sys.exit(code)
"""


def make_layer(n: int, layout: str, seed: int = 0):
    """An invented well layer of ``n`` records (see the module notes); lon/lat."""
    import geopandas as gpd
    import numpy as np
    from pyproj import Transformer

    rng = np.random.default_rng([seed, n, 0 if layout == "clustered" else 1])
    side = 100_000.0 * math.sqrt(n / 100_000)
    duplicates = max(2, n // 200)
    wells = n - duplicates
    if layout == "clustered":
        towns = 200
        centres = rng.uniform(0.05 * side, 0.95 * side, (towns, 2))
        spread = rng.uniform(500.0, 3000.0, towns)
        weight = rng.pareto(1.5, towns) + 1.0
        in_towns = int(0.7 * wells)
        town = rng.choice(towns, in_towns, p=weight / weight.sum())
        xy = np.vstack([centres[town] + rng.normal(0, 1, (in_towns, 2)) * spread[town, None],
                        rng.uniform(0, side, (wells - in_towns, 2))])
        xy = np.clip(xy, 0.0, side)
    elif layout == "uniform":
        xy = rng.uniform(0, side, (wells, 2))
    else:
        raise ValueError(f"layout {layout!r} is not known; choose clustered or uniform")
    level = (150.0 + 0.002 * xy[:, 0] - 0.001 * xy[:, 1] + 3.0 * np.sin(xy[:, 0] / 7000.0) * np.cos(xy[:, 1] / 9000.0)
             + rng.normal(0, 0.3, wells))
    slips = rng.choice(wells, max(2, wells // 1000), replace=False)
    level[slips] *= 10.0
    twin = rng.choice(wells, duplicates, replace=False)
    xy = np.vstack([xy, xy[twin]])
    level = np.round(np.concatenate([level, level[twin] + rng.uniform(0.05, 1.0, duplicates)]), 2)
    ids = np.concatenate([np.arange(wells), twin])
    order = rng.permutation(n)
    xy, level, ids = xy[order], level[order], ids[order]
    lon, lat = Transformer.from_crs(WORK_CRS, "EPSG:4326", always_xy=True).transform(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1])
    return gpd.GeoDataFrame(
        {"well_id": np.char.add("W", np.char.zfill(ids.astype(str), 7)).astype(object),
         "level_m": level,
         "aquifer": np.where(rng.random(n) < 0.5, "upper", "lower").astype(object)},
        geometry=gpd.points_from_xy(lon, lat), crs="EPSG:4326",
    )


def _child(script: str, args: list[str], record: Path) -> dict:
    run = timed_process([sys.executable, "-c", script, *args])
    run["steps"] = json.loads(record.read_text()) if record.exists() else {}
    return run


def _warm_numba_cache(work: Path) -> None:
    """One small screen, so the timed runs load the compiled kernel from the cache."""
    small = work / "warm.gpkg"
    make_layer(2000, "uniform", 99).to_file(small, layer="wells", driver="GPKG")
    command = cli_command()
    if command:
        timed_process(command + ["screen", str(small), "--value", "level_m", "--out", str(work / "warm_out.gpkg"), "--overwrite"])


def _row(n: int, layout: str, floor: dict, screen: dict) -> dict:
    steps = screen["steps"].get("steps", {})
    return {
        "n": n, "layout": layout,
        "floor_s": floor["seconds"], "floor_peak_mib": floor["peak_mib"], "floor_steps": floor["steps"],
        "screen_s": screen["seconds"], "screen_peak_mib": screen["peak_mib"], "screen_exit": screen["exit_code"],
        "screen_steps": steps, "ratio": screen["seconds"] / floor["seconds"],
    }


def _exponent(rows: list[dict], layout: str, key: str) -> float | None:
    """Slope of log(seconds less the imports) against log(n), smallest to largest size."""
    steps = "screen_steps" if key == "screen_s" else "floor_steps"
    points = sorted((r["n"], r[key] - r[steps].get("import_s", 0.0)) for r in rows if r["layout"] == layout and r.get(key))
    if len(points) < 2:
        return None
    (n0, t0), (n1, t1) = points[0], points[-1]
    return math.log(t1 / t0) / math.log(n1 / n0)


STEP_ORDER = ("import_s", "read_s", "prepare_s", "graph_s", "local_residual_s", "local_autocorrelation_s",
              "trend_lag_pairs_variogram_s", "strips_s", "verdict_s", "write_s")


def _print_rows(rows: list[dict]) -> None:
    print("\n| n | layout | floor s | screen s | ratio | floor peak MiB | screen peak MiB |")
    print("|---|---|---|---|---|---|---|")
    for r in rows:
        print(f"| {r['n']:,} | {r['layout']} | {r['floor_s']:.1f} | {r['screen_s']:.1f} | {r['ratio']:.1f}x "
              f"| {r['floor_peak_mib']:.0f} | {r['screen_peak_mib']:.0f} |")
    print("\nsteps of the screen (s):\n")
    print("| n | layout | " + " | ".join(s.removesuffix("_s") for s in STEP_ORDER) + " |")
    print("|---|---|" + "---|" * len(STEP_ORDER))
    for r in rows:
        cells = [f"{r['screen_steps'][s]:.2f}" if s in r["screen_steps"] else "-" for s in STEP_ORDER]
        print(f"| {r['n']:,} | {r['layout']} | " + " | ".join(cells) + " |")
    print("\nsteps of the floor (s):\n")
    names = ("import_s", "read_s", "reproject_s", "knn_query_s", "neighbour_median_s", "write_s")
    print("| n | layout | " + " | ".join(s.removesuffix("_s") for s in names) + " |")
    print("|---|---|" + "---|" * len(names))
    for r in rows:
        print(f"| {r['n']:,} | {r['layout']} | " + " | ".join(f"{r['floor_steps'].get(s, float('nan')):.2f}" for s in names) + " |")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="10000,100000", help="comma-separated sizes (default 10000,100000)")
    parser.add_argument("--layouts", default="clustered,uniform", help="clustered, uniform or both")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--options", default="", help="extra screen options, e.g. '--permutations 99'")
    parser.add_argument("--keep", default=None, help="keep the generated files in this folder")
    parser.add_argument("--json", dest="json_path", default=None)
    args = parser.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",")]
    layouts = [s.strip() for s in args.layouts.split(",")]
    work = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="pointsift-scale-"))
    work.mkdir(parents=True, exist_ok=True)
    load = os.getloadavg()
    print(f"pointsift scale benchmark: sizes {sizes}, layouts {layouts}, {os.cpu_count()} CPUs, "
          f"Python {platform.python_version()}, load average at start {load[0]:.1f}")
    _warm_numba_cache(work)
    rows = []
    for n in sizes:
        for layout in layouts:
            source = work / f"{layout}_{n}.gpkg"
            if not source.exists():
                t = time.perf_counter()
                make_layer(n, layout, args.seed).to_file(source, layer="wells", driver="GPKG", engine="pyogrio")
                print(f"generated {layout} {n:,} in {time.perf_counter() - t:.1f} s -> {source}")
            for name in ("floor.gpkg", "screened.gpkg", "floor.json", "screen.json"):
                (work / name).unlink(missing_ok=True)
            floor = _child(_FLOOR, [str(source), str(work / "floor.gpkg"), WORK_CRS, str(work / "floor.json")], work / "floor.json")
            screen = _child(_SCREEN, [str(work / "screen.json"), "screen", str(source), "--value", "level_m", "--id", "well_id",
                                      "--out", str(work / "screened.gpkg"), *args.options.split()], work / "screen.json")
            if screen["exit_code"] != 0:
                print(f"screen failed: {screen['stderr_tail']}")
            row = _row(n, layout, floor, screen)
            with sqlite3.connect(work / "screened.gpkg") as db:
                info = dict(db.execute("SELECT key, value FROM run_info").fetchall())
            row["points_with_more_permutations"] = json.loads(info["local_autocorrelation"]).get("points_with_more_permutations")
            rows.append(row)
            print(f"{layout:>9} {n:>9,}: floor {floor['seconds']:6.1f} s ({floor['peak_mib']:5.0f} MiB), "
                  f"screen {screen['seconds']:6.1f} s ({screen['peak_mib']:5.0f} MiB), {row['ratio']:.1f}x the floor")
    _print_rows(rows)
    for layout in layouts:
        for key, label in (("screen_s", "screen"), ("floor_s", "floor")):
            e = _exponent(rows, layout, key)
            if e is not None:
                print(f"cost exponent, {layout}, {label}: {e:.2f}")
    load_end = os.getloadavg()
    print(f"load average at the end {load_end[0]:.1f} (2 cores: above 2 means the machine was shared)")
    if args.json_path:
        Path(args.json_path).write_text(json.dumps({"command": "python benchmarks/scale.py " + " ".join(argv or sys.argv[1:]),
                                                     "load_start": load, "load_end": load_end, "rows": rows}, indent=1) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
