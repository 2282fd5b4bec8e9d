"""Robust local residuals: scale pieces against scipy, behaviour on invented fields.

The fields are made up in code: a regional plane (the general gradient of a
water table), normal noise, planted gross errors and Gaussian-shaped pumping
cones (wells low together).
"""

import numpy as np
import pytest
from scipy import stats
from scipy.optimize import isotonic_regression

from pointsift.graph import build_graph
from pointsift.methods.local import distance_scale, local_residuals, neighbour_echo, robust_plane_predict


def plane_field(n=2000, seed=0, extent=10_000.0, noise=0.1):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, extent, (n, 2))
    values = 100.0 + 0.002 * xy[:, 0] - 0.001 * xy[:, 1] + rng.normal(0, noise, n)
    return xy, values


def cone_field(sd, seed, depth=6.0, spacing=250.0, extent=6000.0):
    """Jittered grid of wells with a Gaussian cone of drawdown at the centre."""
    rng = np.random.default_rng(seed)
    gx, gy = np.meshgrid(np.arange(0, extent, spacing), np.arange(0, extent, spacing))
    xy = np.column_stack([gx.ravel(), gy.ravel()]) + rng.uniform(-60, 60, (gx.size, 2))
    centre = extent / 2
    dist = np.hypot(xy[:, 0] - centre, xy[:, 1] - centre)
    values = 100 + 0.002 * xy[:, 0] + 0.001 * xy[:, 1] + rng.normal(0, 0.1, len(xy)) - depth * np.exp(-(dist**2) / (2 * sd**2))
    return xy, values, dist < 1.5 * sd


# --- pieces against reference libraries ---------------------------------------------------


def test_distance_scale_bins_are_scipy_normal_mad():
    rng = np.random.default_rng(1)
    distance = rng.uniform(100, 5000, 400)
    innovation = rng.normal(0, 1, 400) * (0.5 + distance / 2000)  # spread grows with distance
    knots, scale = distance_scale(distance, innovation, min_per_bin=40, max_bins=16)
    order = np.argsort(np.log(distance), kind="stable")
    groups = np.array_split(order, 10)
    # Reference: scipy.stats.median_abs_deviation(scale="normal") of each bin, then a
    # non-decreasing weighted least-squares fit (scipy.optimize.isotonic_regression).
    raw = np.array([stats.median_abs_deviation(innovation[g], scale="normal") for g in groups])
    expected = isotonic_regression(raw, weights=np.array([g.size for g in groups], float), increasing=True).x
    np.testing.assert_allclose(scale, expected, rtol=1e-4)  # 1.482602 vs scipy's 1/Phi^-1(3/4)
    np.testing.assert_allclose(knots, [np.median(np.log(distance[g])) for g in groups], rtol=1e-12)
    assert np.all(np.diff(scale) >= 0)


def test_distance_scale_single_bin_is_the_normal_mad():
    rng = np.random.default_rng(2)
    e = rng.standard_t(3, 50)
    d = rng.uniform(10, 20, 50)
    _, scale = distance_scale(d, e)
    # Reference: scipy MAD with scale="normal" (1.4826 x MAD, common practice).
    assert scale[0] == pytest.approx(stats.median_abs_deviation(e, scale="normal"), rel=1e-4)
    # and a robust sd of normal data by the IQR agrees loosely (Reference: scipy.stats.iqr / 1.349)
    normal = rng.normal(0, 2.0, 4000)
    _, s = distance_scale(np.full(4000, 100.0), normal, min_per_bin=5000)
    assert s[0] == pytest.approx(stats.iqr(normal) / 1.349, rel=0.05)


def test_exact_plane_is_predicted_exactly():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 3000, (300, 2))
    plane = 50.0 + 0.01 * xy[:, 0] + 0.02 * xy[:, 1]
    values = plane + rng.normal(0, 0.001, 300)
    fit = robust_plane_predict(xy, values, build_graph(xy, k=10))
    # Reference: the plane itself (a local plane through plane data is exact up to the noise).
    np.testing.assert_allclose(fit.expected, plane, atol=0.01)


def test_gross_neighbour_does_not_move_the_local_planes():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 3000, (300, 2))
    values = 50.0 + 0.002 * xy[:, 0] + 0.001 * xy[:, 1] + rng.normal(0, 0.1, 300)
    graph = build_graph(xy, k=10)
    clean = robust_plane_predict(xy, values, graph)
    bad = values.copy()
    bad[17] += 100.0  # gross error: the bisquare weights of its neighbours' planes drop it
    fit = robust_plane_predict(xy, bad, graph)
    around = np.flatnonzero((graph.indices == 17).any(axis=1))
    assert around.size >= 5
    np.testing.assert_allclose(fit.expected[around], clean.expected[around], atol=0.05)
    assert (fit.count == 10).all()


