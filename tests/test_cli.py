"""The ``pointsift screen`` command: exit codes, messages, and the written file.

Runs the real command through :func:`pointsift.cli.main` (which maps exceptions
to exit codes in one place) and, for the exit codes a shell sees, through the
installed console script. Every run checks that the input file is
byte-identical afterwards (hashlib) and that no partial output is left; every
written file is read back with sqlite3 and pyogrio/GDAL, independently of
pointsift.
"""

import hashlib
import json
import re
import os
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from conftest import build_wells, fingerprint, leftovers, to_lonlat, write_points
from pyproj import CRS

from pointsift import cli
from pointsift.pipeline import ADDED_COLUMNS
from pointsift.verdict import STATUSES

FAST = ["--permutations", "99"]


def run(argv, capfd):
    """Run the command in-process; return (exit code, stdout + stderr)."""
    code = cli.main([str(a) for a in argv])
    captured = capfd.readouterr()
    text = captured.out + captured.err
    # issue 2: never a Python traceback for a user mistake (and no internal error)
    assert "Traceback" not in text
    assert "Internal error" not in text
    return code, text


def read_input_columns(path: Path) -> pd.DataFrame:
    """The input's attribute columns as an independent reader sees them."""
    if path.suffix == ".csv":
        return pd.read_csv(path, skipinitialspace=True)
    if path.suffix == ".parquet":
        import pyarrow.parquet as pq

        table = pq.read_table(path).to_pandas()
        return table.drop(columns=["geometry"])
    frame = pyogrio.read_dataframe(path)
    return pd.DataFrame(frame.drop(columns=[frame.geometry.name]))


def check_written(out: Path, source: Path, *, expect_crs):
    """Read the output back with sqlite3 and pyogrio and compare with the input."""
    # Reference: SQLite's own integrity check (a GeoPackage is an SQLite database).
    with sqlite3.connect(out) as db:
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        info = dict(db.execute("SELECT key, value FROM run_info").fetchall())
        kinds = dict(db.execute("SELECT table_name, data_type FROM gpkg_contents").fetchall())
    assert kinds["screened"] == "features" and kinds["run_info"] == "attributes"
    # Reference: pyogrio/GDAL reading the screened layer.
    layer = pyogrio.read_dataframe(out, layer="screened")
    original = read_input_columns(source)
    assert len(layer) == len(original)
    columns = [c for c in layer.columns if c != layer.geometry.name]
    assert columns == list(original.columns) + list(ADDED_COLUMNS)
    for name in original.columns:
        got, want = layer[name].reset_index(drop=True), original[name].reset_index(drop=True)
        assert got.dtype.kind == want.dtype.kind or {got.dtype.kind, want.dtype.kind} <= {"O", "T", "U"}, name
        pd.testing.assert_series_equal(got, want, check_dtype=False, check_names=True)
    assert layer.crs is not None and CRS(layer.crs).equals(CRS(expect_crs))
    # run_info: input hash, work CRS, counts equal the layer's status counts
    if source.suffix == ".shp":  # a shapefile is hashed with its side files, in name order
        digest = hashlib.sha256()
        for part in sorted(p for p in source.parent.iterdir() if p.stem == source.stem and p.suffix in {".shp", ".shx", ".dbf", ".prj", ".cpg"}):
            digest.update(part.read_bytes())
        assert info["input_sha256"] == digest.hexdigest()
    else:
        assert info["input_sha256"] == hashlib.sha256(source.read_bytes()).hexdigest()
    counts = json.loads(info["counts"])
    observed = layer["screen_status"].value_counts().to_dict()
    assert counts == {s: observed.get(s, 0) for s in STATUSES}
    assert CRS.from_user_input(info["work_crs"]).is_projected
    # issue 2: parameters, library versions, input path, time
    assert json.loads(info["parameters"])["value"] == "level_m"
    versions = json.loads(info["versions"])
    import importlib.metadata as metadata

    for package in ("numpy", "scipy", "pyproj", "pyogrio", "geopandas"):
        assert versions[package] == metadata.version(package)  # Reference: installed package metadata
    assert Path(info["input_path"]).resolve() == source.resolve()
    from datetime import datetime

    assert datetime.fromisoformat(info["created"]).tzinfo is not None
    return layer, info


