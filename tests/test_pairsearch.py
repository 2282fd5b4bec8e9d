"""Tests of pointsift.methods.pairsearch: pair search, azimuths, point spacing, lag class edges."""

from __future__ import annotations

import math

import numpy as np
import pytest
from pair_references import brute_pairs, brute_pairs_count, lattice_with_duplicates

from pointsift.errors import ConfigError, InputError
from pointsift.methods.lagpairs import DEFAULT_DIRECTIONS
from pointsift.methods.pairsearch import (
    axial_difference,
    find_pairs,
    lag_class_edges,
    point_spacing,
)


# --------------------------------------------------------------------------- pair search

@pytest.mark.parametrize("max_distance", [5.0, 7.0710678118654755, 15.0, 25.0, 35.0, 12.3])
def test_find_pairs_equals_brute_force(max_distance):
    xy = lattice_with_duplicates()
    got = find_pairs(xy, max_distance)
    ref = brute_pairs(xy.tolist(), max_distance)  # reference: all n^2 pairs, double loop
    assert got.pairs_in_reach == len(ref)
    assert not got.sampled
    assert set(zip(got.tail.tolist(), got.head.tolist())) == set(ref)
    for t, h, d, az in zip(got.tail, got.head, got.distance, got.azimuth):
        rd, raz = ref[(t, h)]
        assert d == pytest.approx(rd, abs=1e-12)
        if math.isnan(raz):
            assert math.isnan(az)
        else:
            assert az == pytest.approx(raz, abs=1e-9)
    # the lattice does put pairs exactly on the radius, and duplicates are found
    assert any(abs(d - max_distance) < 1e-9 for d, _ in ref.values()) or max_distance == 12.3
    assert any(d == 0 for d, _ in ref.values())


def test_find_pairs_random_points_equal_brute_force():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 100, (150, 2))
    got = find_pairs(xy, 18.0)
    ref = brute_pairs(xy.tolist(), 18.0)  # reference: double loop over all pairs
    assert set(zip(got.tail.tolist(), got.head.tolist())) == set(ref)


def test_azimuth_convention_of_the_four_default_directions():
    # Azimuth clockwise from north, axial (common practice); tail W of head -> 90,
    # S of head -> 0, SW -> 45, NW (head SE) -> 135.
    xy = np.array([[0.0, 0.0], [10.0, 0.0], [0.0, 10.0], [10.0, 10.0]])
    got = find_pairs(xy, 15.0)
    az = {(int(t), int(h)): float(a) for t, h, a in zip(got.tail, got.head, got.azimuth)}
    assert az[(0, 1)] == 90.0
    assert az[(0, 2)] == 0.0
    assert az[(0, 3)] == pytest.approx(45.0)
    assert az[(2, 1)] == pytest.approx(135.0)  # from (0, 10) (tail, NW) to (10, 0) (head, SE)
    assert set(DEFAULT_DIRECTIONS) == {0.0, 45.0, 90.0, 135.0}


def test_axial_difference_wraps_around_180():
    # Axial directions: 170 and 10 degrees are 20 degrees apart (common practice).
    assert axial_difference([170.0], 10.0)[0] == pytest.approx(20.0)
    assert axial_difference([179.0, 1.0, 91.0], 0.0).tolist() == pytest.approx([1.0, 1.0, 89.0])


def test_pair_budget_subsamples_pairs_with_a_seed_and_reports_it():
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 100, (400, 2))
    full = find_pairs(xy, 15.0)
    part = find_pairs(xy, 15.0, pair_budget=1000, seed=5)
    again = find_pairs(xy, 15.0, pair_budget=1000, seed=5)
    other = find_pairs(xy, 15.0, pair_budget=1000, seed=6)
    assert full.size > 1000
    assert part.size <= 1000 and part.size > 800
    assert part.sampled and part.record["sampled"] and part.record["pairs_in_reach"] == full.size
    assert part.record["pair_fraction"] < 1.0
    np.testing.assert_array_equal(part.tail, again.tail)
    np.testing.assert_array_equal(part.head, again.head)
    assert not np.array_equal(part.tail, other.tail) or not np.array_equal(part.head, other.head)
    full_set = set(zip(full.tail.tolist(), full.head.tolist()))
    assert set(zip(part.tail.tolist(), part.head.tolist())) <= full_set


