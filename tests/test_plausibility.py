"""Plausibility against land surface and well depth: hand-built cases."""

from __future__ import annotations

import numpy as np
import pytest

from pointsift import ScreenConfig, screen_frame
from pointsift.methods.plausibility import fmt, plausibility

from conftest import build_wells


@pytest.mark.parametrize(
    "value, ground, depth, flowing, kind, strong, weak",
    [
        (101.0, 100.0, np.nan, False, "above_surface", True, False),   # 1 m above land surface, tolerance 0.5 m
        (100.3, 100.0, np.nan, False, "", False, False),               # within the tolerance
        (101.0, 100.0, np.nan, True, "", False, False),                # a flowing well: expected
        (55.0, 100.0, 40.0, False, "below_well", True, False),         # 45 m deep water in a 40 m well
        (58.0, 100.0, 40.0, False, "below_well", False, True),         # 42 m: within a tenth of the depth
        (100.0, 100.0, np.nan, False, "at_surface", False, True),      # level = land surface
        (80.0, 100.0, 40.0, False, "", False, False),                  # ordinary
    ],
)
def test_level_rules(value, ground, depth, flowing, kind, strong, weak):
    # common practice in water-level data review: the rules of pointsift.methods.plausibility
    out = plausibility(np.array([value]), "level", np.array([ground]), np.array([depth]), np.array([flowing]),
                       tolerance=0.5, units="m")
    assert out["kind"][0] == kind and out["strong"][0] == strong and out["weak"][0] == weak
    assert (out["text"][0] != "") == (kind != "")


def test_depth_quantity_and_other_quantities():
    out = plausibility(np.array([-2.0, 50.0]), "depth", np.array([np.nan, np.nan]), np.array([np.nan, 30.0]),
                       np.zeros(2, bool), tolerance=0.5, units="m")
    assert out["kind"].tolist() == ["above_surface", "below_well"]
    assert "above the land surface" in out["text"][0] and "would be dry" in out["text"][1]
    none = plausibility(np.array([-2.0]), "concentration", np.array([0.0]), np.array([1.0]), np.zeros(1, bool), tolerance=0.5)
    assert not none["strong"].any() and none["text"][0] == ""


def test_fmt_digits_and_units():
    assert fmt(12.345678, "ft") == "12.346 ft"
    assert fmt(float("nan")) == "n/a"


def _field(n=150, seed=7):
    wells = build_wells(n, seed=seed, noise=0.1)
    rng = np.random.default_rng(seed + 1000)  # not build_wells' own stream (that drew the coordinates)
    wells["gse"] = wells["level_m"] + rng.uniform(8.0, 12.0, n)
    wells["depth"] = 60.0
    wells["flows"] = 0
    return wells


def _screen(wells, **options):
    config = ScreenConfig(value="level_m", id="well_id", ground_elevation="gse", well_depth="depth", flowing="flows",
                          units="m", permutations=99, **options)
    return screen_frame(wells, config).frame.set_index("well_id")


def test_pipeline_above_surface_is_suspect_unless_flowing():
    wells = _field()
    wells.loc[10, "gse"] = wells.loc[10, "level_m"] - 2.0  # a level 2 m above its land surface
    out = _screen(wells)
    row = out.loc[wells.loc[10, "well_id"]]
    assert row["screen_status"] == "suspect"
    assert row["screen_reasons"].startswith("level ") and "above the land surface" in row["screen_reasons"]
    wells.loc[10, "flows"] = 1
    assert "above the land surface" not in _screen(wells).loc[wells.loc[10, "well_id"], "screen_reasons"]


def test_pipeline_below_well_bottom():
    wells = _field()
    wells.loc[20, "depth"] = 5.0  # water 8-12 m down in a 5 m well, the level fitting its neighbours
    row = _screen(wells).loc[wells.loc[20, "well_id"]]
    assert row["screen_status"] == "review" and "below the bottom of the well" in row["screen_reasons"]
    assert "check the recorded well depth" in row["screen_reasons"]
    wells.loc[20, "level_m"] -= 30.0  # now the level is off too: water 38-42 m down in a 60 m well is fine, so deepen
    wells.loc[20, "depth"] = 20.0
    row = _screen(wells).loc[wells.loc[20, "well_id"]]
    assert row["screen_status"] == "suspect" and "below the bottom of the well" in row["screen_reasons"]
    assert "check the recorded well depth" not in row["screen_reasons"]


def test_pipeline_depth_entered_as_level_is_named():
    wells = _field(200, seed=11)
    depth_to_water = wells.loc[30, "gse"] - wells.loc[30, "level_m"]
    wells.loc[30, "level_m"] = round(depth_to_water, 2)  # the depth typed into the level field
    wells.loc[30, "depth"] = np.nan
    row = _screen(wells).loc[wells.loc[30, "well_id"]]
    assert row["screen_status"] == "suspect"
    assert "depth to water entered as the level" in row["screen_reasons"]
    assert "fits" in row["screen_reasons"] and "by chance" in row["screen_reasons"]


def test_level_equal_to_land_surface_is_review_at_least():
    wells = _field()
    wells.loc[40, "level_m"] = wells.loc[40, "gse"]
    row = _screen(wells).loc[wells.loc[40, "well_id"]]
    assert row["screen_status"] in ("review", "suspect") and "equals the land-surface elevation" in row["screen_reasons"]


def test_upslope_well_with_ordinary_depth_is_not_an_anomaly():
    # levels follow the land surface: a well on a hill 40 m above its neighbours with a 10 m depth to water
    wells = _field(200, seed=5)
    wells.loc[50, "gse"] += 40.0
    wells.loc[50, "level_m"] += 40.0
    with_ground = _screen(wells).loc[wells.loc[50, "well_id"], "screen_status"]
    plain = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", permutations=99)).frame.set_index("well_id")
    assert plain.loc[wells.loc[50, "well_id"], "screen_status"] == "suspect"
    assert with_ground != "suspect"