# --- success and the written file --------------------------------------------------------


@pytest.mark.parametrize("suffix", [".gpkg", ".shp", ".csv", ".parquet"])
def test_screen_each_format_and_read_the_output_back(tmp_path, capfd, suffix):
    wells = build_wells(150, seed=30)
    wells.loc[5, "level_m"] = wells.loc[5, "level_m"] + 30.0  # a gross mistake
    source = write_points(wells, tmp_path / f"wells{suffix}")
    before = fingerprint(source)
    out = tmp_path / "screened.gpkg"
    extra = ["--crs", "EPSG:32633"] if suffix == ".csv" else []
    code, text = run(["screen", source, "--value", "level_m", "--id", "well_id", "--out", out, *FAST, *extra], capfd)
    assert code == 0, text  # exit 0 also when suspects are found
    assert fingerprint(source) == before
    layer, info = check_written(out, source, expect_crs="EPSG:32633")
    assert layer.loc[5, "screen_status"] == "suspect"
    assert "Screened 150 rows:" in text and "suspect" in text and "W0005" in text
    assert info["work_crs"] == "EPSG:32633"
    assert leftovers(tmp_path) == []


def test_geographic_input_written_in_its_crs_with_work_crs_recorded(tmp_path, capfd):
    source = write_points(to_lonlat(build_wells(120, seed=31)), tmp_path / "lonlat.gpkg")
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--value", "level_m", "--out", out, *FAST], capfd)
    assert code == 0, text
    layer, info = check_written(out, source, expect_crs="EPSG:4326")
    assert info["work_crs"] == "EPSG:32633" and "UTM zone 33N" in info["work_crs_name"]
    # the geometry comes back as it went in (Reference: pyogrio read of the input)
    original = pyogrio.read_dataframe(source)
    assert layer.geometry.geom_equals_exact(original.geometry, tolerance=0).all()


def _typed_layer(path):
    wells = build_wells(120, seed=37)
    wells["measured_at"] = pd.date_range("2026-04-01 08:00", periods=120, freq="37min")
    wells["artesian"] = np.arange(120) % 5 == 0
    wells["casing_mm"] = (100 + np.arange(120)).astype("int16")
    wells["ratio"] = np.linspace(0, 1, 120).astype("float32")
    wells["note"] = [None if i % 7 == 0 else f"note {i}" for i in range(120)]
    wells["licence"] = np.int64(2**40) + np.arange(120)
    pyogrio.write_dataframe(wells, path, layer="wells")
    return path


def test_column_types_and_values_survive_exactly(tmp_path, capfd):
    source = _typed_layer(tmp_path / "typed.gpkg")
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--value", "level_m", "--out", out, *FAST], capfd)
    assert code == 0, text
    # Reference: pyogrio/GDAL reads of input and output, and SQLite's declared column types.
    before, after = pyogrio.read_dataframe(source), pyogrio.read_dataframe(out, layer="screened")
    for name in before.columns.drop("geometry"):
        pd.testing.assert_series_equal(after[name], before[name], check_dtype=True)
    assert after.geometry.geom_equals_exact(before.geometry, tolerance=0).all()
    with sqlite3.connect(source) as a, sqlite3.connect(out) as b:
        types_in = [row[1:3] for row in a.execute("PRAGMA table_info(wells)")]
        types_out = [row[1:3] for row in b.execute("PRAGMA table_info(screened)")]
    assert types_out[: len(types_in)] == types_in  # fid, geom, then every input column with its SQL type


