"""Tests of pointsift.batch.command through the real `pointsift batch` command.

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations

import hashlib

import pyogrio
import pytest
from batch_data import synthetic_points, write_gpkg


def test_cli_plan_error_exit_2_and_direct_form(tmp_path, capsys):
    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(60, seed=3)})
    plan = tmp_path / "plan.toml"
    plan.write_text('[defaults]\nvalue = "level_m"\ngraph = "ring"\n[[input]]\npath = "a.gpkg"\n')
    assert main(["batch", str(plan), "--out-dir", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "plan.toml line 3, [defaults], key 'graph': 'ring' is not known; choose one of knn, band." in err
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


@pytest.mark.parametrize("n, options", [(400, ["--within", "5km"]), (500, ["--neighbours", "100"]), (250, ["--neighbours", "50"])])
def test_batch_with_many_neighbours_completes(tmp_path, capsys, n, options):
    # issue 10 item 2: the k-subset sampler gave up ("could not draw distinct
    # neighbour sets") for these options in batch as in screen
    from pointsift.cli import main

    data = tmp_path / "data"
    data.mkdir()
    write_gpkg(data / "net.gpkg", {"wells": synthetic_points(n, seed=3)})
    code = main(["-q", "batch", str(data), "--value", "level_m", "--id", "well", "--permutations", "99",
                 "--out-dir", str(tmp_path / "out"), *options])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "Internal error" not in err
    layer = pyogrio.read_dataframe(tmp_path / "out" / "net.gpkg", layer="screened", read_geometry=False)
    assert len(layer) == n and (layer["screen_status"] != "unscreened").sum() > 0.9 * n
    assert layer["neighbour_count"].max() >= 40
