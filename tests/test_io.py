"""Reading point layers and atomic GeoPackage writing.

Inputs are checked byte-for-byte (hashlib) before and after every read and
every failed write; written files are read back with sqlite3 and pyogrio.
"""

import hashlib
import os
import sqlite3

import numpy as np
import pandas as pd
import pyogrio
import pytest
from conftest import build_wells, fingerprint, leftovers, write_points

from pointsift import io as psio
from pointsift.errors import InputError, OutputError


# --- reading -----------------------------------------------------------------------------


@pytest.mark.parametrize("suffix", [".gpkg", ".shp", ".parquet"])
def test_read_spatial_formats_keeps_rows_columns_and_crs(tmp_path, suffix):
    wells = build_wells(40, seed=2)
    path = write_points(wells, tmp_path / f"wells{suffix}")
    before = fingerprint(path)
    gdf, source = psio.read_points(path)
    assert fingerprint(path) == before  # reading never touches the input
    # Reference: the layer as built in memory (row count, order, values, CRS).
    assert len(gdf) == 40
    assert gdf["well_id"].tolist() == wells["well_id"].tolist()
    np.testing.assert_array_equal(gdf["level_m"].to_numpy(), wells["level_m"].to_numpy())
    np.testing.assert_array_equal(gdf.geometry.x.to_numpy(), wells.geometry.x.to_numpy())
    assert gdf.crs.equals(wells.crs)
    # SHA-256 of the file (and a shapefile's side files) vs hashlib
    if suffix == ".shp":
        parts = sorted(p for p in tmp_path.iterdir() if p.stem == "wells" and p.suffix in {".shp", ".shx", ".dbf", ".prj", ".cpg"})
        digest = hashlib.sha256()
        for p in parts:
            digest.update(p.read_bytes())
        assert source.sha256 == digest.hexdigest()
    else:
        assert source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_several_layers_without_layer_lists_them(tmp_path):
    path = tmp_path / "two.gpkg"
    write_points(build_wells(20, seed=3), path, layer="spring_2026")
    write_points(build_wells(20, seed=4), path, layer="autumn_2026")
    before = fingerprint(path)
    # Issue 2: several layers and no --layer -> error listing them.
    with pytest.raises(InputError, match=r"holds 2 layers: spring_2026, autumn_2026\. Choose one with layer='NAME'"):
        psio.read_points(path)
    gdf, source = psio.read_points(path, layer="autumn_2026")
    assert len(gdf) == 20 and source.layer == "autumn_2026"
    assert fingerprint(path) == before


def test_unknown_layer_lists_the_layers_present(tmp_path):
    path = write_points(build_wells(20, seed=3), tmp_path / "one.gpkg", layer="wells")
    before = fingerprint(path)
    with pytest.raises(InputError, match=r"has no layer 'welsl'\. Layers present: wells"):
        psio.read_points(path, layer="welsl")
    assert fingerprint(path) == before


@pytest.mark.parametrize(
    "names",
    [("x", "y"), ("lon", "lat"), ("Longitude", "Latitude"), ("easting", "northing"), ("X_COORD", "Y_COORD")],
)
def test_csv_coordinate_columns_are_detected(tmp_path, names):
    wells = build_wells(30, seed=5)
    path = write_points(wells, tmp_path / "wells.csv", xy_names=names)
    before = fingerprint(path)
    gdf, source = psio.read_points(path, crs="EPSG:32633")
    assert source.coordinate_columns == names
    # Reference: pandas.read_csv of the same file.
    table = pd.read_csv(path)
    assert list(gdf.columns[:-1]) == list(table.columns)
    np.testing.assert_array_equal(gdf.geometry.x.to_numpy(), table[names[0]].to_numpy())
    np.testing.assert_array_equal(gdf.geometry.y.to_numpy(), table[names[1]].to_numpy())
    assert fingerprint(path) == before


