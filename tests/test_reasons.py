"""Reasons never contradict the status (property test over generated layers), and the GIS-facing columns."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pointsift import ScreenConfig, screen_frame

from conftest import ORIGIN


def _layer(seed, n, errors, quantity):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 5000, (n, 2))
    values = 100 + 0.004 * xy[:, 0] + 2 * np.sin(xy[:, 1] / 800) + rng.normal(0, 0.3, n)
    if quantity == "concentration":
        values = np.exp(rng.normal(3, 0.6, n))
    rows = rng.choice(n, errors, replace=False)
    values[rows] *= rng.choice([10.0, 0.1, -1.0 if quantity != "concentration" else 10.0], errors)
    return gpd.GeoDataFrame({"v": values}, geometry=gpd.points_from_xy(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1]),
                            crs="EPSG:32633")


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), n=st.integers(40, 160), errors=st.integers(0, 6),
       quantity=st.sampled_from(["level", "concentration", "other"]))
def test_reasons_never_contradict_the_status(seed, n, errors, quantity):
    layer = _layer(seed, n, errors, quantity)
    out = screen_frame(layer, ScreenConfig(value="v", quantity=quantity, permutations=99)).frame
    status, reasons = out["screen_status"], out["screen_reasons"].fillna("")
    suspect = status == "suspect"
    assert not reasons[suspect].str.contains("part of a cluster").any()
    assert not reasons[suspect].str.contains("likely a real local feature").any()
    ok = status == "ok"
    # an ok row carries no evidence, only the plain "within x robust sd" sentence
    assert reasons[ok].str.startswith("within ").all()
    for word in ("looks like an entry mistake", "local Moran", "lag pairs", "disagrees", "misplaced"):
        assert not reasons[ok].str.contains(word).any(), word
    if quantity != "level":
        assert not reasons.str.contains("pumping cone").any()
    # rows are counted one way: "row N" from 1
    assert not reasons.str.contains("row 0").any()


def test_moran_quadrant_empty_unless_adjusted_p_passes():
    layer = _layer(3, 200, 3, "level")
    result = screen_frame(layer, ScreenConfig(value="v", permutations=99))
    out = result.frame
    filled = out["local_moran_quadrant"].notna()
    assert (out.loc[filled, "local_moran_p_adjusted"] <= 0.05).all()
    assert "standardization" in result.run_info["local_autocorrelation"]


def test_lag_pairs_carry_error_evidence_and_join_to_ids():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 4000, (300, 2))
    level = 100 + 0.003 * xy[:, 0] + rng.normal(0, 0.02, 300)
    level[7] += 5.0
    ids = np.array([f"W{i:03d}" for i in range(300)], dtype=object)
    ids[8] = ids[9]  # a repeated id: the reasons add "(row N)", the layer keeps the id itself
    layer = gpd.GeoDataFrame({"well": ids, "level_m": level},
                             geometry=gpd.points_from_xy(xy[:, 0] + ORIGIN[0], xy[:, 1] + ORIGIN[1]), crs="EPSG:32633")
    result = screen_frame(layer, ScreenConfig(value="level_m", id="well", permutations=99))
    pairs = result.tables["lag_pairs"]
    assert "flagged" not in pairs.columns and {"tail_value", "head_value", "evidence"} <= set(pairs.columns)
    assert set(pairs["evidence"]) <= {"likely culprit", "suspect end"} and len(pairs) >= 1
    assert set(pairs["culprit_id"][pairs["culprit_id"] != ""]) <= set(ids)
    assert set(pairs["tail_id"]) | set(pairs["head_id"]) <= set(ids)
    np.testing.assert_allclose(pairs["tail_value"], level[pairs["tail_row"]])
