"""Tests of pointsift.batch: plans, expansion into units, resume, parallel runs, the index.

Every input is invented inside the test (tmp_path): smooth synthetic water
levels on scattered points, in a projected CRS (EPSG:32633, UTM zone 33N).
Outside references: :mod:`tomllib` and a plain line count for plan
positions, pandas ``groupby`` for groups, :mod:`hashlib` for content hashes,
pyogrio / pyproj / shapely for reading back what was written.
"""

from __future__ import annotations

import hashlib
import os
import re
import textwrap
import warnings
import tomllib
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from pyproj import Transformer

from pointsift import batch
from pointsift.config import ScreenConfig
from pointsift.errors import ConfigError

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


def line_of(text: str, fragment: str, start: int = 0) -> int:
    """1-based number of the first line containing ``fragment`` at or after line ``start``."""
    lines = text.splitlines()
    for number in range(start, len(lines)):
        if fragment in lines[number]:
            return number + 1
    raise AssertionError(f"{fragment!r} not in text")


# ---------------------------------------------------------------------------
# plans


def test_plan_reads_defaults_overrides_lengths_and_relative_paths(tmp_path):
    data_dir = tmp_path / "data"
    data_dir.mkdir()
    write_gpkg(data_dir / "north.gpkg", {"wells": synthetic_points(seed=1)})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(textwrap.dedent("""
        [batch]
        out_dir = "screened"
        jobs = 2

        [defaults]
        value = "level_m"
        k = 12
        coincident_tolerance = "2 ft"

        [[input]]
        path = "data/*.gpkg"

        [[input]]
        path = "data/north.gpkg"
        name = "north-band"
        graph = "band"
        within = "1.5km"
        sentinels = [-9999, 0]
    """))
    plan = batch.load_plan(plan_path)
    assert plan.out_dir == tmp_path / "screened"
    assert plan.jobs == 2
    first, second = plan.inputs
    assert first.config == ScreenConfig(value="level_m", k=12, coincident_tolerance=0.6096)  # 1 ft = 0.3048 m exactly (international foot)
    assert second.config.graph == "band"
    assert second.config.within == 1500.0  # 1 km = 1000 m (SI)
    assert second.config.sentinels == (-9999.0, 0.0)
    assert second.config.k == 12  # inherited from [defaults]
    assert second.name == "north-band"
    # the command line takes precedence over the plan
    assert batch.load_plan(plan_path, jobs=1, out_dir=tmp_path / "elsewhere").jobs == 1
    assert batch.load_plan(plan_path, out_dir=tmp_path / "elsewhere").out_dir == tmp_path / "elsewhere"


PLAN_WITH_MISTAKES = """\
# quarterly screening
[batch]
out_dir = "out"
jobs = 0

[defaults]
value = "level_m"
detrend = "quadratic"

[[input]]
path = "good.gpkg"
layers = [
  "wells",   # a comment with ] inside
  "springs",
]

[[input]]
path = "good.gpkg"
neighbors = 8
graph = "bnad"
within = "5 leagues"

[[input]]
path = ["good.gpkg", "missing/*.gpkg"]
"""