@pytest.mark.parametrize("encoding", ["utf-8-sig", "latin-1"])
def test_csv_from_a_spreadsheet_export(tmp_path, encoding):
    # "CSV UTF-8" exports start with a byte-order mark (common practice of spreadsheet
    # programs); older exports are Latin-1. The first column is the coordinate here.
    path = tmp_path / "export.csv"
    path.write_bytes("lon,lat,well_id,level\n15.1,47.8,Wé1,12.5\n15.2,47.9,W2,13.0\n".encode(encoding))
    before = fingerprint(path)
    gdf, source = psio.read_points(path, crs="EPSG:4326")
    assert source.coordinate_columns == ("lon", "lat")
    assert list(gdf.columns[:-1]) == ["lon", "lat", "well_id", "level"]
    assert gdf["well_id"].tolist() == ["Wé1", "W2"]
    assert fingerprint(path) == before


def test_geopackage_attribute_table_with_coordinate_columns(tmp_path):
    wells = build_wells(25, seed=8)
    table = pd.DataFrame(wells.drop(columns="geometry"))
    table["easting"], table["northing"] = wells.geometry.x, wells.geometry.y
    path = tmp_path / "table.gpkg"
    pyogrio.write_dataframe(table, path, layer="readings")
    before = fingerprint(path)
    gdf, source = psio.read_points(path, crs="EPSG:32633")
    assert source.layer == "readings" and source.coordinate_columns == ("easting", "northing")
    assert gdf.crs.equals("EPSG:32633")
    np.testing.assert_array_equal(gdf.geometry.x.to_numpy(), wells.geometry.x.to_numpy())
    assert fingerprint(path) == before


def test_csv_explicit_columns_and_errors(tmp_path):
    wells = build_wells(10, seed=6)
    path = write_points(wells, tmp_path / "odd.csv", xy_names=("e_utm", "n_utm"))
    with pytest.raises(InputError, match=r"no recognisable coordinate columns .* x='COLUMN' y='COLUMN'\. Columns present: .*e_utm, n_utm"):
        psio.read_points(path)
    with pytest.raises(InputError, match=r"Give both x= and y="):
        psio.read_points(path, x="e_utm")
    with pytest.raises(InputError, match=r"has no column 'n_ut'\. Columns present:"):
        psio.read_points(path, x="e_utm", y="n_ut")
    gdf, _ = psio.read_points(path, x="e_utm", y="n_utm")
    assert len(gdf) == 10 and gdf.crs is None


def test_csv_rows_without_coordinates_are_kept_with_no_geometry(tmp_path):
    path = tmp_path / "gaps.csv"
    path.write_text("id,x,y,level\na,1,2,3.5\nb,,2,4.0\nc,5,6,dry\n")
    gdf, _ = psio.read_points(path)
    assert len(gdf) == 3
    assert gdf.geometry.isna().tolist() == [False, True, False]
    assert gdf["level"].tolist() == ["3.5", "4.0", "dry"]


@pytest.mark.parametrize("make, message", [
    (lambda p: p, r"does not exist"),
    (lambda p: (p.mkdir(), p)[1], r"is a folder"),
])
def test_missing_input_or_folder(tmp_path, make, message):
    target = make(tmp_path / "nothing.gpkg")
    with pytest.raises(InputError, match=message):
        psio.read_points(target)


def test_corrupt_file_is_an_input_error(tmp_path):
    path = tmp_path / "broken.gpkg"
    path.write_bytes(b"not a geopackage at all")
    with pytest.raises(InputError, match=r"Cannot open .*broken\.gpkg"):
        psio.read_points(path)
    assert path.read_bytes() == b"not a geopackage at all"


def test_file_sha256_matches_hashlib(tmp_path):
    path = tmp_path / "blob.bin"
    path.write_bytes(os.urandom(3 << 20))  # more than one read block
    assert psio.file_sha256(path) == hashlib.sha256(path.read_bytes()).hexdigest()


# --- writing -----------------------------------------------------------------------------


def _layers(n=25):
    wells = build_wells(n, seed=7)
    return {"screened": wells, "run_info": pd.DataFrame({"key": ["a", "b"], "value": ["1", "two"]})}


