"""Local Moran's I, Getis-Ord Gi* and Benjamini-Hochberg against esda and statsmodels.

esda runs in a child process with numba's JIT disabled (NUMBA_DISABLE_JIT=1):
its compiled permutation kernel costs 25-60 s to compile in every fresh
process (LIBRARY-NOTES), while the same code interpreted takes well under a
second on these small datasets. One child computes everything, once per module.
"""

import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from pointsift.graph import NeighbourGraph, build_graph, canonical_rank
from pointsift.methods import autocorr
from pointsift.methods.autocorr import QUADRANT_WORDS, benjamini_hochberg, draw_subsets, local_autocorrelation, point_keys, splitmix64

libpysal = pytest.importorskip("libpysal")

ESDA_CHILD = textwrap.dedent(
    """
    import json, sys, warnings
    warnings.simplefilter("ignore")
    import numpy as np
    import esda, esda.crand, libpysal
    # interpreted mode: numba's `boolean` type is not a numpy dtype, numpy's is
    esda.crand.boolean = np.bool_
    job = json.load(open(sys.argv[1]))
    y = np.asarray(job["y"], dtype=float)
    neighbours = {i: list(map(int, nb)) for i, nb in enumerate(job["neighbours"])}
    w = libpysal.weights.W(neighbours, silence_warnings=True)
    w.transform = "r"
    lm = esda.Moran_Local(y, w, transformation="r", permutations=999, seed=7, n_jobs=1)
    wb = libpysal.weights.W(neighbours, silence_warnings=True)
    wb.transform = "b"
    gs = esda.G_Local(y, wb, transform="B", star=True, permutations=999, seed=7, n_jobs=1)
    json.dump({"Is": lm.Is.tolist(), "q": lm.q.tolist(), "p_sim": lm.p_sim.tolist(),
               "Zs": gs.Zs.tolist(), "g_p_sim": gs.p_sim.tolist(),
               "esda": esda.__version__}, open(sys.argv[2], "w"))
    """
)