def test_plan_errors_name_line_key_and_valid_choices(tmp_path):
    write_gpkg(tmp_path / "good.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(PLAN_WITH_MISTAKES)
    tomllib.loads(PLAN_WITH_MISTAKES)  # the reference parser accepts the syntax: only values are wrong
    with pytest.raises(ConfigError) as caught:
        batch.load_plan(plan_path)
    message = str(caught.value)
    text = PLAN_WITH_MISTAKES
    second = line_of(text, "[[input]]", line_of(text, "[[input]]"))  # header of the second entry
    # line numbers counted independently in the text
    assert f"plan.toml line {line_of(text, 'jobs = 0')}, [batch], key 'jobs'" in message
    assert f"plan.toml line {line_of(text, 'detrend')}, [defaults], key 'detrend'" in message
    assert "choose one of none, auto, surface1, surface2, polish" in message  # valid choices listed
    assert f"plan.toml line {line_of(text, 'neighbors')}, [[input]] #2, key 'neighbors': unknown key." in message
    assert "Did you mean 'min_neighbours'?" in message
    assert "Valid keys:" in message and " k," in message
    assert f"plan.toml line {line_of(text, 'graph = ', second)}, [[input]] #2, key 'graph'" in message
    assert "choose one of knn, band" in message
    assert f"line {line_of(text, 'within', second)}, [[input]] #2, key 'within'" in message
    assert "(m, km, ft, mi)" in message
    assert f"line {line_of(text, 'missing/')}, [[input]] #3, key 'path': the pattern 'missing/*.gpkg' matches no file" in message
    # every mistake is reported at once, none twice
    assert message.count("\n  - ") == 6


@pytest.mark.parametrize(
    "text, expected",
    [
        ("[defaults]\nvalue = 'level_m'\n", r"lists no inputs"),
        ("[defaults]\nvaule = 'level_m'\n[[input]]\npath = 'good.gpkg'\n",
         r"line 2, \[defaults\], key 'vaule': unknown key. Did you mean 'value'\?"),
        ("[[input]]\npath = 'good.gpkg'\n", r"no value column"),
        ("[batch]\nout_dir = 'o'\n[input]\npath = 'good.gpkg'\nvalue = 'v'\n", r"\[\[input\]\] table \(double brackets\)"),
        ("[defaults]\nvalue = 'v'\nk = 12\nmin_neighbours = 13\n[[input]]\npath = 'good.gpkg'\n",
         r"line 4, \[defaults\], key 'min_neighbours': min_neighbours \(13\) cannot exceed k \(12\)"),
        ("[defaults]\nvalue = 'v'\n[[input]]\npath = 'good.gpkg'\nx = 'e'\n", r"key 'x': x and y .* set both"),
        ("[defaults]\nvalue = 'v'\n[[input]]\npath = 'good.gpkg'\nname = '../up'\n", r"key 'name': '../up' is not usable"),
        ("[defaults]\nvalue = 'v'\nseed = 1.5\n[[input]]\npath = 'good.gpkg'\n", r"key 'seed': expects a whole number"),
        ("value = 'v'\n[[input]]\npath = 'good.gpkg'\n", r"line 1, top level, key 'value': unknown table or key"),
    ],
)
def test_plan_error_messages(tmp_path, text, expected):
    write_gpkg(tmp_path / "good.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(text)
    with pytest.raises(ConfigError, match=expected):
        batch.load_plan(plan_path, out_dir=tmp_path / "out")


def test_plan_syntax_error_and_missing_file(tmp_path):
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text("[defaults]\nvalue = level_m\n")
    # tomllib, the reference parser, reports the position of the syntax error
    with pytest.raises(tomllib.TOMLDecodeError, match="line 2"):
        tomllib.loads(plan_path.read_text())
    with pytest.raises(ConfigError, match=r"plan.toml is not valid TOML: .*line 2"):
        batch.load_plan(plan_path)
    with pytest.raises(ConfigError, match="does not exist"):
        batch.load_plan(tmp_path / "nowhere.toml")


def test_plan_from_args_builds_the_same_plan_as_toml(tmp_path):
    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points()})
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(f'[defaults]\nvalue = "level_m"\nk = 8\n[[input]]\npath = "{tmp_path / "a.gpkg"}"\nby = "well"\n')
    from_toml = batch.load_plan(plan_path, out_dir=tmp_path / "out")
    from_args = batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=tmp_path / "out",
                                     options={"value": "level_m", "k": 8}, by="well")
    assert from_args.inputs[0].config == from_toml.inputs[0].config
    assert from_args.inputs[0].by == from_toml.inputs[0].by == "well"
    with pytest.raises(ConfigError, match="command line, \\[defaults\\], key 'k': k must be a whole number from 3 to 100"):
        batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=tmp_path / "out", options={"value": "v", "k": 1})


# ---------------------------------------------------------------------------
# expansion


