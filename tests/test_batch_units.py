"""Tests of pointsift.batch.units: files, layers and groups expanded into units (reference: pandas groupby).

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations


import numpy as np
import pandas as pd
import pyogrio
import pytest

from pointsift import batch
from batch_data import synthetic_points, write_gpkg


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


def test_out_dir_equal_to_the_inputs_folder_is_an_unusable_plan(tmp_path, capsys):
    # Issue 10, item 9: the named input was dropped silently, "0 units", exit 0.
    import hashlib

    from pointsift.cli import main

    source = tmp_path / "a.gpkg"
    write_gpkg(source, {"wells": synthetic_points(60, seed=3)})
    before = hashlib.sha256(source.read_bytes()).hexdigest()
    code = main(["-q", "batch", str(source), "--value", "level_m", "--out-dir", str(tmp_path), "--permutations", "99"])
    assert code == 2
    assert "would replace an input file" in capsys.readouterr().err
    assert hashlib.sha256(source.read_bytes()).hexdigest() == before  # reference: hashlib