def test_neighbour_echo_matches_a_plain_loop():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 1000, (80, 2))
    graph = build_graph(xy, k=6)
    z = rng.normal(0, 2, 80)
    z[5] = np.nan
    echo = neighbour_echo(z, graph, 2.0)
    for i in range(80):
        nb = [j for j in graph.indices[i] if j >= 0 and np.isfinite(z[j])]
        same = sum(1 for j in nb if np.sign(z[j]) == np.sign(z[i]) and abs(z[j]) >= 2.0)
        assert echo[i] == pytest.approx(same / len(nb))


# --- behaviour on invented fields ---------------------------------------------------------


@pytest.mark.parametrize("seed", [0, 1])
def test_plane_with_noise_has_calibrated_z(seed):
    xy, values = plane_field(seed=seed)
    r = local_residuals(xy, values, build_graph(xy, k=10))
    z = r.z[np.isfinite(r.z)]
    assert z.size == 2000
    # Reference: standard normal tail, P(|Z| > 3.5) = 4.7e-4 (scipy.stats.norm.sf);
    # the issue asks for well under 1 % of clean points beyond 3.5.
    assert 2 * stats.norm.sf(3.5) < 0.001
    assert np.mean(np.abs(z) > 3.5) < 0.01
    # the scale is calibrated: robust sd of z near 1 (scipy normal MAD)
    assert 0.8 < stats.median_abs_deviation(z, scale="normal") < 1.25
    # the regional gradient (2 m/km) is not an anomaly: residuals centre on 0
    assert abs(np.median(r.residual)) < 0.02


def test_gross_error_is_found_and_does_not_corrupt_its_neighbours():
    xy, values = plane_field(seed=3)
    graph = build_graph(xy, k=10)
    clean = local_residuals(xy, values, graph)
    bad = values.copy()
    bad[100] += 25.0  # a decimal slip sized error on a 0.1 m noise field
    r = local_residuals(xy, bad, graph)
    assert r.z[100] > 50 and r.excluded[100]
    # the wells that had it as a neighbour keep the z they had without it
    around = np.flatnonzero((graph.indices == 100).any(axis=1))
    assert around.size >= 5
    np.testing.assert_allclose(r.z[around], clean.z[around], atol=0.35)
    assert np.all(np.abs(r.z[around]) < 3.5)


@pytest.mark.parametrize("seed", [0, 1])
def test_scale_grows_with_distance_to_the_neighbours(seed):
    # a dense town (nearest wells ~50 m apart) and sparse countryside (~700 m) on
    # one surface with small-scale variation (40 random cosines, wavelengths
    # 1.5-6 km): predictions from far neighbours miss by more, so sparse wells must
    # be judged on a wider scale, and both kinds stay calibrated
    rng = np.random.default_rng(seed)
    xy = np.vstack([rng.uniform(4000, 6000, (600, 2)), rng.uniform(0, 30_000, (900, 2))])
    m = 40
    wavelength, angle, phase = rng.uniform(1500, 6000, m), rng.uniform(0, np.pi, m), rng.uniform(0, 2 * np.pi, m)
    kx, ky = 2 * np.pi / wavelength * np.cos(angle), 2 * np.pi / wavelength * np.sin(angle)
    field = np.cos(xy[:, :1] * kx + xy[:, 1:] * ky + phase).sum(axis=1) * np.sqrt(2 / m) * 0.5
    values = 100 + 0.002 * xy[:, 0] + field + rng.normal(0, 0.02, len(xy))
    r = local_residuals(xy, values, build_graph(xy, k=10))
    dense, sparse = r.neighbour_distance < 150, r.neighbour_distance > 1000
    assert dense.sum() > 400 and sparse.sum() > 400
    # the misses really differ (median |residual|), and so does the scale
    assert np.median(np.abs(r.residual[sparse])) > 5 * np.median(np.abs(r.residual[dense]))
    assert np.median(r.scale[sparse]) > 5 * np.median(r.scale[dense])
    # issue 2: a fixed global scale would flag sound sparse wells; this one does not
    for group in (dense, sparse):
        assert np.mean(np.abs(r.z[group]) > 3.5) < 0.01
        # measured: robust sd of z 0.65-0.75 in the town (scale on the wide side), 0.9-0.96 sparse
        assert 0.6 < stats.median_abs_deviation(r.z[group], scale="normal") < 1.4