def test_expand_files_layers_groups_and_unique_names(tmp_path):
    north, south = tmp_path / "north", tmp_path / "south"
    north.mkdir()
    south.mkdir()
    campaigns = np.repeat(np.array(["2026-03-02", "2026-06-01", "2026-09-07"], dtype="datetime64[ns]"), 40)
    networks = np.where(np.arange(120) % 2 == 0, "A", "B").astype(object)
    networks[5] = None
    write_gpkg(north / "wells.gpkg", {
        "shallow": synthetic_points(seed=1, extra={"campaign": campaigns}),
        "deep": synthetic_points(seed=2, extra={"network": networks}),
    })
    write_gpkg(south / "wells.gpkg", {"wells": synthetic_points(seed=3)})
    out_dir = north / "screened"  # inside an input folder: never read back as input
    out_dir.mkdir()
    write_gpkg(out_dir / "old.gpkg", {"screened": synthetic_points(seed=4)})
    plan = batch.parse_plan(
        {
            "defaults": {"value": "level_m"},
            "input": [
                {"path": ["north", "south/*.gpkg"]},
                {"path": "north/wells.gpkg", "layers": ["shallow"], "by": "campaign", "name": "shallow-by-date"},
                {"path": "north/wells.gpkg", "layers": ["deep", "nothere"], "by": "network"},
            ],
        },
        base_dir=tmp_path,
        out_dir=out_dir,
    )
    units = batch.expand_units(plan)
    names = [u.name for u in units]
    assert names == [
        "wells__shallow",
        "wells__deep",
        "wells",
        "shallow-by-date__shallow__campaign-2026-03-02",
        "shallow-by-date__shallow__campaign-2026-06-01",
        "shallow-by-date__shallow__campaign-2026-09-07",
        "wells__nothere",
        "wells__deep__network-A",
        "wells__deep__network-B",
        "wells__deep__network-missing",
    ]
    assert not any("old" in n for n in names)
    missing_layer = next(u for u in units if u.layer == "nothere")
    assert "layer 'nothere' is not in wells.gpkg; its layers are: shallow, deep" in missing_layer.problem
    # groups agree with pandas groupby on the same column (reference)
    frame = pyogrio.read_dataframe(north / "wells.gpkg", layer="deep")
    by_pandas = frame.groupby("network", dropna=False).size()
    grouped = [u for u in units if u.by == "network" and u.problem is None]
    assert len(grouped) == len(by_pandas)
    dated = [u.group for u in units if u.by == "campaign"]
    assert dated == [str(d)[:10] for d in np.unique(campaigns)]


@pytest.mark.filterwarnings("ignore:GPKG. bad application_id:RuntimeWarning")
def test_expand_records_unreadable_file_and_missing_group_column(tmp_path):
    write_gpkg(tmp_path / "good.gpkg", {"wells": synthetic_points()})
    (tmp_path / "broken.gpkg").write_bytes(b"SQLite format 3\x00" + bytes(2000))
    plan = batch.parse_plan({"defaults": {"value": "level_m"}, "input": [
        {"path": "*.gpkg"}, {"path": "good.gpkg", "by": "netwrok"}]}, base_dir=tmp_path, out_dir=tmp_path / "out")
    units = batch.expand_units(plan)
    broken = next(u for u in units if u.path.name == "broken.gpkg")
    assert broken.problem and "broken.gpkg" in broken.problem
    assert next(u for u in units if u.path.name == "good.gpkg" and u.by is None).problem is None
    assert len({u.name for u in units}) == 3  # one file listed twice still gets two distinct outputs
    clash = [u for u in units if u.by == "netwrok"]
    assert len(clash) == 1 and "grouping column 'netwrok' is not in good.gpkg" in clash[0].problem
    assert "its columns are: well, level_m" in clash[0].problem


def test_group_labels_match_pandas_groups():
    # reference: pandas groupby over the same values (dropna=False keeps the empty group)
    values = pd.Series([3.0, 1.0, np.nan, 3.0, 2.0])
    labels = batch.group_labels(values)
    assert labels == ["3", "1", None, "3", "2"]
    assert len(set(labels)) == values.groupby(values, dropna=False).ngroups
    stamps = pd.Series(pd.to_datetime(["2026-01-05 10:30", "2026-01-05 00:00", None]))
    assert batch.group_labels(stamps) == ["2026-01-05T10:30:00", "2026-01-05T00:00:00", None]


# ---------------------------------------------------------------------------
# fingerprints and the index