@pytest.fixture(scope="module")
def baltimore(tmp_path_factory):
    """libpysal's bundled Baltimore house-price points (211 sales, X/Y columns),
    a pointsift 8-nearest graph, our statistics, and esda's on the same neighbours."""
    import pyogrio

    frame = pyogrio.read_dataframe(libpysal.examples.get_path("baltim.shp"))
    xy = frame[["X", "Y"]].to_numpy(dtype=float)
    y = frame["PRICE"].to_numpy(dtype=float)
    graph = build_graph(xy, kind="knn", k=8)
    neighbours = [list(map(int, row[row >= 0])) for row in graph.indices]
    folder = tmp_path_factory.mktemp("esda")
    job, out = folder / "job.json", folder / "out.json"
    job.write_text(json.dumps({"y": y.tolist(), "neighbours": neighbours}))
    env = {**os.environ, "NUMBA_DISABLE_JIT": "1"}
    done = subprocess.run([sys.executable, "-c", ESDA_CHILD, str(job), str(out)], env=env, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    ref = json.loads(out.read_text())
    ours = local_autocorrelation(y, graph, permutations=999, seed=7, refine=False)
    return {"y": y, "graph": graph, "ours": ours, "esda": ref}


def test_local_moran_i_and_quadrants_equal_esda(baltimore):
    ours, ref = baltimore["ours"], baltimore["esda"]
    # Reference: esda.Moran_Local (row-standardized W from the same neighbour lists).
    np.testing.assert_allclose(ours.moran_i, ref["Is"], rtol=1e-10, atol=1e-12)
    np.testing.assert_array_equal(ours.quadrant, ref["q"])


def test_gi_star_z_equals_esda(baltimore):
    # Reference: esda.G_Local(star=True, transform="B") on the same neighbours.
    np.testing.assert_allclose(baltimore["ours"].gi_star_z, baltimore["esda"]["Zs"], rtol=1e-10, atol=1e-12)


def test_permutation_p_values_agree_loosely_with_esda(baltimore):
    ours, ref = baltimore["ours"], baltimore["esda"]
    p_ours = ours.p_value
    p_esda = np.asarray(ref["p_sim"])
    # Reference: esda's folded one-sided conditional-permutation p_sim (999 draws).
    # Different random draws: agree within Monte Carlo error, not exactly
    # (LIBRARY-NOTES: esda's p-values change between versions for one seed).
    assert stats.pearsonr(p_ours, p_esda)[0] > 0.95
    assert np.abs(p_ours - p_esda).max() < 0.06
    assert np.abs(p_ours - p_esda).mean() < 0.015
    # one set of draws per point serves both statistics: esda's Gi* p-values agree too
    assert stats.pearsonr(p_ours, ref["g_p_sim"])[0] > 0.95
    assert p_ours.min() >= 1 / 1000  # no refinement asked: esda's floor 1 / (P + 1)


def test_desmith_quadrants_printed_in_esda_documentation():
    # Reference: esda.moran.Moran_Local docstring (esda 2.9.0 source): desmith.gal /
    # desmith.txt "z" gives lm.q == [4, 4, 4, 2, 3, 3, 1, 4, 3, 3].
    w = libpysal.io.open(libpysal.examples.get_path("desmith.gal")).read()
    y = np.array(libpysal.io.open(libpysal.examples.get_path("desmith.txt")).by_col["z"], dtype=float)
    ids = list(w.neighbors)
    width = max(len(v) for v in w.neighbors.values())
    indices = np.full((len(ids), width), -1, dtype=np.int64)
    for row, key in enumerate(ids):
        nb = [ids.index(k) for k in w.neighbors[key]]
        indices[row, : len(nb)] = nb
    graph = NeighbourGraph(indices, np.where(indices >= 0, 1.0, np.inf), "knn", np.inf)
    r = local_autocorrelation(y, graph, permutations=99, seed=10)
    assert r.quadrant.tolist() == [4, 4, 4, 2, 3, 3, 1, 4, 3, 3]
    assert [QUADRANT_WORDS[q] for q in r.quadrant[[3, 6]]] == ["low among high", "high among high"]


def test_gi_star_values_printed_in_esda_documentation():
    # Reference: esda.getisord.G_Local docstring (esda 2.9.0 source): six points,
    # DistanceBand(threshold=15), y = [2, 3, 3.2, 5, 8, 7], G_Local(transform="B", star=True).Zs
    points = np.array([(10, 10), (20, 10), (40, 10), (15, 20), (30, 20), (30, 30)], dtype=float)
    graph = build_graph(points, kind="band", within=15.0)
    r = local_autocorrelation(np.array([2, 3, 3.2, 5, 8, 7.0]), graph, permutations=99, seed=1)
    np.testing.assert_allclose(
        r.gi_star_z, [-1.39727626, -0.28917762, 0.65064964, -0.28917762, 1.23452088, 2.02424331], atol=5e-9
    )


# --- Benjamini-Hochberg ------------------------------------------------------------------


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_benjamini_hochberg_equals_statsmodels(seed):
    rng = np.random.default_rng(seed)
    p = np.concatenate([rng.uniform(0, 1, 300), rng.uniform(0, 0.002, 20), [0.01, 0.01, 0.01]])  # with ties
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh").
    reject, adjusted, _, _ = multipletests(p, alpha=0.05, method="fdr_bh")
    np.testing.assert_allclose(benjamini_hochberg(p), adjusted, rtol=1e-12)
    assert ((benjamini_hochberg(p) <= 0.05) == reject).all()


def test_benjamini_hochberg_ignores_nan():
    rng = np.random.default_rng(3)
    p = rng.uniform(0, 0.1, 50)
    p[[4, 20, 33]] = np.nan
    ours = benjamini_hochberg(p)
    # LIBRARY-NOTES: multipletests returns all NaN when one p is NaN; ours leaves the
    # NaN out of the count. Reference: multipletests on the finite subset.
    assert np.isnan(multipletests(p, method="fdr_bh")[1]).all()
    finite = np.isfinite(p)
    np.testing.assert_allclose(ours[finite], multipletests(p[finite], method="fdr_bh")[1], rtol=1e-12)
    assert np.isnan(ours[~finite]).all()


# --- the permutation kernel ---------------------------------------------------------------


def _field(n, seed, cluster=True):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 10_000, (n, 2))
    values = rng.normal(0, 1, n)
    if cluster:
        values += 3.0 * np.exp(-((xy[:, 0] - 3000) ** 2 + (xy[:, 1] - 7000) ** 2) / (2 * 800**2))
    return xy, values


def _brute_conditional_p(values, graph, rows, permutations, rng):
    """Reference: conditional permutation done plainly, point by point (Anselin 1995):
    the point keeps its value, its k neighbours are drawn without replacement from
    the other n - 1 values; folded one-sided p = (min(#>=, #<=) + 1) / (P + 1)."""
    z = (values - values.mean()) / values.std()
    out = []
    for i in rows:
        nb = graph.indices[i][graph.indices[i] >= 0]
        observed = z[nb].sum()
        others = np.delete(z, i)
        sums = np.array([rng.choice(others, nb.size, replace=False).sum() for _ in range(permutations)])
        out.append((min((sums >= observed).sum(), (sums <= observed).sum()) + 1) / (permutations + 1))
    return np.array(out)