@pytest.mark.parametrize(
    "column, values",
    [
        ("FID", lambda n: np.arange(n)[::-1]),
        ("fid", lambda n: [f"F{i % 4}" for i in range(n)]),
        ("fid", lambda n: np.full(n, 7)),
        ("geom", lambda n: ["x"] * n),
        ("geometry", lambda n: [f"POINT ({i} {i})" for i in range(n)]),
    ],
    ids=["FID-integers", "fid-text", "fid-repeated", "geom-text", "geometry-wkt"],
)
def test_input_columns_named_like_geopackage_internals_are_kept(tmp_path, capfd, column, values):
    # exported tables often carry a 'fid' or 'FID' column; the GeoPackage's own key
    # and geometry columns must not take it over
    source = write_points(build_wells(80, seed=38), tmp_path / "export.csv")
    table = pd.read_csv(source)
    table.insert(2, column, values(80))
    table.to_csv(source, index=False)
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--value", "level_m", "--crs", "EPSG:32633", "--out", out, *FAST], capfd)
    assert code == 0, text
    if column != "geometry":
        check_written(out, source, expect_crs="EPSG:32633")  # every input column, values and order
    # Reference: SQLite itself (pyogrio names its geometry "geometry" and would hide a text column of that name).
    with sqlite3.connect(out) as db:
        names = [row[1] for row in db.execute("PRAGMA table_info(screened)")]
        kept = [row[0] for row in db.execute(f'SELECT "{column}" FROM screened ORDER BY rowid')]
    assert names[2 : 2 + len(table.columns)] == list(table.columns)  # after the key and geometry columns
    assert kept == table[column].tolist()


def test_feature_ids_are_kept(tmp_path, capfd):
    source = _typed_layer(tmp_path / "typed.gpkg")
    with sqlite3.connect(source) as db:  # a layer edited in a GIS: some features deleted
        db.execute("DELETE FROM wells WHERE fid IN (3, 4, 10)")
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--value", "level_m", "--id", "well_id", "--out", out, *FAST], capfd)
    assert code == 0, text
    with sqlite3.connect(source) as a, sqlite3.connect(out) as b:
        ids_in = a.execute("SELECT fid, well_id FROM wells ORDER BY fid").fetchall()
        ids_out = b.execute("SELECT fid, well_id FROM screened ORDER BY fid").fetchall()
    assert ids_out == ids_in


@pytest.mark.parametrize("options, kind", [(["--within", "600m"], "band"), (["--neighbours", "6", "--min-neighbours", "3"], "knn")])
def test_graph_options_reach_the_run(tmp_path, capfd, wells_gpkg, options, kind):
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", out, *FAST, *options], capfd)
    assert code == 0, text
    with sqlite3.connect(out) as db:
        info = dict(db.execute("SELECT key, value FROM run_info").fetchall())
    graph = json.loads(info["graph"])
    assert graph["kind"] == kind
    layer = pyogrio.read_dataframe(out, layer="screened")
    if kind == "band":
        assert graph["within_m"] == 600.0 and graph["max_distance_m"] <= 600.0
    else:
        assert graph["k"] == 6 and layer["neighbour_count"].max() <= 6
        assert json.loads(info["parameters"])["min_neighbours"] == 3


# --- exit codes ------------------------------------------------------------------------


@pytest.mark.parametrize(
    "options, message",
    [
        (["--neighbours", "1"], r"--neighbours"),
        (["--bogus"], r"No such option .--bogus"),
        (["--within", "5 parsecs"], r"Invalid value for '--within': '5 parsecs' is not a length"),
        (["--no-data", "abc"], r"'abc' is not a comma-separated list of numbers"),
        (["--fdr", "2"], r"--fdr"),
        (["--detrend", "cubic"], r"'cubic' is not known; choose one of none, auto"),
        (["--review-z", "9", "--suspect-z", "8"], r"--review-z \(9\.0\) must be positive and below --suspect-z \(8\.0\)"),
    ],
)
def test_usage_errors_exit_2(tmp_path, capfd, wells_gpkg, options, message):
    before = fingerprint(wells_gpkg)
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", tmp_path / "o.gpkg", *options], capfd)
    assert code == 2
    assert re.search(message, text), text
    assert not (tmp_path / "o.gpkg").exists() and fingerprint(wells_gpkg) == before