def test_fingerprint_covers_content_options_version_not_path(tmp_path):
    config = ScreenConfig(value="level_m")
    unit = batch.Unit(name="a", path=tmp_path / "a.gpkg", display="a.gpkg", config=config)
    moved = batch.Unit(name="a", path=tmp_path / "elsewhere" / "a.gpkg", display="elsewhere/a.gpkg", config=config)
    content = hashlib.sha256(b"some bytes").hexdigest()  # reference: hashlib
    base = batch.unit_fingerprint(unit, content, "1.0")
    assert len(base) == 64 and int(base, 16) >= 0
    assert batch.unit_fingerprint(moved, content, "1.0") == base
    assert batch.unit_fingerprint(unit, hashlib.sha256(b"other bytes").hexdigest(), "1.0") != base
    assert batch.unit_fingerprint(unit, content, "1.1") != base
    changed = batch.Unit(name="a", path=unit.path, display="a.gpkg", config=config.replace(k=11))
    assert batch.unit_fingerprint(changed, content, "1.0") != base
    grouped = batch.Unit(name="a", path=unit.path, display="a.gpkg", config=config, by="net", group="A")
    assert batch.unit_fingerprint(grouped, content, "1.0") != base


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
                          extent_lonlat=batch._lonlat_extent(bounds, CRS)),
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


# ---------------------------------------------------------------------------
# running batches (the real screening spine, small invented inputs)

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


@pytest.mark.filterwarnings("ignore:GPKG. bad application_id:RuntimeWarning")
def test_batch_over_a_programme_with_bad_inputs(tmp_path, capsys):
    from pointsift.cli import main

    plan = make_programme(tmp_path)
    code = main(["batch", str(plan)])
    captured = capsys.readouterr()
    assert code == batch.EXIT_SOME_FAILED == 3
    out_dir = tmp_path / "screened"
    index = read_index(out_dir)
    assert index["outcome"].to_dict() == {
        "corrupt": "failed",
        "no_crs": "failed",
        "no_value": "failed",
        "north": "done",
        "south": "done",
        "regional__network-A": "done",
        "regional__network-B": "done",
        "regional__network-C": "done",
        "springs": "done",
    }
    assert "corrupt.gpkg" in index.loc["corrupt", "message"]
    assert "has no CRS" in index.loc["no_crs", "message"]
    # the message points at the plan entry to fix, and says the flag it mentions is a plan key there
    entry_line = line_of(plan.read_text(), "[[input]]")
    assert f"(plan entry: plan.toml line {entry_line}, [[input]] #1; in the plan, --crs is crs = ..." in index.loc[
        "no_crs", "message"]
    assert "no column 'level_m'" in index.loc["no_value", "message"] and "head_m" in index.loc["no_value", "message"]
    assert "9 units: 6 done, 3 failed" in captured.err
    # each output read back with pyogrio: every input row is there, with a status word
    expected_rows = {"north": 90, "south": 70, "regional__network-A": 50, "regional__network-B": 40,
                     "regional__network-C": 30, "springs": 50}
    for unit, rows in expected_rows.items():
        screened = pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")
        assert len(screened) == rows
        assert set(screened["screen_status"]) <= {"suspect", "review", "ok", "unscreened"}
        counts = screened["screen_status"].value_counts()
        assert [int(index.loc[unit, s] or 0) for s in ("suspect", "review", "ok", "unscreened")] == [
            int(counts.get(s, 0)) for s in ("suspect", "review", "ok", "unscreened")]
        assert index.loc[unit, "output"] == f"{unit}.gpkg"
    # a group holds exactly its rows (reference: pandas selection on the input)
    regional = pyogrio.read_dataframe(tmp_path / "grouped" / "regional.gpkg")
    group_b = pyogrio.read_dataframe(out_dir / "regional__network-B.gpkg", layer="screened")
    assert group_b["well"].tolist() == regional.loc[regional["network"] == "B", "well"].tolist()
    # extent polygons in longitude/latitude contain the points (reference: pyproj + shapely)
    layer = pyogrio.read_dataframe(out_dir / "batch-index.gpkg", layer="batch_index").set_index("unit")
    north = pyogrio.read_dataframe(tmp_path / "data" / "north.gpkg").to_crs("EPSG:4326")
    assert layer.loc["north", "geometry"].buffer(1e-9).contains(shapely.MultiPoint(north.geometry.tolist()))
    assert layer.loc["corrupt", "geometry"] is None
    # nothing partial: only outputs, their records and the index
    expected = {f"{u}.gpkg" for u in expected_rows} | {f"{u}.batch.json" for u in expected_rows} | {
        "batch-index.csv", "batch-index.gpkg"}
    assert {p.name for p in out_dir.iterdir()} == expected