def test_per_point_draws_agree_with_plain_conditional_permutation():
    xy, values = _field(400, 4)
    graph = build_graph(xy, k=8)
    ours = local_autocorrelation(values, graph, permutations=999, seed=5, refine=False, keys=point_keys(xy, values))
    rows = np.arange(0, 400, 5)
    ref = _brute_conditional_p(values, graph, rows, 999, np.random.default_rng(6))
    assert stats.pearsonr(ours.p_value[rows], ref)[0] > 0.97
    # two independent 999-draw estimates differ with sd <= sqrt(2 * 0.25 / 1000) = 0.022:
    # the largest of 80 differences stays within 4 sd, their mean within 0.015
    assert np.abs(ours.p_value[rows] - ref).max() < 0.09
    assert np.abs(ours.p_value[rows] - ref).mean() < 0.015
    # each point draws exactly P subsets of the other n - 1 values
    assert (ours.permutations == 999).all()


def test_distance_band_with_many_neighbour_counts_agrees_with_plain_permutation():
    # a distance band gives every point its own neighbour count (above and below
    # the switch from Floyd's algorithm to a partial Fisher-Yates shuffle)
    xy, values = _field(500, 11)
    graph = build_graph(xy, kind="band", within=1300.0)
    counts = graph.counts
    assert np.unique(counts).size > 10
    assert counts.min() < autocorr._FLOYD_MAX_K <= counts.max()
    ours = local_autocorrelation(values, graph, permutations=999, seed=12)
    rows = np.flatnonzero(counts > 0)[::6]
    ref = _brute_conditional_p(values, graph, rows, 999, np.random.default_rng(13))
    # Reference: the plain point-by-point conditional permutation above.
    assert stats.pearsonr(ours.p_value[rows], ref)[0] > 0.97
    assert (ours.permutations[rows][ours.p_value[rows] > 0.01] <= 999).all()  # extra draws only at the floor


def test_no_association_gives_no_discoveries():
    xy, values = _field(1500, 7, cluster=False)
    r = local_autocorrelation(values, build_graph(xy, k=8), permutations=999, seed=8, refine=True)
    # Folded one-sided p: under no association P(p <= 0.025) is about 0.05
    # (2p is about uniform); each point has its own draws, so the share over
    # 1,500 points is about binomial (sd 0.006).
    share = np.mean(r.p_value <= 0.025)
    assert 0.03 < share < 0.075
    assert (r.p_adjusted > 0.05).all()  # Benjamini-Hochberg finds nothing in noise


def test_refinement_below_the_floor_lets_benjamini_hochberg_reject():
    # issue 2: with 999 permutations the floor is 0.001; over > 1000 points BH needs more
    xy, values = _field(1200, 9)
    graph = build_graph(xy, k=8)
    plain = local_autocorrelation(values, graph, permutations=999, seed=1, refine=False)
    refined = local_autocorrelation(values, graph, permutations=999, seed=1, refine=True)
    assert plain.p_value.min() >= 1 / 1000
    floor = plain.p_value <= 1 / 950
    assert floor.sum() >= 5
    assert (refined.permutations[floor] > 99_000 - 200).all()
    assert refined.p_value.min() < 1e-4
    significant = refined.p_adjusted <= 0.05
    assert significant.sum() >= 5
    near_cluster = np.hypot(xy[:, 0] - 3000, xy[:, 1] - 7000) < 1600
    assert near_cluster[significant].mean() > 0.8  # the rejections are mostly the real cluster
    assert np.mean(refined.quadrant[significant & near_cluster] == 1) > 0.75  # mostly high among high


def test_seeded_draws_repeat_and_nan_rows_are_left_out():
    xy, values = _field(300, 10)
    values[[5, 6]] = np.nan
    graph = build_graph(xy, k=6)
    a = local_autocorrelation(values, graph, permutations=199, seed=3)
    b = local_autocorrelation(values, graph, permutations=199, seed=3)
    c = local_autocorrelation(values, graph, permutations=199, seed=4)
    np.testing.assert_array_equal(a.p_value, b.p_value)
    assert not np.array_equal(a.p_value, c.p_value)
    assert np.isnan(a.moran_i[[5, 6]]).all() and (a.quadrant[[5, 6]] == 0).all()
    assert np.isfinite(a.moran_i[np.isfinite(values)]).all()


# --- exact k-subsets, per-point streams -------------------------------------------------------


def test_splitmix64_reference_outputs():
    # Reference (from memory): SplitMix64 (Steele, Lea and Flood 2014) started at 0
    # gives 0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F (the values
    # Java's SplittableRandom(0).nextLong() and the xoshiro authors' seeding code print).
    assert [int(v) for v in splitmix64(np.uint64(0), 3)] == [0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F]


