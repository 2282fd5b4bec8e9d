"""End-to-end tests of ``pointsift campaigns`` (the command line), outputs read back with sqlite3."""

from __future__ import annotations

import importlib.util
import sqlite3
import sys
from pathlib import Path

import pytest

from pointsift.cli import main

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def readings_csv(tmp_path_factory):
    spec = importlib.util.spec_from_file_location("programme", ROOT / "benchmarks" / "programme.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["programme"] = module
    spec.loader.exec_module(module)
    frame = module.make_programme(80, 8, seed=9, missing=0.0)
    frame.loc[350, "level_m"] = frame.loc[350, "level_m"] * 10  # a decimal slip
    table = frame.assign(x=frame.geometry.x, y=frame.geometry.y).drop(columns="geometry")
    path = tmp_path_factory.mktemp("campaigns") / "readings.csv"
    table.to_csv(path, index=False)
    return path, frame


def test_campaigns_end_to_end(readings_csv, tmp_path, capsys):
    path, frame = readings_csv
    out, report = tmp_path / "out.gpkg", tmp_path / "report.html"
    code = main(["campaigns", str(path), "--value", "level_m", "--id", "well_id", "--date", "date", "--crs", "EPSG:32633",
                 "--permutations", "99", "--out", str(out), "--report", str(report)])
    assert code == 0
    printed = capsys.readouterr().out
    assert "Screened 640 readings of 80 wells in 8 campaigns" in printed
    with sqlite3.connect(out) as con:
        layers = {r[0] for r in con.execute("select table_name from gpkg_contents")}
        assert {"readings", "wells", "changes", "run_info"} <= layers
        rows = con.execute("select well_id, level_m, reading_status, reading_reasons from readings order by fid").fetchall()
        assert len(rows) == len(frame)
        assert [r[0] for r in rows] == frame.well_id.tolist()  # every row, in input order
        assert rows[350][2] == "suspect"
        assert con.execute("select count(*) from wells").fetchone()[0] == 80
        caution = con.execute("select value from run_info where key = 'caution'").fetchone()[0]
        assert "not determinations" in caution
    assert report.exists() and "Change between the last two campaigns" in report.read_text(encoding="utf-8")


def test_campaigns_usage_and_data_errors(readings_csv, tmp_path, capsys):
    path, _ = readings_csv
    common = [str(path), "--value", "level_m", "--crs", "EPSG:32633", "--out", str(tmp_path / "o.gpkg")]
    assert main(["campaigns", *common, "--date", "date"]) == 2  # no --id
    assert "--id COLUMN" in capsys.readouterr().err
    assert main(["campaigns", *common, "--id", "well_id", "--date", "date", "--campaign-window", "spring=1-7,fall=7-12"]) == 2
    assert "both hold month 7" in capsys.readouterr().err
    assert main(["campaigns", *common, "--id", "well_id", "--date", "when"]) == 1
    assert "no date column 'when'" in capsys.readouterr().err


def test_ids_from_the_data_are_printed_with_control_characters_escaped(readings_csv, tmp_path, capsys):
    # what reaches the terminal goes through pointsift.terminal.printable, as for screen (issue 10)
    import pandas as pd

    path, frame = readings_csv
    table = pd.read_csv(path)
    slipped = table.loc[350, "well_id"]
    table["well_id"] = table["well_id"].replace(slipped, slipped + "\x1b]0;owned\x07")
    tricky = tmp_path / "tricky.csv"
    table.to_csv(tricky, index=False)
    code = main(["campaigns", str(tricky), "--value", "level_m", "--id", "well_id", "--date", "date", "--crs",
                 "EPSG:32633", "--permutations", "99", "--out", str(tmp_path / "o.gpkg")])
    printed = capsys.readouterr().out
    assert code == 0 and "\x1b" not in printed and "\x07" not in printed
    assert "Caution: flags are screening aids" in printed