def test_rerun_skips_touched_input_redone_option_change_redoes_all(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    for seed in range(3):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(60, seed=seed)})
    out_dir = tmp_path / "out"

    def run(**options):
        plan = batch.plan_from_args([str(data)], out_dir=out_dir, options={**FAST, **options})
        result = batch.run_batch(plan)
        return {o.unit.name: o.outcome for o in result.outcomes}

    assert run() == {"net0": "done", "net1": "done", "net2": "done"}
    written = {p.name: p.stat().st_mtime_ns for p in out_dir.glob("net*.gpkg")}
    assert run() == {"net0": "skipped-up-to-date", "net1": "skipped-up-to-date", "net2": "skipped-up-to-date"}
    assert {p.name: p.stat().st_mtime_ns for p in out_dir.glob("net*.gpkg")} == written  # not rewritten
    # a new modification time alone is not a change of content
    os.utime(data / "net0.gpkg", ns=(1, 1))
    assert run()["net0"] == "skipped-up-to-date"
    # new content in one input redoes only that one
    changed = synthetic_points(60, seed=1)
    changed.loc[3, "level_m"] += 0.5
    (data / "net1.gpkg").unlink()
    write_gpkg(data / "net1.gpkg", {"wells": changed})
    assert run() == {"net0": "skipped-up-to-date", "net1": "done", "net2": "skipped-up-to-date"}
    # an option change redoes all
    assert run(k=8) == {"net0": "done", "net1": "done", "net2": "done"}
    assert set(run(k=8).values()) == {"skipped-up-to-date"}
    # a deleted output is made again; --force redoes everything
    (out_dir / "net2.gpkg").unlink()
    assert run(k=8)["net2"] == "done"
    plan = batch.plan_from_args([str(data)], out_dir=out_dir, options={**FAST, "k": 8})
    assert {o.outcome for o in batch.run_batch(plan, force=True).outcomes} == {"done"}


def test_jobs_2_writes_identical_attribute_tables_to_jobs_1(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    for seed in range(3):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(80, seed=seed)})
    network = np.repeat(np.array(["east", "west"], dtype=object), 50)
    write_gpkg(data / "regional.gpkg", {"wells": synthetic_points(100, seed=7, extra={"network": network})})
    results = {}
    for jobs in (1, 2):
        plan = batch.plan_from_args([str(data)], out_dir=tmp_path / f"jobs{jobs}", options=FAST, jobs=jobs)
        results[jobs] = batch.run_batch(plan)
        assert results[jobs].exit_code == 0
    names = sorted(p.name for p in (tmp_path / "jobs1").glob("*.gpkg") if p.name != "batch-index.gpkg")
    assert names == sorted(p.name for p in (tmp_path / "jobs2").glob("*.gpkg") if p.name != "batch-index.gpkg")
    assert len(names) == 4
    for name in names:
        one = pyogrio.read_dataframe(tmp_path / "jobs1" / name, layer="screened", read_geometry=False)
        two = pyogrio.read_dataframe(tmp_path / "jobs2" / name, layer="screened", read_geometry=False)
        # byte-identical: the same CSV text, every float written with full precision
        assert one.to_csv(float_format="%.17g").encode() == two.to_csv(float_format="%.17g").encode()
    fingerprints = [[o.fingerprint for o in results[j].outcomes] for j in (1, 2)]
    assert fingerprints[0] == fingerprints[1]