@pytest.mark.parametrize("k, population", [(3, 7), (5, 6), (24, 27), (26, 27)])
def test_every_k_subset_is_equally_likely(k, population):
    # both samplers (Floyd below _FLOYD_MAX_K = 24, partial Fisher-Yates from 24 on),
    # k up to population - 1; every draw holds k distinct rows
    draws = draw_subsets(np.uint64(12345), 60_000, k, population)
    assert all(len(set(row)) == k for row in draws[:2000])
    assert draws.min() >= 0 and draws.max() < population
    _, counts = np.unique(np.sort(draws, axis=1), axis=0, return_counts=True)
    from math import comb

    assert counts.size == comb(population, k)  # every subset occurs
    # Reference: scipy.stats.chisquare against equal frequencies for all C(population, k) subsets
    assert stats.chisquare(counts).pvalue > 1e-3
    # and each row appears in a share k / population of the draws
    per_row = np.bincount(draws.ravel(), minlength=population) / draws.shape[0]
    np.testing.assert_allclose(per_row, k / population, atol=0.01)


@pytest.mark.parametrize("k", [1, 2, 23, 24, 30, 38, 39])
def test_neighbour_counts_up_to_n_minus_1(k):
    # issue 10 item 2: k-subsets were drawn by a rejection sampler that gave up
    # ("could not draw distinct neighbour sets") when k^2 / 2n was large
    n = 40
    xy, values = _field(n, 21)
    graph = build_graph(xy, k=k)
    r = local_autocorrelation(values, graph, permutations=199, seed=2, keys=point_keys(xy, values))
    assert np.isfinite(r.p_value).all() and (r.p_value > 0).all() and (r.p_value <= 1).all()
    if k == n - 1:
        # every other point is a neighbour: each draw is the whole population, so
        # every permuted sum equals the observed one and p = (P + 1) / (P + 1)
        np.testing.assert_array_equal(r.p_value, 1.0)


def test_shuffled_rows_give_each_point_the_same_p_value():
    # issue 13: draws come from a stream keyed by the seed and the point, indexing
    # the values in sorted order, so the row order cannot change a p-value
    xy, values = _field(900, 14)
    values = np.round(values, 2)  # ties among values, as real levels have
    xy[450:470] = xy[:20]  # coincident records (different values)
    # ties at the k-th distance (the coincident records) broken by position and value
    graph = build_graph(xy, k=8, tie_rank=canonical_rank(xy, values))
    base = local_autocorrelation(values, graph, permutations=999, seed=3, keys=point_keys(xy, values))
    order = np.random.default_rng(1).permutation(900)
    graph_shuffled = build_graph(xy[order], k=8, tie_rank=canonical_rank(xy[order], values[order]))
    assert all(set(order[a[a >= 0]]) == set(b[b >= 0]) for a, b in zip(graph_shuffled.indices, graph.indices[order]))
    shuffled = local_autocorrelation(values[order], graph_shuffled, permutations=999, seed=3,
                                     keys=point_keys(xy[order], values[order]))
    np.testing.assert_array_equal(shuffled.p_value, base.p_value[order])
    np.testing.assert_array_equal(shuffled.permutations, base.permutations[order])
    np.testing.assert_allclose(shuffled.moran_i, base.moran_i[order], rtol=1e-12)
    np.testing.assert_array_equal(shuffled.quadrant, base.quadrant[order])
    assert (base.permutations > 999).any()  # the refined draws are covered too


def test_threads_do_not_change_any_p_value(monkeypatch):
    xy, values = _field(700, 15)
    graph = build_graph(xy, k=8)
    keys = point_keys(xy, values)
    results = []
    for threads in (1, 2, 3):
        monkeypatch.setattr(autocorr, "_threads", lambda t=threads: t)
        results.append(local_autocorrelation(values, graph, permutations=499, seed=4, keys=keys).p_value)
    np.testing.assert_array_equal(results[0], results[1])
    np.testing.assert_array_equal(results[0], results[2])


def test_a_point_in_a_subset_of_the_layer_keeps_its_draws():
    # the stream is the point's own: screening another set of points that has the
    # same values (a partition with its halo, rows in another order) repeats it
    xy, values = _field(500, 16)
    graph = build_graph(xy, k=6)
    keys = point_keys(xy, values)
    full = local_autocorrelation(values, graph, permutations=299, seed=9, keys=keys)
    # only points 0-49 are judged (the others keep their values but lose their
    # neighbours): the judged points' p-values stay the same, bit for bit
    indices = graph.indices.copy()
    indices[50:] = -1
    part = local_autocorrelation(values, type(graph)(indices, graph.distances, graph.kind, graph.max_distance),
                                 permutations=299, seed=9, keys=keys)
    np.testing.assert_array_equal(part.p_value[:50], full.p_value[:50])