def test_missing_required_option_exits_2(tmp_path, capfd, wells_gpkg):
    code, text = run(["screen", wells_gpkg, "--out", tmp_path / "o.gpkg"], capfd)
    assert code == 2 and "Missing option '--value'" in text


def _multi_layer(tmp_path):
    path = tmp_path / "two.gpkg"
    write_points(build_wells(30, seed=1), path, layer="spring")
    write_points(build_wells(30, seed=2), path, layer="autumn")
    return path


def _non_points(tmp_path):
    # only lines: nothing to screen (a few lines among points are unscreened rows instead)
    wells = build_wells(30, seed=3)
    geometry = gpd.GeoSeries([shapely.LineString([(0, 0), (1, i)]) for i in range(30)], crs=wells.crs)
    return write_points(wells.set_geometry(geometry), tmp_path / "lines.gpkg")


def _swapped_csv(tmp_path):
    lonlat = to_lonlat(build_wells(40, seed=4, crs="EPSG:32755"))  # invented points near 147 E, 42 S
    return write_points(lonlat, tmp_path / "swapped.csv", xy_names=("lat", "lon"))


def _shapefile_without_prj(tmp_path):
    path = write_points(build_wells(30, seed=6), tmp_path / "noprj.shp")
    (tmp_path / "noprj.prj").unlink()
    return path


def _collision(tmp_path):
    wells = build_wells(30, seed=5)
    wells["SCREEN_STATUS"] = "checked"  # SQLite names are case-insensitive: a collision too
    return write_points(wells, tmp_path / "again.gpkg")


@pytest.mark.parametrize(
    "make, options, message",
    [
        (_multi_layer, [], r"holds 2 layers: spring, autumn\. Choose one with --layer NAME"),
        (_multi_layer, ["--layer", "winter"], r"has no layer 'winter'\. Layers present: spring, autumn"),
        (lambda p: write_points(build_wells(30), p / "w.gpkg"), ["--value", "level"], r"has no column 'level'\. Numeric columns present: level_m, depth_m"),
        (_non_points, [], r"has a usable location \(first reason: feature is a line \(LineString\), not a point; convert it"),
        (lambda p: write_points(build_wells(30), p / "w.csv"), [], r"has no CRS.*Pass --crs EPSG:XXXX"),
        (_shapefile_without_prj, [], r"has no CRS.*Pass --crs EPSG:XXXX"),
        (lambda p: write_points(build_wells(30), p / "w.gpkg"), ["--crs", "EPSG:4326"], r"declares EPSG:32633 but --crs says EPSG:4326"),
        (_swapped_csv, ["--crs", "EPSG:4326"], r"40 of 40 points .* \(first: W0000, W0001, W0002, W0003, W0004\)\. Longitude and latitude look swapped"),
        (_collision, [], r"already has column\(s\) SCREEN_STATUS"),
        (lambda p: write_points(build_wells(30, crs=None), p / "w.csv", xy_names=("e", "n")), [], r"no recognisable coordinate columns.*--x COLUMN --y COLUMN"),
    ],
    ids=["several-layers", "unknown-layer", "missing-value-column", "non-point", "no-crs", "no-prj", "crs-contradicts", "swapped", "column-collision", "no-coordinates"],
)
def test_data_errors_exit_1_with_message_and_input_untouched(tmp_path, capfd, make, options, message):
    source = make(tmp_path)
    before = fingerprint(source)
    if "--value" not in options:
        options = ["--value", "level_m", *options]
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--id", "well_id", "--out", out, *FAST, *options], capfd)
    assert code == 1, text
    assert re.search(message, text), text
    assert text.startswith("Error: ")
    assert fingerprint(source) == before
    assert not out.exists() and leftovers(tmp_path) == []


