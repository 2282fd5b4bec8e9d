"""Hydrogeological evidence orchestration (pointsift.hydro): the level judgement beside the depth-to-water one."""

from __future__ import annotations

import dataclasses

import geopandas as gpd
import numpy as np
import pandas as pd

from pointsift import ScreenConfig, screen_frame
from pointsift.hydro import coincident_z
from pointsift.judging import Judging
from pointsift.methods.local import LocalResult

from conftest import build_wells


def _valley_with_a_second_record(seed=6):
    """Smooth levels (a plane, 0.2 m noise) under a hummocky land surface (depth to water 5-60 m, invented).

    Row 0 gets a second record at its spot, 8 m higher: 40 level sd off, but a fraction of the
    depth-to-water scatter of its neighbours.
    """
    wells = build_wells(150, seed=seed)
    rng = np.random.default_rng([seed, 99])  # not the layer's own stream (build_wells draws its x, y from seed)
    wells["gse"] = np.round(wells["level_m"] + rng.uniform(5.0, 60.0, len(wells)), 2)
    twin = wells.iloc[[0]].copy()
    twin["level_m"] = wells["level_m"].iloc[0] + 8.0
    return pd.concat([wells, twin], ignore_index=True).pipe(gpd.GeoDataFrame, geometry="geometry", crs=wells.crs)


def test_a_second_record_is_judged_on_the_tighter_level_surface():
    wells = _valley_with_a_second_record()
    out = screen_frame(wells, ScreenConfig(value="level_m", id="well_id", ground_elevation="gse", units="m",
                                           permutations=99)).frame
    extra, first = len(wells) - 1, 0
    # the depths to water of the neighbours scatter by tens of metres: on that scale the two records look alike
    assert abs(out["local_residual_z"].iloc[extra]) < 2.0
    # on the neighbours' levels the extra record is far off and the first one fits: the neighbours side with the first
    assert out["coincident_role"].iloc[extra] == "contradicted"
    assert out["screen_status"].iloc[extra] == "suspect"
    assert "coincident record disagrees by 8 m: the neighbours side with W0000" in out["screen_reasons"].iloc[extra]
    assert out["screen_status"].iloc[first] != "suspect"


def _local(z, scale):
    n = len(z)
    nan = np.full(n, np.nan)
    return LocalResult(expected=nan, residual=nan, scale=np.asarray(scale, float), z=np.asarray(z, float),
                       curved_z=nan, echo=nan, neighbour_count=np.zeros(n, int), neighbour_distance=nan,
                       coherent=np.zeros(n, bool), explained_by_curvature=np.zeros(n, bool),
                       excluded=np.zeros(n, bool), quadratic_used=np.zeros(n, bool), distance_model={})


def test_coincident_z_takes_the_tighter_judgement_only_for_depth_to_water():
    depth = _local([0.5, 3.0, np.nan], [10.0, 1.0, 2.0])
    level = _local([6.0, 0.2, 1.0], [2.0, 5.0, 1.0])
    judging = Judging("depth to water", np.zeros(3), None, np.full(3, "", dtype=object), {})
    # row 0: the level scale is tighter; row 1: the depth scale; row 2: only the level judged
    z, scale = coincident_z(judging, depth, level)
    np.testing.assert_array_equal(z, [6.0, 3.0, 1.0])
    np.testing.assert_array_equal(scale, [2.0, 1.0, 1.0])
    values = dataclasses.replace(judging, mode="values")
    np.testing.assert_array_equal(coincident_z(values, depth, level)[0], depth.z)
    # the same object (values judged): its own z and scale
    z, scale = coincident_z(judging, depth, depth)
    np.testing.assert_array_equal(z, depth.z)
    np.testing.assert_array_equal(scale, depth.scale)
