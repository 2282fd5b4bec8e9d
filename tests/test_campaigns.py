"""End-to-end tests of the campaign screen (pointsift.campaigns, pointsift.campaign_run) on an invented programme."""

from __future__ import annotations

import importlib.util
import sqlite3
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import shapely

from pointsift.campaign_run import INPUT_CAMPAIGN, campaigns_file
from pointsift.campaign_verdict import READING_COLUMNS
from pointsift.campaigns import CampaignConfig, campaigns, screen_campaigns
from pointsift.config import ScreenConfig
from pointsift.errors import ConfigError, InputError

ROOT = Path(__file__).resolve().parents[1]


def _programme_module():
    spec = importlib.util.spec_from_file_location("programme", ROOT / "benchmarks" / "programme.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["programme"] = module
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def programme():
    return _programme_module().make_programme(120, 12, seed=3, missing=0.0)


def _config(**kw):
    return CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id", permutations=99), date="date", **kw)


def _row(frame, well, campaign):
    """Row of a well's reading in the n-th campaign (campaign-major generator order)."""
    return int(np.flatnonzero((frame.well_id == well).to_numpy())[campaign])


@pytest.fixture(scope="module")
def planted(programme):
    frame = programme.copy()
    spike = _row(frame, "W00010", 7)
    frame.loc[spike, "level_m"] = round(frame.loc[spike, "level_m"] + 8.0, 2)
    step_rows = [_row(frame, "W00020", c) for c in range(6, 12)]
    frame.loc[step_rows, "level_m"] = (frame.loc[step_rows, "level_m"] + 5.0).round(2)
    moved = _row(frame, "W00030", 9)
    frame.loc[moved, "geometry"] = shapely.Point(frame.geometry[moved].x + 6000.0, frame.geometry[moved].y)
    extra = frame.iloc[[_row(frame, "W00040", 5)]].copy()
    extra["date"] = extra["date"].str.slice(0, 8) + "28"
    extra["level_m"] += 0.05
    frame = pd.concat([frame, extra], ignore_index=True)
    result = screen_campaigns(frame, _config())
    return frame, result, {"spike": spike, "step": step_rows[0], "moved": moved, "extra": len(frame) - 1}


def test_rows_kept_in_order_with_the_columns(planted):
    frame, result, _ = planted
    out = result.readings
    assert len(out) == len(frame) and out.crs == frame.crs
    pd.testing.assert_frame_equal(pd.DataFrame(out[frame.columns]), pd.DataFrame(frame))
    assert list(out.columns[len(frame.columns):]) == list(READING_COLUMNS)
    assert set(out.reading_status) <= {"suspect", "review", "ok", "unscreened"}
    assert result.run_info["campaigns"] == 12 and "caution" in result.run_info


def test_planted_mistakes_named(planted):
    _, result, rows = planted
    out = result.readings
    assert out.reading_status[rows["spike"]] == "suspect"
    assert "spike" in out.reading_reasons[rows["spike"]]
    assert out.reading_status[rows["step"]] == "suspect"
    assert "reference-point or datum change" in out.reading_reasons[rows["step"]]
    assert out.reading_status[rows["moved"]] == "suspect"
    assert "moved well or wrong coordinates" in out.reading_reasons[rows["moved"]]
    assert result.run_info["moved_wells"] == ["W00030"]
    # the reading after the spike is the way back, not a second mistake
    after = _row(result.readings, "W00010", 8)
    assert out.reading_status[after] != "suspect"


def test_extra_reading_kept_with_its_reason(planted):
    _, result, rows = planted
    out = result.readings
    pair = [rows["extra"], _row(out, "W00040", 5)]
    roles = out.reading_role[pair].tolist()
    assert sorted(roles) == ["extra reading", "represents the well"]
    extra = pair[roles.index("extra reading")]
    assert out.reading_status[extra] == "unscreened"
    assert out.reading_reasons[extra].startswith("second reading of this well in campaign 2002-fall (the reading of")


def test_wells_and_changes_layers(planted):
    frame, result, _ = planted
    wells = result.wells
    assert len(wells) == frame.well_id.nunique()
    assert {"readings", "campaigns", "first_campaign", "last_campaign", "latest_status", "trend_per_year",
            "readings_suspect", "readings_ok"} <= set(wells.columns)
    assert (wells.readings_suspect + wells.readings_review + wells.readings_ok + wells.readings_unscreened == wells.readings).all()
    w = wells.set_index("well_id").loc["W00050"]
    assert w.first_campaign == "2000-spring" and w.last_campaign == "2005-fall"
    changes = result.changes
    assert {"well_id", "from_campaign", "to_campaign", "change", "expected_change", "change_z"} <= set(changes.columns)
    assert set(changes.pair) == {"consecutive", "span"}


def test_long_form_and_one_layer_per_campaign_identical(programme, tmp_path):
    frame = programme.copy()
    # label each reading with its campaign (c00, c01, ... in time order), and write one layer per campaign
    year = frame.date.str.slice(0, 4).astype(int)
    season = np.where(frame.date.str.slice(5, 7).astype(int) <= 6, 0, 1)
    c = pd.Series([f"c{2 * (y - 2000) + s:02d}" for y, s in zip(year, season)])
    long = frame.assign(**{INPUT_CAMPAIGN: c})
    path = tmp_path / "campaigns.gpkg"
    for label in sorted(c.unique()):
        frame[c == label].to_file(path, layer=label, driver="GPKG", mode="a" if path.exists() else "w")
    config = CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id", permutations=99), date="date")
    run = campaigns_file([path], tmp_path / "out.gpkg", config, layer="*")
    stacked = run.result.readings
    direct = screen_campaigns(long, CampaignConfig(screen=config.screen, date="date", campaign=INPUT_CAMPAIGN))
    # the layers were written campaign by campaign: compare row for row by (well, campaign)
    a = stacked.set_index(["well_id", INPUT_CAMPAIGN]).sort_index()
    b = direct.readings.set_index(["well_id", INPUT_CAMPAIGN]).sort_index()
    for name in ("reading_status", "reading_score", "reading_reasons", "change_z", "campaign_residual_z"):
        pd.testing.assert_series_equal(a[name], b[name], check_names=False)
    # read the written file back with sqlite3 (an independent reader)
    with sqlite3.connect(tmp_path / "out.gpkg") as con:
        tables = {r[0] for r in con.execute("select table_name from gpkg_contents")}
        assert {"readings", "wells", "changes", "run_info"} <= tables
        assert con.execute("select count(*) from readings").fetchone()[0] == len(frame)


def test_python_api_and_bad_options(programme):
    out = campaigns(programme, value="level_m", id="well_id", date="date", permutations=99, min_campaigns=8)
    assert len(out) == len(programme)
    # an invented programme without mistakes: few readings suspect
    assert (out.reading_status == "suspect").mean() <= 0.01
    # messages name the options in the caller's words (Python here; the CLI test checks --id COLUMN)
    with pytest.raises(ConfigError, match=r"pass id='COLUMN'"):
        CampaignConfig(screen=ScreenConfig(value="level_m"), date="date")
    with pytest.raises(ConfigError, match=r"pass date='COLUMN'"):
        CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id"))
    with pytest.raises(InputError, match="no date column 'when'"):
        screen_campaigns(programme, CampaignConfig(screen=ScreenConfig(value="level_m", id="well_id"), date="when"))


def test_context_columns_reach_each_campaign_screen(monkeypatch):
    # issue 12: the context columns of the single screen work here too; each campaign's screen gets them
    import pointsift.campaigns as campaigns_module

    frame = _programme_module().make_programme(40, 6, seed=3, missing=0.0)  # invented programme
    rng = np.random.default_rng(3)
    wells = frame["well_id"].astype(str)
    ground = {w: 200.0 + rng.uniform(0, 5) for w in wells.unique()}
    frame["ground_m"] = wells.map(ground)
    frame["depth_m"] = wells.map({w: 60.0 + 10 * (i % 3) for i, w in enumerate(ground)})
    frame["site"] = wells
    frame["aquifer"] = wells.map({w: "upper" if i % 2 else "lower" for i, w in enumerate(ground)})
    seen = []
    original = campaigns_module.screen_frame

    def recording(sub, config, **kwargs):
        seen.append((config, set(sub.columns)))
        return original(sub, config, **kwargs)

    monkeypatch.setattr(campaigns_module, "screen_frame", recording)
    screen = ScreenConfig(value="level_m", id="well_id", permutations=99, ground_elevation="ground_m",
                          well_depth="depth_m", site="site", aquifer="aquifer", quantity="level", units="m",
                          land_surface_use="drift")
    result = screen_campaigns(frame, CampaignConfig(screen=screen, date="date", min_campaign_readings=20))
    assert len(seen) == result.run_info["campaigns_screened"] == 6
    for config, columns in seen:
        assert (config.ground_elevation, config.well_depth, config.site, config.aquifer, config.quantity,
                config.units, config.land_surface_use) == ("ground_m", "depth_m", "site", "aquifer", "level", "m",
                                                            "drift")
        assert {"ground_m", "depth_m", "site", "aquifer"} <= columns
    assert result.run_info["parameters"]["screen"]["ground_elevation"] == "ground_m"
    assert len(result.readings) == len(frame)