def test_pumping_cone_wells_are_coherent_not_lone_errors():
    # a cone sampled by ~20 wells (issue 2: a coherent low group is signal, not an
    # error): a member that stands out by 4 robust sd or more is recognised as
    # shared with its neighbours (echoed by them, or predicted by another local surface)
    members = 0
    for seed in range(4):
        xy, values, cone = cone_field(sd=450, seed=seed)
        r = local_residuals(xy, values, build_graph(xy, k=10))
        members += cone.sum()
        assert r.coherent[cone & (np.abs(r.z) >= 4.0)].all()
        assert (r.z[cone & (np.abs(r.z) >= 3.0)] < 0).all()  # the cone is low, never high
    assert members >= 80


@pytest.mark.xfail(
    strict=True,
    reason="a flat-bottomed group of 5 wells 3 m low: the inner members are predicted from the group (z near 0), "
    "so the outer members (z -4 to -5) find no echo among their neighbours (0-0.17) and are not coherent",
)
def test_group_of_wells_low_together_is_not_a_lone_error():
    # five wells of a sparse network all 3 m low (the wells of one pumping
    # station), each with two to four of the others among its neighbours
    lone = []
    for seed in (8, 10):
        rng = np.random.default_rng(seed)
        xy = rng.uniform(0, 8000, (600, 2))
        group = np.argsort(np.hypot(*(xy - xy[0]).T))[:5]
        values = 100 + 0.002 * xy[:, 0] + rng.normal(0, 0.1, 600)
        values[group] -= 3.0
        r = local_residuals(xy, values, build_graph(xy, k=10))
        lone.extend(group[(np.abs(r.z[group]) >= 4.0) & ~r.coherent[group]])
    # issue 2: several wells low together is real signal and must not be called suspect
    assert lone == []


def test_narrow_pumping_cone_is_not_a_lone_error():
    members = suspect_like = 0
    for seed in range(6):
        xy, values, cone = cone_field(sd=250, seed=seed)
        r = local_residuals(xy, values, build_graph(xy, k=10))
        members += cone.sum()
        suspect_like += (cone & (np.abs(r.z) >= 4.0) & ~r.coherent).sum()
    # issue 2 benchmark target: <= 5 % of the pumping-cone wells called suspect
    assert suspect_like <= 0.05 * members


def test_too_few_neighbours_and_nan_values_are_not_predicted():
    rng = np.random.default_rng(6)
    xy = rng.uniform(0, 1000, (50, 2))
    values = rng.normal(10, 1, 50)
    values[[3, 4]] = np.nan
    graph = build_graph(xy, k=5)
    r = local_residuals(xy, values, graph, min_neighbours=5)
    # NaN values are never used as neighbours: rows that had one now have 4 < 5
    had_nan = (np.isin(graph.indices, [3, 4])).any(axis=1)
    assert np.isnan(r.z[had_nan]).all() and np.isnan(r.expected[had_nan]).all()
    assert (r.neighbour_count[had_nan] == 0).all()
    assert np.isfinite(r.z[~had_nan & np.isfinite(values)]).all()


@pytest.mark.parametrize("direction", [(1.0, 0.0), (0.6, 0.8)])
def test_wells_strung_along_a_line_are_screened(direction):
    # wells along a road or a transect: the slope (and curvature) across the line
    # has no information; the fit must stay solvable and still find a spike
    rng = np.random.default_rng(9)
    t = np.sort(rng.uniform(0, 8000, 120))
    xy = np.column_stack([t * direction[0], t * direction[1]]) + [500_000.0, 5_300_000.0]
    values = 100 + 0.002 * t + rng.normal(0, 0.05, 120)
    values[60] += 3.0
    r = local_residuals(xy, values, build_graph(xy, k=10))
    assert np.isfinite(r.z[10:110]).all()
    assert r.z[60] > 10
    assert np.mean(np.abs(np.delete(r.z, 60)) > 3.5) < 0.03


def test_extrapolation_excess_and_one_side():
    from pointsift.graph import build_graph
    from pointsift.methods.local import extrapolation

    # a point at the origin with four neighbours east of it (one side) and one ringed by neighbours
    xy = np.array([[0.0, 0.0], [10.0, -5.0], [10.0, 5.0], [20.0, -5.0], [20.0, 5.0],
                   [100.0, 100.0], [110.0, 100.0], [90.0, 100.0], [100.0, 110.0], [100.0, 90.0]])
    values = np.array([0.0, 10.0, 10.0, 20.0, 20.0, 5.0, 4.0, 6.0, 5.0, 5.0])
    graph = build_graph(xy, k=4)
    # a plane through the east neighbours predicts 0 at the origin: 10 below the lowest (10), range 10,
    # so 10 - 0.25 * 10 = 7.5 beyond the slack
    expected = np.array([0.0, np.nan, np.nan, np.nan, np.nan, 5.0, np.nan, np.nan, np.nan, np.nan])
    excess, one_sided = extrapolation(xy, values, expected, graph)
    assert excess[0] == 7.5 and excess[5] == 0.0
    assert one_sided[0] and not one_sided[5]
