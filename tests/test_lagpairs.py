"""Tests of pointsift.methods.lagpairs: lag/direction classes, robust pair screen (pair search: test_pairsearch.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats
import shapely

from pair_references import brute_pairs, lattice_with_duplicates

from pointsift.errors import ConfigError, InputError
from pointsift.methods.lagpairs import (
    lag_pair_reasons,
    lag_pairs_layer,
    plot_lag_pairs,
    screen_lag_pairs,
)


# --------------------------------------------------------------------------- brute force references

def brute_classes(xy, values, first_lag, lag_count, lag_tol, directions, angle_tol):
    """(direction index, lag index) -> set of (tail, head) by brute force over all pairs."""
    t = first_lag / 2 if lag_tol is None else lag_tol
    reach = lag_count * first_lag + t
    result = {}
    for (tail, head), (d, az) in brute_pairs(xy, reach).items():
        if not (math.isfinite(values[tail]) and math.isfinite(values[head])) or d == 0:
            continue
        for k in range(1, lag_count + 1):
            low = 0.0 if k == 1 else k * first_lag - t
            high = k * first_lag + t
            if low < d <= high:
                for j, direction in enumerate(directions):
                    diff = abs(az - direction) % 180.0
                    diff = min(diff, 180.0 - diff)
                    if diff <= angle_tol:
                        result.setdefault((j, k - 1), set()).add((tail, head))
    return result


# --------------------------------------------------------------------------- classes

@pytest.mark.parametrize("angle_tol", [10.0, 22.5, 45.0, 90.0])
@pytest.mark.parametrize("lag_tol", [None, 2.5])
def test_screen_classes_equal_brute_force(angle_tol, lag_tol):
    xy = lattice_with_duplicates()
    rng = np.random.default_rng(1)
    values = rng.normal(size=len(xy))
    values[3] = np.nan
    screen = screen_lag_pairs(xy, values, first_lag=10.0, pair_lag_count=3, lag_tolerance=lag_tol,
                              angle_tolerance=angle_tol, min_class_pairs=1)
    ref = brute_classes(xy.tolist(), values.tolist(), 10.0, 3, lag_tol, screen.directions, angle_tol)
    for j in range(len(screen.directions)):
        for k in range(3):
            sel = screen.direction_member[:, j] & (screen.lag_index == k)
            got = set(zip(screen.pairs.tail[sel].tolist(), screen.pairs.head[sel].tolist()))
            assert got == ref.get((j, k), set()), (screen.directions[j], k)
            row = screen.classes[(screen.classes["direction"] == f"{screen.directions[j]:g}")
                                 & (screen.classes["lag"] == k + 1)].iloc[0]
            assert row["pairs"] == len(got)


def test_band_scale_is_normal_consistent_mad_of_the_class_differences():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 300, (600, 2))
    values = xy[:, 0] * 0.01 + rng.normal(0, 1, 600)
    screen = screen_lag_pairs(xy, values)
    j = screen.directions.index(90.0)
    sel = screen.direction_member[:, j] & (screen.lag_index == 1)
    diff = values[screen.pairs.head[sel]] - values[screen.pairs.tail[sel]]
    row = screen.classes[(screen.classes["direction"] == "90") & (screen.classes["lag"] == 2)].iloc[0]
    # reference: scipy.stats.median_abs_deviation with scale="normal", and numpy's median
    assert row["band_scale"] == pytest.approx(scipy.stats.median_abs_deviation(diff, scale="normal"), rel=1e-12)
    assert row["band_centre"] == pytest.approx(np.median(diff), rel=1e-12)
    z = (diff - row["band_centre"]) / row["band_scale"]
    assert row["flagged"] == int((np.abs(z) > screen.threshold).sum())


# --------------------------------------------------------------------------- attribution

def smooth_field(xy):
    """A smooth surface (slow sines and a tilt), no noise."""
    return 50 + 0.02 * xy[:, 0] + 2 * np.sin(xy[:, 0] / 180) * np.cos(xy[:, 1] / 240)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_planted_error_is_the_attributed_point_and_its_neighbours_are_not(seed):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, (500, 2))
    values = smooth_field(xy) + rng.normal(0, 0.01, 500)
    centre = np.argmin(np.hypot(xy[:, 0] - 500, xy[:, 1] - 500))
    values[centre] += 3.0  # a wrong value, far beyond the local differences
    ids = np.array([f"W{i:04d}" for i in range(500)])
    screen = screen_lag_pairs(xy, values, ids=ids)
    pts = screen.points
    assert np.flatnonzero(pts["lagpair_culprit"]).tolist() == [centre]
    touching = screen.flagged & ((screen.pairs.tail == centre) | (screen.pairs.head == centre))
    partners = set(screen.pairs.tail[touching]) | set(screen.pairs.head[touching])
    partners.discard(centre)
    assert len(partners) >= 3
    for p in partners:
        assert pts.loc[p, "lagpair_attributed"] == 0
        assert not pts.loc[p, "lagpair_culprit"]
    assert pts.loc[centre, "lagpair_flagged_share"] > 0.5
    assert pts.loc[centre, "lagpair_dominance"] > 0.5
    assert all(pts.loc[p, "lagpair_dominance"] < 0.5 for p in partners)
    table = screen.pair_table()
    touches = (table["tail_id"] == ids[centre]) | (table["head_id"] == ids[centre])
    assert touches.sum() >= 3
    assert (table.loc[touches, "culprit_id"] == ids[centre]).all()
    # a chance pair just past the band elsewhere gets no culprit
    assert (table.loc[~touches, "culprit_id"] == "").all()
    assert (table["pair_z"].abs() > screen.threshold).all()
    assert (table["difference"] == table["head_value"] - table["tail_value"]).all()
    reasons = lag_pair_reasons(screen)
    assert np.flatnonzero(reasons != "").tolist() == [centre]
    flagged_here = pts.loc[centre, "lagpair_flagged"]
    assert reasons[centre].startswith(f"lag pairs: {flagged_here} of its {pts.loc[centre, 'lagpair_pairs']} pairs")


def test_no_culprit_on_a_clean_smooth_field():
    rng = np.random.default_rng(9)
    xy = rng.uniform(0, 1000, (500, 2))
    values = smooth_field(xy) + rng.normal(0, 0.01, 500)
    screen = screen_lag_pairs(xy, values)
    assert not screen.points["lagpair_culprit"].any()


def test_lag_pairs_layer_segments_run_tail_to_head():
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 1000, (300, 2))
    values = smooth_field(xy)
    values[10] += 5.0
    screen = screen_lag_pairs(xy, values)
    layer = lag_pairs_layer(screen, xy, crs="EPSG:3857")
    assert len(layer) == int(screen.flagged.sum()) > 0
    assert layer.crs.to_epsg() == 3857
    assert (layer.geom_type == "LineString").all()
    # shapely's own length is the reference for the separation column
    np.testing.assert_allclose(shapely.length(layer.geometry.values), layer["separation"], rtol=1e-12)
    start = shapely.get_coordinates(layer.geometry.values)[::2]
    np.testing.assert_array_equal(start, xy[layer["tail_row"]])


def test_plot_lag_pairs_marks_the_flagged_pairs():
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 1000, (300, 2))
    values = smooth_field(xy)
    values[10] += 80.0
    screen = screen_lag_pairs(xy, values)
    fig = plot_lag_pairs(screen, 90)
    assert len(fig.axes) == 3
    import matplotlib.colors

    red_rgba = matplotlib.colors.to_rgba("tab:red")

    def is_red(collection):
        colours = collection.get_facecolor()
        return len(colours) and tuple(colours[0]) == red_rgba

    red = sum(len(c.get_offsets()) for ax in fig.axes for c in ax.collections if is_red(c))
    assert red == int(screen.classes.loc[screen.classes["direction"] == "90", "flagged"].sum()) > 0
    # the spike lies beyond the axes of the bulk: drawn as a triangle on the frame, axes kept on the bulk
    ax = fig.axes[0]
    assert ax.get_xlim() == ax.get_ylim()
    assert ax.get_xlim()[1] < values[10]
    with pytest.raises(ConfigError, match="was not screened"):
        plot_lag_pairs(screen, 30)


def test_screen_rejects_bad_options():
    xy = np.zeros((4, 2))
    with pytest.raises(ConfigError, match="angle_tolerance"):
        screen_lag_pairs(xy, np.zeros(4), angle_tolerance=0)
    with pytest.raises(InputError, match="one entry per point"):
        screen_lag_pairs(xy, np.zeros(3))


def test_dominance_equals_a_set_count():
    # Reference: for each point, the flagged pairs with an end in {point} or its partners,
    # counted as a Python set (no algebra); dominance = own flagged pairs / that count.
    rng = np.random.default_rng(13)
    xy = rng.uniform(0, 300, (250, 2))
    values = smooth_field(xy * 3) + rng.standard_t(2, 250) * 0.3  # heavy tails: many flagged pairs
    screen = screen_lag_pairs(xy, values)
    assert screen.flagged.sum() > 20
    screened = np.isfinite(screen.pair_z).any(axis=1)
    partners = {i: set() for i in range(250)}
    for t, h in zip(screen.pairs.tail[screened], screen.pairs.head[screened]):
        partners[t].add(h)
        partners[h].add(t)
    flagged_pairs = list(zip(screen.pairs.tail[screen.flagged], screen.pairs.head[screen.flagged]))
    for p in range(250):
        near = partners[p] | {p}
        around = [e for e in flagged_pairs if e[0] in near or e[1] in near]
        own = [e for e in flagged_pairs if p in e]
        got = screen.points.loc[p, "lagpair_dominance"]
        own_z = np.abs(screen.pair_z[screened & ((screen.pairs.tail == p) | (screen.pairs.head == p))])
        if own_z.size:
            assert screen.points.loc[p, "lagpair_max_z"] == pytest.approx(np.nanmax(own_z))
        if around:
            assert got == pytest.approx(len(own) / len(around))
        else:
            assert math.isnan(got)


def test_distance_scale_divides_differences_before_the_band():
    rng = np.random.default_rng(6)
    xy = rng.uniform(0, 300, (500, 2))
    values = rng.normal(size=500)

    def scale(h):
        return 1.0 + np.asarray(h) / 10.0

    screen = screen_lag_pairs(xy, values, distance_scale=scale)
    j = screen.directions.index(45.0)
    sel = screen.direction_member[:, j] & (screen.lag_index == 0)
    u = (values[screen.pairs.head[sel]] - values[screen.pairs.tail[sel]]) / scale(screen.pairs.distance[sel])
    # reference: numpy median and scipy's normal-consistent MAD of the scaled differences
    centre = np.median(u)
    mad = scipy.stats.median_abs_deviation(u, scale="normal")
    np.testing.assert_allclose(screen.pair_z[sel, j], (u - centre) / mad, rtol=1e-12)
    row = screen.classes[(screen.classes["direction"] == "45") & (screen.classes["lag"] == 1)].iloc[0]
    assert row["median_separation"] == pytest.approx(np.median(screen.pairs.distance[sel]))
    assert screen.record["distance_scale"] == "given"
    with pytest.raises(ConfigError, match="distance_scale"):
        screen_lag_pairs(xy, values, distance_scale="variogram")


def test_empirical_distance_scale_recovers_a_growing_spread():
    from pointsift.methods.lagpairs import _empirical_distance_scale

    rng = np.random.default_rng(2)
    h = rng.uniform(1, 100, 20_000)
    diff = rng.normal(0, 1, h.size) * (0.5 + 0.05 * h)  # known sd 0.5 + 0.05 h
    got = _empirical_distance_scale(h, diff, np.ones(h.size, bool))
    inner = (h > 10) & (h < 90)
    np.testing.assert_allclose(got[inner], 0.5 + 0.05 * h[inner], rtol=0.12)
    assert np.all(np.diff(got[np.argsort(h)]) >= 0)


# --------------------------------------------------------------------------- issue 10 reproductions

def test_ids_are_object_strings_so_memory_does_not_grow_with_the_longest_id():
    # Issue 10, item 5: one very long id made a fixed-width numpy string array of
    # n x (longest id) characters. tracemalloc (standard library) measures the peak.
    import tracemalloc

    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 5000, (400, 2))
    values = 100 + 0.01 * xy[:, 0] + rng.normal(0, 0.2, 400)
    ids = np.array([f"W{i}" for i in range(400)], dtype=object)
    ids[7] = "X" * 100_000  # fixed-width: 400 x 100,000 x 4 bytes = 160 MB
    tracemalloc.start()
    try:
        screen = screen_lag_pairs(xy, values, ids=ids, first_lag=300.0, pair_lag_count=6)
        layer = screen.pair_table(flagged_only=False)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert screen.ids.dtype == object
    assert peak < 40e6, f"peak {peak / 1e6:.0f} MB"
    assert set(layer["tail_id"]) <= set(ids)


def test_lag_tolerance_sources_cite_the_textbook_alone():
    # Issue 10, item 20: the lag and angular tolerances are cited from one
    # textbook (Isaaks and Srivastava 1989), in the module and in docs/methods.md.
    import pathlib
    import re

    import pointsift.methods.lagpairs as module

    bullet = module.__doc__.split("h-scatterplots, lag and angular tolerances", 1)[1].split("\n- ", 1)[0]
    assert re.findall(r"\((1[89]\d\d|20\d\d)\)", bullet) == ["1989"]
    methods = pathlib.Path(__file__).resolve().parents[1] / "docs" / "methods.md"
    section = methods.read_text(encoding="utf-8").split("### Pairs, lag classes and directions", 1)[1].split("* **Search.**", 1)[0]
    cited = re.findall(r"\(([^()]*\d{4}[^()]*)\)", section)
    assert cited and all(re.search(r"(^|; )Isaaks and Srivastava 1989, ch\. \d$", c.replace("\n", " ")) for c in cited), cited


def test_pair_search_and_plot_names_stay_importable_from_lagpairs():
    # The pair search and the figures moved to their own modules; callers that
    # import them from lagpairs keep working (the same objects).
    import pointsift.methods.lagpairs as lagpairs
    import pointsift.methods.lagpairs_plot as lagpairs_plot
    import pointsift.methods.pairsearch as pairsearch

    for name in ("DEFAULT_PAIR_BUDGET", "PairSet", "find_pairs", "axial_difference", "point_spacing",
                 "lag_class_edges"):
        assert getattr(lagpairs, name) is getattr(pairsearch, name)
    assert lagpairs.plot_lag_pairs is lagpairs_plot.plot_lag_pairs
    assert lagpairs.lag_pairs_layer is lagpairs_plot.lag_pairs_layer
    assert set(lagpairs.__all__) <= set(dir(lagpairs))