def test_missing_input_and_folder_input(tmp_path, capfd):
    code, text = run(["screen", tmp_path / "nowhere.gpkg", "--value", "level_m", "--out", tmp_path / "o.gpkg"], capfd)
    assert code == 1 and "does not exist. Check the path and spelling" in text
    code, text = run(["screen", tmp_path, "--value", "level_m", "--out", tmp_path / "o.gpkg"], capfd)
    assert code == 2 and "is a directory" in text
    assert list(tmp_path.iterdir()) == []


def test_existing_output_without_overwrite_is_left_untouched(tmp_path, capfd, wells_gpkg):
    out = tmp_path / "out.gpkg"
    out.write_bytes(b"an earlier result")
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", out, *FAST], capfd)
    assert code == 1 and "exists. Pass --overwrite to replace it" in text
    assert out.read_bytes() == b"an earlier result"
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", out, "--overwrite", *FAST], capfd)
    assert code == 0 and len(pyogrio.read_dataframe(out, layer="screened")) == 200


def test_output_path_equal_to_input_is_refused(capfd, wells_gpkg):
    before = fingerprint(wells_gpkg)
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", wells_gpkg, "--overwrite", *FAST], capfd)
    assert code == 1 and "is the input; pointsift never writes over its input" in text
    assert fingerprint(wells_gpkg) == before


@pytest.mark.parametrize("existing", [False, True])
def test_failing_write_leaves_no_partial_output(tmp_path, capfd, monkeypatch, wells_gpkg, existing):
    out = tmp_path / "out.gpkg"
    if existing:
        out.write_bytes(b"an earlier result")
    real = pyogrio.write_dataframe
    calls = []

    def fail_midway(frame, path, *args, **kwargs):
        calls.append(kwargs.get("layer"))
        if len(calls) == 2:  # the screened layer is written, then the disk "fills"
            raise OSError(28, "No space left on device (simulated)")
        return real(frame, path, *args, **kwargs)

    monkeypatch.setattr(pyogrio, "write_dataframe", fail_midway)
    before = fingerprint(wells_gpkg)
    code = cli.main(["screen", str(wells_gpkg), "--value", "level_m", "--out", str(out), "--overwrite", *FAST])
    text = "".join(capfd.readouterr())
    assert code == 1 and "Traceback" not in text and "No space left on device" in text
    assert calls[0] == "screened" and len(calls) == 2
    assert leftovers(tmp_path) == []
    assert (out.read_bytes() == b"an earlier result") if existing else not out.exists()
    assert fingerprint(wells_gpkg) == before


# --- bad rows: unscreened with the reason, no row lost ------------------------------------


def _run_and_read(tmp_path, capfd, source, *options):
    before = fingerprint(source)
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--id", "well_id", "--out", out, *FAST, *options], capfd)
    assert code == 0, text
    assert fingerprint(source) == before
    layer = pyogrio.read_dataframe(out, layer="screened")
    assert len(layer) == len(read_input_columns(source))  # no row lost
    assert layer["well_id"].tolist() == read_input_columns(source)["well_id"].tolist()  # order kept
    return layer.set_index("well_id"), text


def test_values_that_are_text_nan_or_no_data_codes(tmp_path, capfd):
    wells = build_wells(150, seed=32)
    level = wells["level_m"].astype(object)
    level.iloc[[1, 2, 3, 4, 5, 6]] = ["dry", None, -9999.0, -999.0, -99999.0, -12.5]
    wells["level_m"] = level.astype(str).where(level.notna(), None)
    source = write_points(wells, tmp_path / "w.csv")
    layer, text = _run_and_read(tmp_path, capfd, source, "--value", "level_m", "--crs", "EPSG:32633", "--no-data", "-9999,-999,-99999,-12.5")
    reasons = layer["screen_reasons"]
    assert (layer.loc[["W0001", "W0002", "W0003", "W0004", "W0005", "W0006"], "screen_status"] == "unscreened").all()
    assert reasons["W0001"] == "value 'dry' is not a number"
    assert reasons["W0002"] == "no value (blank)"
    assert reasons["W0003"] == "no-data code -9999" and reasons["W0005"] == "no-data code -99999"
    assert reasons["W0006"] == "no-data code -12.5"  # a custom code
    assert "Unscreened, by reason:" in text