def test_cli_plan_error_exit_2_and_direct_form(tmp_path, capsys):
    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(60, seed=3)})
    plan = tmp_path / "plan.toml"
    plan.write_text('[defaults]\nvalue = "level_m"\ngraph = "ring"\n[[input]]\npath = "a.gpkg"\n')
    assert main(["batch", str(plan), "--out-dir", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "plan.toml line 3, [defaults], key 'graph': graph 'ring' is not known; choose one of knn, band." in err
    assert not (tmp_path / "o").exists()  # nothing was run
    assert main(["batch", str(tmp_path / "a.gpkg"), "--out-dir", str(tmp_path / "o")]) == 2
    assert "--value COLUMN" in capsys.readouterr().err
    code = main(["-q", "batch", str(tmp_path / "a.gpkg"), "--value", "level_m", "--permutations", "99",
                 "--out-dir", str(tmp_path / "o")])
    assert code == 0
    assert capsys.readouterr().err == ""
    record = (tmp_path / "o" / "a.batch.json").read_text()
    assert '"permutations": 99' in record
    assert hashlib.sha256((tmp_path / "a.gpkg").read_bytes()).hexdigest() in record  # reference: hashlib


@pytest.mark.parametrize(
    "jobs, presses",
    [(1, 1), pytest.param(1, 2, marks=pytest.mark.slow), pytest.param(2, 1, marks=pytest.mark.slow),
     pytest.param(2, 2, marks=pytest.mark.slow)],
)
def test_ctrl_c_keeps_finished_outputs_and_leaves_nothing_partial(tmp_path, jobs, presses):
    import signal
    import subprocess
    import sys
    import time

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(12):
        write_gpkg(data / f"net{seed:02d}.gpkg", {"wells": synthetic_points(400, seed=seed)})
    out_dir = tmp_path / "out"
    command = [sys.executable, "-m", "pointsift.cli", "batch", str(data), "--value", "level_m", "--permutations", "99",
               "--out-dir", str(out_dir), "--jobs", str(jobs)]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while not list(out_dir.glob("*.batch.json")) and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.02)
    for _ in range(presses):
        process.send_signal(signal.SIGINT)
        time.sleep(0.05)
    stdout, stderr = process.communicate(timeout=120)
    assert process.returncode == batch.EXIT_INTERRUPTED == 130, stderr
    index = read_index(out_dir)
    outcomes = index["outcome"]
    assert (outcomes == "done").sum() >= 1 and (outcomes == "not-run").sum() >= 1
    assert set(outcomes) <= {"done", "not-run"}
    for unit in index.index[outcomes == "done"]:
        assert len(pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")) == 400
    for unit in index.index[outcomes == "not-run"]:
        assert not (out_dir / f"{unit}.gpkg").exists()
    leftovers = [p.name for p in out_dir.iterdir()
                 if not (p.name.endswith(".gpkg") or p.name.endswith(".batch.json") or p.name == "batch-index.csv")]
    assert leftovers == []
    assert "stopped by Ctrl-C" in stderr
    # a rerun finishes the rest and redoes nothing
    rerun = subprocess.run(command, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    again = read_index(out_dir)["outcome"]
    assert (again[outcomes == "done"] == "skipped-up-to-date").all()
    assert (again[outcomes == "not-run"] == "done").all()


class _Terminal:
    """A text stream that says it is a terminal."""

    def __init__(self) -> None:
        import io

        self.buffer = io.StringIO()

    def write(self, text: str) -> int:
        return self.buffer.write(text)

    def flush(self) -> None:
        pass

    def isatty(self) -> bool:
        return True


def test_progress_bar_on_a_terminal_lines_otherwise_silence_with_quiet(tmp_path):
    import io

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(2):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(50, seed=seed)})
    (data / "broken.csv").write_text("well,level_m\nW1,3.0\n")  # no coordinate columns
    assert isinstance(batch.make_progress(quiet=True, stream=_Terminal()), batch.SilentProgress)
    assert type(batch.make_progress(stream=io.StringIO())) is batch.LineProgress
    terminal = _Terminal()
    bar = batch.make_progress(stream=terminal)
    assert isinstance(bar, batch.RichProgress)
    plan = batch.plan_from_args([str(data)], out_dir=tmp_path / "a", options=FAST)
    batch.run_batch(plan, progress=bar)
    shown = re.sub(r"\x1b\[[0-9;?]*[A-Za-z]", "", terminal.buffer.getvalue())  # without terminal colour codes
    assert "3/3" in shown and "2 done, 0 up to date, 1 failed" in shown
    assert "failed broken: " in shown and "coordinate columns" in shown
    lines = io.StringIO()
    batch.run_batch(plan, progress=batch.LineProgress(lines))
    text = lines.getvalue().splitlines()
    assert text[0] == "pointsift batch: 3 units"
    # up-to-date units are reported first (found before any screening starts), then the rest
    assert text[1].startswith("[1/3] skipped-up-to-date net0 (")
    assert text[2].startswith("[2/3] skipped-up-to-date net1 (")
    assert text[3].startswith("[3/3] failed broken: ") and "coordinate columns" in text[3]


def _child_pids(pid: int) -> list[int]:
    found = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                found.append(int(entry))
    return found


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="finds worker processes through /proc (Linux)")
def test_a_worker_killed_mid_run_is_replaced_and_its_unit_redone(tmp_path):
    import signal
    import subprocess
    import sys
    import time

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(8):
        write_gpkg(data / f"n{seed}.gpkg", {"wells": synthetic_points(1000, seed=seed)})
    out_dir = tmp_path / "out"
    process = subprocess.Popen(
        [sys.executable, "-m", "pointsift.cli", "batch", str(data), "--value", "level_m", "--permutations", "99",
         "--out-dir", str(out_dir), "--jobs", "2"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    killed = None
    deadline = time.monotonic() + 120
    while killed is None and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.05)
        if not list(out_dir.glob("*.batch.json")):
            continue
        # workers are grandchildren of the batch process (through the forkserver)
        workers = [w for child in _child_pids(process.pid) for w in _child_pids(child)]
        if workers:
            os.kill(workers[0], signal.SIGKILL)  # as the kernel's out-of-memory killer would
            killed = workers[0]
    stdout, stderr = process.communicate(timeout=300)
    assert killed is not None, "no worker seen"
    assert process.returncode == 0, stderr
    index = read_index(out_dir)
    assert set(index["outcome"]) == {"done"} and len(index) == 8
    for unit in index.index:
        assert len(pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")) == 1000


def test_a_second_batch_into_the_same_folder_is_refused_while_the_first_runs(tmp_path):
    import subprocess
    import sys

    from pointsift.errors import OutputError

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(40, seed=1)})
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    plan = batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=out_dir, options=FAST)
    holder = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        (out_dir / ".batch.lock").write_text(str(holder.pid))
        with pytest.raises(OutputError, match=rf"Another batch \(process {holder.pid}\) is writing to"):
            batch.run_batch(plan)
    finally:
        holder.kill()
        holder.wait()
    # the holder is gone: its lock is stale and the batch takes the folder over
    result = batch.run_batch(plan)
    assert [o.outcome for o in result.outcomes] == ["done"]
    assert not (out_dir / ".batch.lock").exists()