def test_write_geopackage_reads_back_with_sqlite_and_pyogrio(tmp_path):
    layers = _layers()
    out = psio.write_geopackage(tmp_path / "out.gpkg", layers)
    # Reference: sqlite3's own integrity check of the GeoPackage (an SQLite database).
    with sqlite3.connect(out) as db:
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        names = {row[0] for row in db.execute("SELECT table_name FROM gpkg_contents")}
        assert names == {"screened", "run_info"}
        assert db.execute("SELECT key, value FROM run_info ORDER BY fid").fetchall() == [("a", "1"), ("b", "two")]
    # Reference: pyogrio/GDAL reading the layer back.
    back = pyogrio.read_dataframe(out, layer="screened")
    wells = layers["screened"]
    assert back.crs.equals(wells.crs)
    assert list(back.columns) == list(wells.columns)
    for column in wells.columns.drop("geometry"):
        assert back[column].tolist() == wells[column].tolist()
    assert back.geometry.geom_equals(wells.geometry).all()
    assert leftovers(tmp_path) == []


def test_existing_output_needs_overwrite_and_stays_untouched(tmp_path):
    out = tmp_path / "out.gpkg"
    out.write_bytes(b"precious earlier result")
    with pytest.raises(OutputError, match=r"exists\. Pass overwrite=True to replace it"):
        psio.write_geopackage(out, _layers())
    assert out.read_bytes() == b"precious earlier result"
    psio.write_geopackage(out, _layers(), overwrite=True)
    assert len(pyogrio.read_dataframe(out, layer="screened")) == 25


def test_output_equal_to_input_is_refused(tmp_path, wells_gpkg):
    before = fingerprint(wells_gpkg)
    # also through another spelling of the same path
    other_spelling = tmp_path / "." / wells_gpkg.name
    for target in (wells_gpkg, other_spelling):
        with pytest.raises(OutputError, match=r"is the input; pointsift never writes over its input"):
            psio.write_geopackage(target, _layers(), overwrite=True, protect=(str(wells_gpkg),))
    assert fingerprint(wells_gpkg) == before


@pytest.mark.parametrize("name, message", [("out.shp", r"must be a GeoPackage file ending in \.gpkg"), ("no_such_dir/out.gpkg", r"does not exist\. Create it first")])
def test_bad_output_paths(tmp_path, name, message):
    with pytest.raises(OutputError, match=message):
        psio.write_geopackage(tmp_path / name, _layers())


@pytest.mark.parametrize("existing", [False, True])
def test_failure_midway_leaves_no_partial_output(tmp_path, monkeypatch, existing):
    out = tmp_path / "out.gpkg"
    if existing:
        out.write_bytes(b"earlier result")
    real = pyogrio.write_dataframe
    calls = []

    def fail_on_second_layer(frame, path, *args, **kwargs):
        calls.append(kwargs.get("layer"))
        if len(calls) == 2:
            raise RuntimeError("disk full (simulated)")
        return real(frame, path, *args, **kwargs)

    monkeypatch.setattr(pyogrio, "write_dataframe", fail_on_second_layer)
    # a full disk is an output problem (OutputError, exit 1), not an internal error
    with pytest.raises(OutputError, match=r"Cannot write .*out\.gpkg' \(disk full \(simulated\)\)\. Free disk space"):
        psio.write_geopackage(out, _layers(), overwrite=True)
    assert calls == ["screened", "run_info"]  # the first layer really was written
    assert leftovers(tmp_path) == []
    if existing:
        assert out.read_bytes() == b"earlier result"
    else:
        assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == (["out.gpkg"] if existing else [])


def test_run_info_table_is_key_value_text():
    table = psio.run_info_table({"a": "text", "b": {"y": 1, "x": [1.5, None]}, "c": 3})
    assert table.columns.tolist() == ["key", "value"]
    assert table["value"].tolist() == ["text", '{"x": [1.5, null], "y": 1}', "3"]