def test_null_empty_and_multipart_geometry(tmp_path, capfd):
    wells = build_wells(150, seed=33)
    geometry = wells.geometry.copy()
    geometry.iloc[1] = None
    geometry.iloc[2] = shapely.Point()
    geometry.iloc[3] = shapely.MultiPoint([geometry.iloc[3], geometry.iloc[4]])
    geometry.iloc[5] = shapely.MultiPoint([geometry.iloc[5]])  # single part: fine
    wells = wells.set_geometry(geometry)
    source = tmp_path / "w.gpkg"
    pyogrio.write_dataframe(wells, source, layer="wells", geometry_type="Unknown", promote_to_multi=False)
    layer, _ = _run_and_read(tmp_path, capfd, source, "--value", "level_m")
    assert layer.loc["W0001", "screen_reasons"] == "no location (no geometry)"
    assert layer.loc["W0002", "screen_reasons"] in ("no location (empty geometry)", "no location (no geometry)")
    assert layer.loc["W0003", "screen_reasons"] == "location has 2 points (multi-part); split it into single points"
    assert layer.loc["W0005", "screen_status"] != "unscreened"


def test_impossible_latitude_or_longitude_rows(tmp_path, capfd):
    lonlat = to_lonlat(build_wells(150, seed=34))
    table_path = write_points(lonlat, tmp_path / "w.csv", xy_names=("longitude", "latitude"))
    table = pd.read_csv(table_path)
    table.loc[7, "latitude"] = 95.5
    table.loc[9, "longitude"] = 191.0
    table.to_csv(table_path, index=False)
    layer, _ = _run_and_read(tmp_path, capfd, table_path, "--value", "level_m", "--crs", "EPSG:4326")
    assert layer.loc["W0007", "screen_status"] == "unscreened"
    assert layer.loc["W0007", "screen_reasons"].startswith("latitude 95.5 is impossible (beyond 90)")
    assert layer.loc["W0009", "screen_reasons"].startswith("longitude 191 is impossible (beyond 180)")


def test_coincident_records_that_disagree(tmp_path, capfd):
    wells = build_wells(200, seed=35, noise=0.05)
    twin = wells.iloc[[40]].copy()
    twin["well_id"] = "W0040-B"
    twin["level_m"] = twin["level_m"] + 4.0
    wells = pd.concat([wells, twin], ignore_index=True)  # same point, second record
    source = write_points(wells, tmp_path / "w.gpkg")
    layer, _ = _run_and_read(tmp_path, capfd, source, "--value", "level_m")
    assert layer.loc["W0040-B", "screen_status"] == "suspect"
    assert "coincident record disagrees by 4" in layer.loc["W0040-B", "screen_reasons"]
    assert layer.loc["W0040", "screen_status"] in ("ok", "review")
    assert layer.loc["W0040", "neighbour_count"] == layer.loc["W0040-B", "neighbour_count"] == 10


def test_isolated_point_beyond_max_distance(tmp_path, capfd):
    wells = build_wells(150, seed=36)
    far = wells.iloc[[0]].copy()
    far["well_id"] = "LONELY"
    far = far.set_geometry([shapely.Point(wells.geometry.x.max() + 8000, wells.geometry.y.max())], crs=wells.crs)
    source = write_points(pd.concat([wells, far], ignore_index=True), tmp_path / "w.gpkg")
    layer, _ = _run_and_read(tmp_path, capfd, source, "--value", "level_m", "--max-distance", "2km")
    assert layer.loc["LONELY", "screen_status"] == "unscreened"
    assert layer.loc["LONELY", "screen_reasons"] == "no neighbour within 2.0 km"


# --- the installed console script ------------------------------------------------------


