"""Neighbour graph against brute-force distance matrices (scipy.spatial.distance.cdist)."""

import numpy as np
import pytest
from scipy.sparse.csgraph import connected_components
from scipy.spatial.distance import cdist

from pointsift.graph import BAND_CAP, NeighbourGraph, build_graph, canonical_rank, coincident_groups


def brute_neighbours(xy, *, k=None, within=None, max_distance=np.inf, groups=None, usable=None):
    """Reference: full cdist matrix, every other usable point ordered by (distance, row)."""
    n = len(xy)
    d = cdist(xy, xy)
    usable = np.ones(n, bool) if usable is None else usable
    groups = np.full(n, -1) if groups is None else groups
    limit = max_distance if within is None else min(max_distance, within)
    width = k if k is not None else BAND_CAP
    out = []
    for i in range(n):
        if not usable[i]:
            out.append([])
            continue
        others = [j for j in range(n) if j != i and usable[j] and not (groups[i] >= 0 and groups[j] == groups[i]) and d[i, j] <= limit]
        others.sort(key=lambda j: (d[i, j], j))
        out.append(others[:width])
    return out


def as_lists(graph: NeighbourGraph):
    return [list(row[row >= 0]) for row in graph.indices]


@pytest.fixture
def grid_with_ties():
    # integer lattice: every point has up to 8 neighbours at exactly equal distances,
    # more than the k-d tree query margin, so ties at the cut must be re-resolved
    gx, gy = np.meshgrid(np.arange(15.0), np.arange(13.0))
    return np.column_stack([gx.ravel(), gy.ravel()]) * 100.0


@pytest.mark.parametrize("k", [3, 5, 8, 10, 13, 21])
def test_knn_equals_brute_force_with_ties_broken_by_row(grid_with_ties, k):
    g = build_graph(grid_with_ties, kind="knn", k=k)
    # Reference: scipy.spatial.distance.cdist, sorted by (distance, row number).
    assert as_lists(g) == brute_neighbours(grid_with_ties, k=k)
    expected_d = np.sort(cdist(grid_with_ties, grid_with_ties) + np.diag(np.full(len(grid_with_ties), np.inf)), axis=1)[:, :k]
    np.testing.assert_allclose(g.distances, expected_d, rtol=1e-12)


@pytest.mark.parametrize("within", [100.0, 250.0, 1500.0])
def test_band_on_lattice_with_ties_equals_brute_force(grid_with_ties, within):
    # Reference: cdist band, ordered by (distance, row), capped at BAND_CAP nearest.
    g = build_graph(grid_with_ties, kind="band", within=within)
    assert as_lists(g) == brute_neighbours(grid_with_ties, within=within)


def test_knn_random_points_equal_brute_force():
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 3000, (300, 2))
    g = build_graph(xy, kind="knn", k=7)
    assert as_lists(g) == brute_neighbours(xy, k=7)
    assert (g.counts == 7).all()


def test_self_is_never_a_neighbour_even_with_exact_duplicates():
    # LIBRARY-NOTES: with duplicates a k-d tree may return the twin before the
    # point itself; self must be dropped by row id, not "the first neighbour".
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 1000, (60, 2))
    xy[10] = xy[11] = xy[12] = xy[3]
    g = build_graph(xy, kind="knn", k=5)
    rows = np.arange(len(xy))[:, None]
    assert not (g.indices == rows).any()
    assert as_lists(g) == brute_neighbours(xy, k=5)
    # without coincident labels the duplicates are each other's nearest, at distance 0
    assert list(g.indices[3, :3]) == [10, 11, 12]
    assert (g.distances[3, :3] == 0).all()


def test_coincident_groups_equal_connected_components_of_brute_pairs():
    rng = np.random.default_rng(6)
    xy = rng.uniform(0, 500, (120, 2))
    xy[20] = xy[5] + [0.3, 0.0]
    xy[21] = xy[20] + [0.0, 0.4]  # chained: 5 - 20 - 21 within 0.5 m pairwise steps
    xy[40] = xy[30]
    labels = coincident_groups(xy, 0.5)
    # Reference: brute-force pairs (cdist <= tol) and scipy connected components.
    close = cdist(xy, xy) <= 0.5
    _, comp = connected_components(close, directed=False)
    size = np.bincount(comp)[comp]
    assert ((labels >= 0) == (size > 1)).all()
    for a in range(len(xy)):
        for b in range(len(xy)):
            if labels[a] >= 0 and labels[b] >= 0:
                assert (labels[a] == labels[b]) == (comp[a] == comp[b])
    assert labels[5] == labels[20] == labels[21] >= 0 and labels[30] == labels[40] >= 0
    # labels numbered 0.. in order of first row (deterministic)
    firsts = [np.flatnonzero(labels == g)[0] for g in range(labels.max() + 1)]
    assert firsts == sorted(firsts)


