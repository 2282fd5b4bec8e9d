"""Hilbert partitions and exact halos, against brute force (scipy.spatial.cKDTree) and the whole-layer graph."""

import numpy as np
import pytest
from scipy.spatial import cKDTree

from pointsift.graph import build_graph, canonical_rank, coincident_groups
from pointsift.partition import halo_rows, hilbert_index, partitioned_graph, spatial_partitions


def clustered(n, seed):
    rng = np.random.default_rng(seed)
    towns = rng.uniform(0, 50_000, (12, 2))
    near = towns[rng.integers(0, 12, n // 2)] + rng.normal(0, 800, (n // 2, 2))
    rural = rng.uniform(0, 50_000, (n - n // 2, 2))
    return np.vstack([near, rural])


@pytest.mark.parametrize("order", [1, 2, 3, 4])
def test_hilbert_index_walks_every_cell_once_by_unit_steps(order):
    # Hilbert (1891): the curve visits each of the 4**p cells once, each step to an edge-adjacent cell,
    # starting at (0, 0) and ending at (2**p - 1, 0) (the orientation of the xy -> d algorithm)
    side = 2 ** order
    gx, gy = np.meshgrid(np.arange(side, dtype=float), np.arange(side, dtype=float))
    cells = np.column_stack([gx.ravel(), gy.ravel()])
    d = hilbert_index(cells, order=order).astype(np.int64)
    assert sorted(d.tolist()) == list(range(side * side))
    path = cells[np.argsort(d)]
    assert (np.abs(np.diff(path, axis=0)).sum(axis=1) == 1).all()
    assert path[0].tolist() == [0, 0] and path[-1].tolist() == [side - 1, 0]


def test_hilbert_index_puts_rows_without_coordinates_last():
    xy = np.array([[0.0, 0.0], [np.nan, 1.0], [5.0, 5.0]])
    d = hilbert_index(xy)
    assert d[1] == d.max() and d[1] > d[0] and d[1] > d[2]


def test_partitions_cover_every_row_once_and_are_compact():
    xy = clustered(20_000, 1)
    xy[::997] = np.nan
    parts = spatial_partitions(xy, 2_500)
    rows = np.concatenate(parts)
    assert np.array_equal(np.sort(rows), np.arange(len(xy)))
    assert max(p.size for p in parts) <= 2_500 and len(parts) == 8
    # compact: the partitions' boxes cover much less than eight times the layer's box (Hilbert locality)
    finite = np.isfinite(xy).all(axis=1)
    total = np.prod(np.ptp(xy[finite], axis=0))
    boxes = sum(np.prod(np.ptp(xy[p][np.isfinite(xy[p]).all(axis=1)], axis=0)) for p in parts)
    assert boxes < 3.0 * total


def test_halo_radius_holds_every_point_within_it():
    # brute force: every point within the radius of a core point (cKDTree ball query) is in the halo rows
    xy = clustered(6_000, 2)
    tree = cKDTree(xy)
    for core in spatial_partitions(xy, 1_000)[:3]:
        rows, radius = halo_rows(xy, core, 700.0)
        held = set(rows.tolist())
        assert set(core.tolist()) <= held
        for i, r in zip(core[::25], radius[::25]):
            assert set(tree.query_ball_point(xy[i], r)) <= held
        assert np.isfinite(radius).all() and (radius >= 700.0).all()


def test_partitioned_knn_equals_a_brute_force_cKDTree_query():
    xy = clustered(12_000, 3)  # continuous coordinates: no ties, no twins
    graph, plan = partitioned_graph(xy, partitions=spatial_partitions(xy, 1_500), k=9, first_width=200.0)
    d, j = cKDTree(xy).query(xy, k=10)  # reference: scipy's own k-nearest query over the whole layer
    np.testing.assert_array_equal(graph.indices, j[:, 1:])
    np.testing.assert_array_equal(graph.distances, d[:, 1:])
    assert plan.rounds > 1 and plan.retried_rows > 0  # the 200 m first halo was too narrow for the rural wells


@pytest.mark.parametrize("options", [
    dict(kind="knn", k=10),
    dict(kind="knn", k=6, max_distance=900.0),
    dict(kind="band", within=1_500.0),
])
def test_partitioned_graph_equals_the_whole_layer_graph_with_twins_ties_and_gaps(options):
    rng = np.random.default_rng(4)
    xy = clustered(8_000, 4)
    xy[:600] = np.round(xy[:600] / 250.0) * 250.0  # a lattice: many equal distances
    xy[600:700] = xy[700:800]  # duplicates (coincident twins)
    xy[rng.integers(0, 8_000, 40)] = np.nan
    usable = rng.random(8_000) > 0.05
    values = rng.normal(size=8_000)
    groups = coincident_groups(np.nan_to_num(xy, nan=-1e9), 0.5)
    rank = canonical_rank(xy, values)
    whole = build_graph(xy, coincident=groups, usable=usable, tie_rank=rank, **options)
    parts, plan = partitioned_graph(xy, partitions=spatial_partitions(xy, 900), coincident=groups, usable=usable,
                                    tie_rank=rank, **options)
    np.testing.assert_array_equal(parts.indices, whole.indices)
    np.testing.assert_array_equal(parts.distances, whole.distances)
    assert parts.max_distance == whole.max_distance and plan.partitions == 9


def test_edge_point_whose_kth_neighbour_is_two_partitions_away_is_exact():
    # constructed: partitions along a line; the point at x = 0 closes partition 0, partition 1 holds three
    # points within 1 m of it, partition 2 starts at 1.5 m: its 5th nearest neighbour lies two partitions away
    p0 = np.column_stack([np.arange(-90.0, 1.0, 10.0), np.zeros(10)])
    p1 = np.array([[0.5, 0.0], [0.75, 0.0], [1.0, 0.0]])
    p2 = np.column_stack([np.arange(1.5, 3.01, 0.1), np.zeros(16)])
    xy = np.vstack([p0, p1, p2])
    partitions = [np.arange(10), np.arange(10, 13), np.arange(13, len(xy))]
    edge = 9
    graph, plan = partitioned_graph(xy, partitions=partitions, k=5, first_width=1.2)
    fifth = graph.indices[edge, 4]
    assert fifth in partitions[2]
    assert graph.distances[edge, 4] == pytest.approx(1.6)  # from memory of the layout: 1.5 m and 1.6 m after P1
    d, _ = cKDTree(xy).query(xy, k=6)  # distances: scipy's whole-layer query; order among ties: by row, as build_graph
    np.testing.assert_array_equal(graph.distances, d[:, 1:])
    np.testing.assert_array_equal(graph.indices, build_graph(xy, k=5).indices)
    assert plan.rounds >= 2 and plan.widths[:2] == (1.2, 2.4)