def _console_script():
    found = shutil.which("pointsift", path=str(Path(sys.executable).parent)) or shutil.which("pointsift")
    if not found:
        pytest.skip("the pointsift console script is not installed")
    return found


def test_console_script_exit_codes_seen_by_a_shell(tmp_path, wells_gpkg):
    script = _console_script()
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    usage = subprocess.run([script, "screen", str(wells_gpkg), "--value", "level_m", "--out", str(tmp_path / "o.gpkg"), "--neighbours", "1"], capture_output=True, text=True, env=env, timeout=120)
    assert usage.returncode == 2 and "Traceback" not in usage.stderr + usage.stdout
    data = subprocess.run([script, "screen", str(wells_gpkg), "--value", "nope", "--out", str(tmp_path / "o.gpkg")], capture_output=True, text=True, env=env, timeout=120)
    assert data.returncode == 1 and "Traceback" not in data.stderr + data.stdout
    assert "Error: " in data.stderr and "Numeric columns present: level_m, depth_m" in data.stderr
    assert not (tmp_path / "o.gpkg").exists()


# --- many neighbours (issue 10 item 2) ---------------------------------------------------

MANY_NEIGHBOURS = [(400, ["--within", "5km"]), (500, ["--neighbours", "100"]), (250, ["--neighbours", "50"])]


@pytest.mark.parametrize("n, options", MANY_NEIGHBOURS)
def test_many_neighbours_screen_completes(tmp_path, capfd, n, options):
    # issue 10 item 2: these ordinary options (the README's own --within 5km among them)
    # ended in "RuntimeError: could not draw distinct neighbour sets; too few points for k"
    source = write_points(build_wells(n, seed=41), tmp_path / "wells.gpkg")
    before = fingerprint(source)
    out = tmp_path / "out.gpkg"
    code, text = run(["screen", source, "--value", "level_m", "--id", "well_id", "--out", out, *options], capfd)
    assert code == 0, text
    layer = pyogrio.read_dataframe(out, layer="screened", read_geometry=False)
    assert len(layer) == n
    judged = layer["screen_status"] != "unscreened"
    assert judged.sum() > 0.9 * n
    # the neighbour counts really are large (the automatic fence trims a few)
    assert layer.loc[judged, "neighbour_count"].median() >= 40
    p = layer.loc[judged, "local_moran_p"]
    assert p.notna().all() and ((p > 0) & (p <= 1)).all()
    assert fingerprint(source) == before

def test_context_options_reach_the_screen(tmp_path, capfd):
    wells = build_wells(150, seed=41)
    wells["gse"] = wells["level_m"] + 8.0
    wells.loc[5, "gse"] = wells.loc[5, "level_m"] - 3.0  # a level 3 m above its land surface
    source = write_points(wells, tmp_path / "w.gpkg")
    layer, _ = _run_and_read(tmp_path, capfd, source, "--value", "level_m", "--ground-elevation", "gse", "--units", "m",
                             "--quantity", "level")
    row = layer.loc[wells.loc[5, "well_id"]]
    assert row["screen_status"] == "suspect" and "above the land surface" in row["screen_reasons"]
    info = pyogrio.read_dataframe(tmp_path / "out.gpkg", layer="run_info")
    assert "ground_elevation" in " ".join(str(v) for v in info.to_numpy().ravel())
    code, text = run(["screen", source, "--value", "level_m", "--quantity", "volume", "--out", tmp_path / "x.gpkg"], capfd)
    assert code == 2 and "volume" in text



# --- issue 10 reproductions ------------------------------------------------------------------


@pytest.mark.parametrize("option", ["--report", "--summary-json"])
@pytest.mark.parametrize("side", [".dbf", ".prj", ".shx"])
def test_outputs_on_a_shapefile_side_file_are_refused_before_any_work(tmp_path, capfd, option, side):
    # Issue 10, item 1: --report on the input's .dbf replaced it and exited 0.
    source = write_points(build_wells(60, seed=40), tmp_path / "wells.shp")
    before = fingerprint(source)
    code, text = run(["screen", source, "--value", "level_m", "--out", tmp_path / "out.gpkg", "--overwrite",
                      option, tmp_path / f"wells{side}", *FAST], capfd)
    assert code == 1 and f"is a file of the input" in text and "never writes over its input" in text
    assert fingerprint(source) == before
    assert not (tmp_path / "out.gpkg").exists()  # refused before any work