def test_reports_beside_outputs_and_resumed_like_outputs(tmp_path):
    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(80, seed=2)})
    plan = tmp_path / "plan.toml"
    plan.write_text('[batch]\nout_dir = "out"\nreport = true\n[defaults]\nvalue = "level_m"\npermutations = 99\n'
                    '[[input]]\npath = "a.gpkg"\n')
    assert main(["-q", "batch", str(plan)]) == 0
    out_dir = tmp_path / "out"
    html = (out_dir / "a.html").read_text(encoding="utf-8")
    assert html.lstrip().lower().startswith("<!doctype html")
    assert read_index(out_dir).loc["a", "report"] == "a.html"
    assert main(["-q", "batch", str(plan)]) == 0
    assert read_index(out_dir).loc["a", "outcome"] == "skipped-up-to-date"
    (out_dir / "a.html").unlink()  # a missing report makes the unit out of date
    assert main(["-q", "batch", str(plan)]) == 0
    assert read_index(out_dir).loc["a", "outcome"] == "done" and (out_dir / "a.html").exists()
    # the direct form asks for reports with --report
    assert main(["-q", "batch", str(tmp_path / "a.gpkg"), "--value", "level_m", "--permutations", "99",
                 "--out-dir", str(tmp_path / "direct"), "--report"]) == 0
    assert (tmp_path / "direct" / "a.html").exists()
