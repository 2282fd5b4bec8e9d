"""Tests of pointsift.record: one run record for every command."""

from __future__ import annotations

import json
import tomllib
from importlib.metadata import version
from pathlib import Path

import numpy as np
from conftest import build_wells

from pointsift import __version__
from pointsift._version import __version__ as source_version
from pointsift.config import ScreenConfig
from pointsift.record import CAUTION, library_versions, run_record

ROOT = Path(__file__).resolve().parents[1]


def test_one_version_source():
    assert __version__ == source_version
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert "version" not in project and "version" in project["dynamic"]
    assert version("pointsift") == source_version  # installed metadata, read by importlib (reference)


def test_library_versions_name_the_libraries_without_importing_them():
    versions = library_versions()
    assert versions["pointsift"] == __version__
    assert versions["numpy"] == version("numpy")  # importlib.metadata (reference)
    assert versions["gdal"]
    assert set(versions) >= {"python", "scipy", "pandas", "geopandas", "pyproj", "pyogrio"}


def test_screen_and_describe_records_share_the_common_part():
    from pointsift.pipeline import screen_frame
    from pointsift.prepare import prepare

    small_wells = build_wells(120, seed=3)
    config = ScreenConfig(value="level_m", permutations=99)
    screened = screen_frame(small_wells, config).run_info
    described = run_record("describe", config=config, prepared=prepare(small_wells, config), trend={"method": "none"})
    common = ("input_path", "rows", "value_column", "id_column", "input_crs", "work_crs", "parameters", "caution")
    assert {k: screened[k] for k in common} == {k: described[k] for k in common}
    assert screened["command"] == "screen" and described["command"] == "describe"
    assert described["caution"] == CAUTION and "licensed professional practice" in CAUTION
    assert described["trend"] == {"method": "none"}
    json.dumps(described)  # plain values only
    assert np.isfinite(screened["rows"])