def test_report_equal_to_out_is_refused_before_the_geopackage_is_written(tmp_path, capfd, wells_gpkg):
    out = tmp_path / "same.gpkg"
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", out, "--report", out, *FAST], capfd)
    assert code == 1 and "--report and --out name the same file" in text
    assert not out.exists()


def test_invalid_crs_is_a_usage_problem(tmp_path, capfd):
    # Issue 10, item 12: an invalid --crs / --work-crs exited 1 like a data problem.
    source = write_points(build_wells(30, crs=None), tmp_path / "w.csv")
    for option in ("--crs", "--work-crs"):
        extra = [] if option == "--crs" else ["--crs", "EPSG:32633"]
        code, text = run(["screen", source, "--value", "level_m", "--out", tmp_path / "o.gpkg", *extra, option, "EPSG:999999", *FAST], capfd)
        assert code == 2 and re.search(rf"{option} '?EPSG:999999'? is not a CRS pyproj knows", text), text


def test_control_characters_in_ids_are_escaped_on_the_terminal(tmp_path, capfd):
    # Issue 10, item 13: an id could retitle the terminal or forge a log line.
    wells = build_wells(120, seed=41)
    wells.loc[3, "well_id"] = "W3\x1b]0;owned\x07"
    wells.loc[4, "well_id"] = "W4\nWrote /etc/passwd"
    wells.loc[3, "level_m"] += 40.0  # flagged, so printed among the strongest flags
    wells.loc[4, "level_m"] += 40.0
    source = write_points(wells, tmp_path / "w.gpkg")
    code, text = run(["screen", source, "--value", "level_m", "--id", "well_id", "--out", tmp_path / "o.gpkg", *FAST], capfd)
    assert code == 0
    assert "\x1b" not in text and "\x07" not in text
    assert "W3\\x1b]0;owned\\x07" in text and "W4\\nWrote /etc/passwd" in text
    assert not any(line.startswith("Wrote /etc/passwd") for line in text.splitlines())


def test_caution_in_the_terminal_summary_and_the_layer_description(tmp_path, capfd, wells_gpkg):
    # Issue 10, item 19: the screened layer and the terminal summary carried no caution.
    out = tmp_path / "o.gpkg"
    code, text = run(["screen", wells_gpkg, "--value", "level_m", "--out", out, *FAST], capfd)
    assert code == 0 and "Caution: flags are screening aids, not determinations" in text
    with sqlite3.connect(out) as db:  # Reference: the GeoPackage standard's gpkg_contents.description, by sqlite3
        description = db.execute("SELECT description FROM gpkg_contents WHERE table_name = 'screened'").fetchone()[0]
    assert "aids for checking data, not determinations" in description


def test_thousands_option_reads_commas_as_grouping(tmp_path, capfd):
    # Issue 10, item 4: --thousands , says commas group thousands.
    wells = build_wells(80, seed=42, crs=None)
    wells["level_m"] = [f"{1000 + v:,.3f}" for v in wells["level_m"]]  # "1,200.123": thousands and a dot
    wells.loc[0, "level_m"] = "1,200"  # alone it would read as a decimal comma
    source = write_points(wells, tmp_path / "w.csv")
    code, _ = run(["screen", source, "--value", "level_m", "--crs", "EPSG:32633", "--out", tmp_path / "o.gpkg",
                   "--thousands", ",", *FAST], capfd)
    assert code == 0
    layer = pyogrio.read_dataframe(tmp_path / "o.gpkg", layer="screened")
    assert layer.loc[0, "screen_status"] != "unscreened"