def test_twins_are_never_neighbours_and_graph_stays_full():
    rng = np.random.default_rng(7)
    xy = rng.uniform(0, 2000, (100, 2))
    xy[50] = xy[49]
    xy[51] = xy[49] + [0.2, 0.2]
    groups = coincident_groups(xy, 0.5)
    g = build_graph(xy, kind="knn", k=6, coincident=groups)
    assert as_lists(g) == brute_neighbours(xy, k=6, groups=groups)
    for i in (49, 50, 51):
        assert not set(g.indices[i]) & {49, 50, 51}
        assert g.counts[i] == 6  # the graph is not broken: each twin still has k others


@pytest.mark.parametrize("within", [150.0, 400.0])
def test_band_equals_brute_force(within):
    rng = np.random.default_rng(8)
    xy = rng.uniform(0, 3000, (250, 2))
    g = build_graph(xy, kind="band", within=within)
    assert as_lists(g) == brute_neighbours(xy, within=within)
    assert g.kind == "band" and g.max_distance == within


def test_band_keeps_at_most_the_cap_nearest():
    rng = np.random.default_rng(9)
    xy = rng.uniform(0, 100, (200, 2))  # every point within 150 m of every other
    g = build_graph(xy, kind="band", within=150.0)
    assert (g.counts == BAND_CAP).all()
    assert as_lists(g) == brute_neighbours(xy, within=150.0)


def test_max_distance_trims_and_isolates():
    rng = np.random.default_rng(10)
    xy = np.vstack([rng.uniform(0, 1000, (80, 2)), [[9000.0, 9000.0]]])
    g = build_graph(xy, kind="knn", k=8, max_distance=300.0)
    assert as_lists(g) == brute_neighbours(xy, k=8, max_distance=300.0)
    assert g.counts[-1] == 0 and np.isinf(g.distances[-1]).all()
    assert (g.distances[g.mask] <= 300.0).all()
    assert g.max_distance == 300.0


def test_unusable_points_are_nobodys_neighbour():
    rng = np.random.default_rng(11)
    xy = rng.uniform(0, 1000, (50, 2))
    usable = np.ones(50, bool)
    usable[[4, 9]] = False
    xy[17] = np.nan
    g = build_graph(xy, kind="knn", k=5, usable=usable)
    usable_all = usable & np.isfinite(xy).all(axis=1)
    assert as_lists(g) == brute_neighbours(np.nan_to_num(xy, nan=1e12), k=5, usable=usable_all)
    assert g.counts[[4, 9, 17]].tolist() == [0, 0, 0]
    assert not np.isin(g.indices, [4, 9, 17]).any()


def test_restrict_moves_dropped_slots_to_the_end():
    rng = np.random.default_rng(12)
    xy = rng.uniform(0, 1000, (40, 2))
    g = build_graph(xy, kind="knn", k=6)
    keep = np.ones(40, bool)
    keep[g.indices[0, 0]] = False
    r = g.restrict(keep)
    assert list(r.indices[0, :5]) == list(g.indices[0, 1:])
    assert r.indices[0, 5] == -1 and np.isinf(r.distances[0, 5])
    assert not np.isin(r.indices, np.flatnonzero(~keep)).any()


def test_sparse_and_libpysal_views_hold_the_same_neighbours():
    rng = np.random.default_rng(13)
    xy = rng.uniform(0, 1000, (30, 2))
    g = build_graph(xy, kind="knn", k=4)
    a = g.to_sparse()
    assert a.sum() == 30 * 4
    for i in range(30):
        assert sorted(a[[i], :].indices) == sorted(g.indices[i])
    # Reference: libpysal.graph.Graph built from the adjacency keeps each point's neighbour set.
    lp = g.to_libpysal()
    for i in range(30):
        assert sorted(np.asarray(lp[i].index)) == sorted(g.indices[i])


def test_canonical_ties_give_the_same_neighbours_in_any_row_order():
    # coincident records (not labelled as twins here) sit at equal distance from
    # their neighbours; by row number the k-th neighbour depends on the row order,
    # by canonical_rank (x, y, value) it does not. Reference: brute-force distances.
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 1000, (300, 2))
    xy[150:200] = xy[:50]
    values = rng.normal(size=300)
    order = rng.permutation(300)
    a = build_graph(xy, k=7, tie_rank=canonical_rank(xy, values))
    b = build_graph(xy[order], k=7, tie_rank=canonical_rank(xy[order], values[order]))
    for row in range(300):
        assert set(order[b.indices[row]]) == set(a.indices[order[row]])
    d = cdist(xy, xy)
    np.fill_diagonal(d, np.inf)
    np.testing.assert_allclose(a.distances, np.sort(d, axis=1)[:, :7])
    # the plain row-number tie-break does change some neighbour sets here
    plain_a, plain_b = build_graph(xy, k=7), build_graph(xy[order], k=7)
    assert any(set(order[plain_b.indices[r]]) != set(plain_a.indices[order[r]]) for r in range(300))