def test_pair_budget_far_exceeded_samples_points_first():
    rng = np.random.default_rng(12)
    xy = rng.uniform(0, 100, (1500, 2))
    part = find_pairs(xy, 60.0, pair_budget=500, seed=1)
    assert part.size <= 500
    assert part.record["point_fraction"] < 1.0
    assert part.record["pairs_in_reach"] == len(brute_pairs_count(xy, 60.0))


def test_find_pairs_rejects_bad_radius_and_shape():
    with pytest.raises(ConfigError, match="max_distance must be a positive"):
        find_pairs(np.zeros((3, 2)), -1.0)
    with pytest.raises(InputError, match=r"\(n, 2\) array"):
        find_pairs(np.zeros((3, 3)), 1.0)
    with pytest.raises(ConfigError, match="pair_budget"):
        find_pairs(np.zeros((3, 2)), 1.0, pair_budget=0)


# --------------------------------------------------------------------------- spacing and lag classes

def test_point_spacing_is_median_distance_to_nearest_distinct_point():
    xy = lattice_with_duplicates()
    pts = xy[np.isfinite(xy).all(axis=1)]
    d = np.hypot(pts[:, None, 0] - pts[None, :, 0], pts[:, None, 1] - pts[None, :, 1])
    d[d == 0] = np.inf  # self and duplicates
    assert point_spacing(xy) == pytest.approx(float(np.median(d.min(axis=1))))  # numpy full-matrix reference


def test_lag_class_edges_touch_and_reject_overlap():
    e = lag_class_edges(10.0, 3, 4.0)
    np.testing.assert_allclose(e, [[0.0, 14.0], [16.0, 24.0], [26.0, 34.0]])
    e = lag_class_edges(0.1, 4)
    assert np.all(e[1:, 0] == e[:-1, 1])  # exactly equal: no rounding gap between classes
    with pytest.raises(ConfigError, match="at most half the lag"):
        lag_class_edges(10.0, 3, 6.0)


def test_chunked_enumeration_used_for_thinning_finds_every_pair_once(monkeypatch):
    # The thinning path enumerates pairs chunk by chunk; with nothing thinned and
    # tiny chunks it must still give every pair exactly once (brute-force reference).
    from scipy.spatial import cKDTree

    import pointsift.methods.pairsearch as pairsearch

    monkeypatch.setattr(pairsearch, "_CHUNK_PAIRS", 50)
    xy = lattice_with_duplicates()
    pts = xy[np.isfinite(xy).all(axis=1)]
    tree = cKDTree(pts)
    a, b = pairsearch._thinned_pairs(pts, tree, 15.0 * (1 + 1e-9), 15.0, 1000, 1.0, np.random.default_rng(0))
    got = sorted(zip(a.tolist(), b.tolist()))
    assert len(got) == len(set(got))
    assert got == sorted(map(tuple, brute_pairs_count(pts, 15.0)))


def test_pairs_in_reach_of_a_large_set_is_exact_when_within_budget():
    # above 20,000 points the count is first estimated from a sample; far below the
    # budget the search itself counts the pairs (reference: scipy's count_neighbors)
    from scipy.spatial import cKDTree

    rng = np.random.default_rng(17)
    xy = rng.uniform(0, 10_000, (25_000, 2))
    got = find_pairs(xy, 40.0)
    tree = cKDTree(xy)
    assert got.pairs_in_reach == (tree.count_neighbors(tree, 40.0) - 25_000) // 2 == got.size
    assert not got.record["pairs_in_reach_estimated"] and not got.sampled