# --- issue 10 reproductions ----------------------------------------------------------------


def test_real_disk_full_is_an_output_problem(tmp_path):
    # Issue 10, item 8: "database or disk is full" was an internal error. A real
    # write limit (RLIMIT_FSIZE, POSIX setrlimit) makes the write library fail.
    import subprocess
    import sys

    source = write_points(build_wells(3000, seed=9), tmp_path / "big.gpkg")
    script = (
        "import resource, signal, sys\n"
        "signal.signal(signal.SIGXFSZ, signal.SIG_IGN)\n"
        "resource.setrlimit(resource.RLIMIT_FSIZE, (150_000, 150_000))\n"
        "import geopandas as gpd\n"
        "from pointsift import io\n"
        "from pointsift.errors import OutputError\n"
        f"frame = gpd.read_file({str(source)!r})\n"
        "try:\n"
        f"    io.write_geopackage({str(tmp_path / 'out.gpkg')!r}, {{'screened': frame}})\n"
        "except OutputError as exc:\n"
        "    print('OUTPUT-ERROR', exc); sys.exit(0)\n"
        "sys.exit(5)\n"
    )
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stdout + done.stderr
    assert "Free disk space or choose another output folder" in done.stdout
    assert leftovers(tmp_path) == [] and not (tmp_path / "out.gpkg").exists()


def test_second_run_creating_the_same_output_fails(tmp_path, monkeypatch):
    # Issue 10, item 11: two runs creating one new output both succeeded. The
    # other run finishes first, between this run's check and its final step.
    out = tmp_path / "out.gpkg"
    real = psio._write_layer

    def other_run_finishes_first(*args, **kwargs):
        if not out.exists():
            out.write_bytes(b"the other run's result")
        return real(*args, **kwargs)

    monkeypatch.setattr(psio, "_write_layer", other_run_finishes_first)
    with pytest.raises(OutputError, match=r"exists\. Pass overwrite=True to replace it"):
        psio.write_geopackage(out, _layers())
    assert out.read_bytes() == b"the other run's result"
    assert leftovers(tmp_path) == []


def test_temporary_files_are_not_inputs_and_stale_ones_are_removed(tmp_path):
    # Issue 10, item 6: a killed run's ".out.XXXX.partial.gpkg" was taken as an
    # input by a later folder scan and never removed.
    dead = tmp_path / f".out.gpkg.999999999.abcd{psio.PARTIAL_SUFFIX}"
    dead.write_bytes(b"half a file")
    alive = tmp_path / f".out.gpkg.{os.getpid()}.efgh{psio.PARTIAL_SUFFIX}"
    alive.write_bytes(b"being written")
    assert not any(p.suffix.lower() in {".gpkg", ".shp", ".csv", ".parquet"} for p in (dead, alive))
    psio.write_geopackage(tmp_path / "out.gpkg", _layers())
    assert not dead.exists()  # its process (pid 999999999) is gone
    assert alive.exists()  # this process is alive: not removed


def test_layer_description_holds_the_given_text(tmp_path):
    out = psio.write_geopackage(tmp_path / "out.gpkg", _layers(), descriptions={"screened": "Screening aids, not determinations."})
    with sqlite3.connect(out) as db:  # Reference: the GeoPackage standard's gpkg_contents table, read by sqlite3
        text = db.execute("SELECT description FROM gpkg_contents WHERE table_name = 'screened'").fetchone()[0]
    assert text == "Screening aids, not determinations."


def test_csv_decimal_comma_coordinates_and_bad_cells_are_named(tmp_path):
    # Issue 10, item 7: "-21,046743" gave "no location (no geometry)".
    path = tmp_path / "comma.csv"
    path.write_text('id;lon;lat;level\n'.replace(";", ","), encoding="utf-8")
    with open(path, "a", encoding="utf-8") as handle:
        handle.write('a,"-47,912301","-21,046743",3.5\nb,"-47,9","-21,1",4\nc,"-47,95",,5\n')
    gdf, _ = psio.read_points(path)
    assert gdf.geometry.x.iloc[0] == pytest.approx(-47.912301) and gdf.geometry.y.iloc[0] == pytest.approx(-21.046743)
    assert gdf.attrs[psio.LOCATION_REASONS].tolist() == ["", "", "no location (one coordinate is blank)"]
    thousands = tmp_path / "thousands.csv"
    thousands.write_text('id,x,y,level\na,"512,345.5","4,100,200",1\nb,"-21,046743",abc,2\n', encoding="utf-8")
    gdf, _ = psio.read_points(thousands)
    assert gdf.attrs[psio.LOCATION_REASONS].tolist() == ["", "coordinate '-21,046743' is not a number"]


def test_duplicate_csv_column_names_are_refused(tmp_path):
    # Issue 10, item 14: pandas renamed the second "level_m" to "level_m.1" silently.
    path = tmp_path / "dup.csv"
    path.write_text("id,x,y,level_m,level_m\na,1,2,3,4\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"column name\(s\) used more than once: 'level_m'\. Rename the repeated columns"):
        psio.read_points(path)


def test_csv_comment_lines_are_skipped_and_said(tmp_path):
    # Issue 10, item 18: the first "#" line was taken as the header.
    path = tmp_path / "commented.csv"
    path.write_text("# exported 2026-04-01\n# units: metres\nid,x,y,level\na,1,2,3.5\n", encoding="utf-8")
    gdf, _ = psio.read_points(path)
    assert list(gdf.columns[:4]) == ["id", "x", "y", "level"] and len(gdf) == 1
    assert gdf.attrs[psio.READ_NOTES] == ("Skipped 2 comment lines starting with '#' at the top of commented.csv.",)


def test_swapped_coordinate_option_names_are_warned(tmp_path):
    # Issue 10, item 15: --x lat --y lon was accepted silently.
    path = tmp_path / "ll.csv"
    path.write_text("id,lon,lat,level\na,15.1,47.2,3.5\n", encoding="utf-8")
    gdf, _ = psio.read_points(path, x="lat", y="lon")
    assert any("look swapped" in note for note in gdf.attrs[psio.READ_NOTES])


def test_plain_parquet_and_library_text_in_messages(tmp_path):
    # Issue 10, item 18: "Use pandas.read_parquet ..." reached the user; a plain
    # Parquet table with coordinate columns is now read like a CSV.
    path = tmp_path / "plain.parquet"
    pd.DataFrame({"id": ["a", "b"], "x": [1.0, 2.0], "y": [3.0, 4.0], "level": [1.0, 2.0]}).to_parquet(path)
    gdf, source = psio.read_points(path)
    assert source.driver == "Parquet" and gdf.geometry.x.tolist() == [1.0, 2.0]
    damaged = tmp_path / "damaged.gpkg"
    good = write_points(build_wells(200, seed=3), tmp_path / "good.gpkg")
    data = good.read_bytes()
    damaged.write_bytes(data[:20000] + b"\xff" * 20000 + data[40000:])  # corrupt pages in the middle
    with pytest.raises(InputError) as caught:
        psio.read_points(damaged)
    message = str(caught.value)
    assert "SELECT" not in message and "prefix the file path" not in message and "Use pandas" not in message
    assert "looks damaged (database disk image is malformed)" in message  # SQLite's own words for it
    assert "Restore the file from a backup or export the layer again" in message


def test_measured_points_keep_their_m_values(tmp_path):
    # Issue 10, item 18: M values were dropped from the output with a raw warning.
    import warnings

    import geopandas as gpd
    import shapely

    wells = build_wells(20, seed=4)
    measured = shapely.from_wkt([f"POINT M ({p.x} {p.y} {i})" for i, p in enumerate(wells.geometry)])
    path = tmp_path / "m.gpkg"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the fixture's own write
        pyogrio.write_dataframe(wells.set_geometry(gpd.GeoSeries(measured, crs=wells.crs)), path, layer="w", use_arrow=True)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no raw library warning reaches the user
        gdf, _ = psio.read_points(path)
        out = psio.write_geopackage(tmp_path / "out.gpkg", {"screened": gdf})
    back = pyogrio.read_dataframe(out, layer="screened", use_arrow=True)  # Reference: pyogrio through Arrow keeps M
    assert shapely.has_m(back.geometry.array).all()
    assert shapely.get_m(back.geometry.array).tolist() == list(range(20))


@pytest.mark.parametrize("side", [".dbf", ".prj", ".shx", ".cpg", ".DBF"])
def test_every_file_of_a_shapefile_input_is_refused_as_an_output(tmp_path, side):
    # Issue 10, item 1: --report or --summary-json on a shapefile's side file replaced it.
    source = write_points(build_wells(20, seed=2), tmp_path / "wells.shp")
    (tmp_path / "wells.cpg").write_text("UTF-8")
    before = fingerprint(source)
    with pytest.raises(OutputError, match=r"--report '.*wells\.(dbf|prj|shx|cpg|DBF)' is a file of the input '.*wells\.shp'; pointsift never writes over its input"):
        psio.check_output_paths([("--out", tmp_path / "out.gpkg"), ("--report", tmp_path / f"wells{side}")], [source])
    assert fingerprint(source) == before


def test_two_outputs_of_one_run_may_not_share_a_file(tmp_path, wells_gpkg):
    # Issue 10, item 1: --report equal to --out was refused only after the GeoPackage was written.
    out = tmp_path / "out.gpkg"
    with pytest.raises(OutputError, match=r"--report and --out name the same file"):
        psio.check_output_paths([("--out", out), ("--report", tmp_path / "." / "out.gpkg")], [wells_gpkg])
    assert not out.exists()
    psio.check_output_paths([("--out", out), ("--report", tmp_path / "out.html")], [wells_gpkg])  # distinct: fine


def test_atomic_write_replaces_only_when_the_block_succeeds(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(RuntimeError):
        with psio.atomic_write(target) as part:
            part.write_text("half")
            (tmp_path / (part.name + "-journal")).write_text("side file")  # as SQLite leaves beside a database
            raise RuntimeError("stopped midway")
    assert target.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.txt"]
    with psio.atomic_write(target) as part:
        assert not part.exists() and part.parent == tmp_path
        part.write_text("new")
    assert target.read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.txt"]
    with pytest.raises(OutputError, match="exists"):
        with psio.atomic_write(target, overwrite=False) as part:
            part.write_text("newer")
    assert target.read_text() == "new" and sorted(p.name for p in tmp_path.iterdir()) == ["out.txt"]


def test_write_text_gives_usual_permissions_and_unix_line_ends(tmp_path):
    umask = os.umask(0)
    os.umask(umask)
    path = psio.write_text(tmp_path / "a.txt", "one\ntwo\n")
    assert path.read_bytes() == b"one\ntwo\n"
    assert (path.stat().st_mode & 0o777) == (0o666 & ~umask)  # as open() creates files (common practice)


def test_existing_outputs_get_one_message_shape(tmp_path, wells_gpkg):
    # Issue 10, item 12: an existing --out and an existing --report got different codes and messages.
    (tmp_path / "out.gpkg").write_bytes(b"x")
    (tmp_path / "out.html").write_text("x")
    for option, name in (("--out", "out.gpkg"), ("--report", "out.html")):
        with pytest.raises(OutputError, match=rf"^{option} '.*{name}' exists\. Pass --overwrite to replace it, or choose another path\.$"):
            psio.check_output_paths([(option, tmp_path / name)], [wells_gpkg], overwrite=False)
    psio.check_output_paths([("--out", tmp_path / "out.gpkg"), ("--report", tmp_path / "out.html")], [wells_gpkg], overwrite=True)
    with pytest.raises(OutputError, match=r"Folder '.*nowhere' of --report '.*r\.html' does not exist"):
        psio.check_output_paths([("--report", tmp_path / "nowhere" / "r.html")], [wells_gpkg], overwrite=True)
