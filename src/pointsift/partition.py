"""Spatial partitions of a layer and the exact neighbour graph built partition by partition.

The points are put in Hilbert order (Hilbert 1891, "Ueber die stetige
Abbildung einer Linie auf ein Flaechenstueck", Math. Ann. 38: the curve
through a 2**p x 2**p grid of the layer's bounding box, cell index by the
iterative xy -> d algorithm of Butz 1971 / Lawder 2000) and cut into runs of
``size`` consecutive points: a run is compact in space, so its neighbours are
few and near.

Each partition is screened with a **halo**: every other point inside the
partition's bounding box widened by ``w``. A disc of radius ``r`` around a
point lies in that box when ``r <= w + inset``, ``inset`` being the point's
distance to the nearest side of the partition's own box. A point's
neighbourhood is therefore **exact** (the same as over the whole layer)
when its last kept neighbour is no farther than ``w + inset`` (a full row),
or when the graph's distance limit is no farther (a short row: nothing
within the limit was left out). Ties at the last distance are kept in by the
closed box. Rows that are not exact are built again with ``w`` doubled,
until all are exact or the halo holds every point.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .graph import BAND_CAP, NeighbourGraph, build_graph

__all__ = ["hilbert_index", "spatial_partitions", "halo_rows", "partitioned_graph", "GraphPlan", "graph_task",
           "HILBERT_ORDER"]

#: Bits per axis of the Hilbert grid (2**16 cells a side: far finer than any partition).
HILBERT_ORDER = 16


def hilbert_index(xy: np.ndarray, order: int = HILBERT_ORDER) -> np.ndarray:
    """Position of each point along the Hilbert curve over the layer's bounding box.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates; rows with NaN get the largest index (they sort last).
    order : int
        Bits per axis (the grid is ``2**order`` cells a side).

    Returns
    -------
    ndarray of uint64

    Examples
    --------
    >>> hilbert_index(np.array([[0.0, 0.0], [0.0, 1.0], [1.0, 1.0], [1.0, 0.0]]), order=1).tolist()
    [0, 1, 2, 3]
    """
    xy = np.asarray(xy, dtype=float)
    finite = np.isfinite(xy).all(axis=1)
    out = np.full(xy.shape[0], np.iinfo(np.uint64).max, dtype=np.uint64)
    if not finite.any():
        return out
    side = (1 << order) - 1
    low = xy[finite].min(axis=0)
    span = np.maximum(xy[finite].max(axis=0) - low, np.finfo(float).tiny)
    cells = np.clip(np.floor((xy[finite] - low) / span * side + 0.5), 0, side).astype(np.uint64)
    x, y = cells[:, 0].copy(), cells[:, 1].copy()
    d = np.zeros(x.size, dtype=np.uint64)
    full = np.uint64(side)
    s = np.uint64(1 << (order - 1))
    while s > 0:
        rx = (x & s) > 0
        ry = (y & s) > 0
        d += s * s * ((np.uint64(3) * rx.astype(np.uint64)) ^ ry.astype(np.uint64))
        # rotate the quadrant so the curve's sub-curve starts and ends where it should
        flip = ~ry & rx
        x = np.where(flip, full - x, x)
        y = np.where(flip, full - y, y)
        swap = ~ry
        x, y = np.where(swap, y, x), np.where(swap, x, y)
        s = s >> np.uint64(1)
    out[finite] = d
    return out


def spatial_partitions(xy: np.ndarray, size: int) -> list[np.ndarray]:
    """Rows cut into runs of at most ``size`` consecutive points in Hilbert order.

    Rows without coordinates go to the last partition (their graph rows stay
    empty). Ties in the index are broken by row number, so the cut is
    deterministic.

    Returns
    -------
    list of ndarray of int64
        Row numbers of each partition (ascending within a partition).
    """
    n = xy.shape[0]
    if n == 0:
        return []
    order = np.lexsort((np.arange(n), hilbert_index(xy)))
    count = max(1, int(np.ceil(n / max(int(size), 1))))
    return [np.sort(part) for part in np.array_split(order, count) if part.size]


def halo_rows(xy: np.ndarray, core: np.ndarray, width: float) -> tuple[np.ndarray, np.ndarray]:
    """Rows inside the core's bounding box widened by ``width``, and each core row's exactness radius.

    Returns
    -------
    rows : ndarray of int64
        Every row (core included, ascending) with coordinates inside the
        closed widened box.
    radius : ndarray of float
        Per core row: every point within this distance is in ``rows``
        (``width`` plus the distance to the nearest side of the core's box);
        ``inf`` when the box holds every point.
    """
    finite = np.isfinite(xy).all(axis=1)
    own = xy[core]
    own_ok = np.isfinite(own).all(axis=1)
    radius = np.full(core.size, np.inf)
    if not own_ok.any():
        return np.sort(core), radius
    low, high = own[own_ok].min(axis=0), own[own_ok].max(axis=0)
    with np.errstate(invalid="ignore"):
        inside = finite & (xy >= low - width).all(axis=1) & (xy <= high + width).all(axis=1)
    rows = np.union1d(np.flatnonzero(inside), core)
    if inside.sum() < finite.sum():
        inset = np.minimum(own - low, high - own).min(axis=1)
        radius = np.where(own_ok, width + inset, np.inf)
    return rows, radius


@dataclass(frozen=True)
class GraphPlan:
    """How the partitioned graph was built (for the run record and the tests).

    Attributes
    ----------
    partitions : int
    rounds : int
        Halo widths tried (1: every row exact at the first width).
    retried_rows : int
        Rows built again with a wider halo.
    widths : tuple of float
        Halo width of each round (metres).
    largest_subset : int
        Most points (core and halo) one task held.
    """

    partitions: int
    rounds: int
    retried_rows: int
    widths: tuple
    largest_subset: int


def graph_task(xy_sub, core_pos, radius, usable_sub, coincident_sub, rank_sub, options):
    """One partition's rows of the graph (run on a worker): ``build_graph`` over core and halo.

    Returns the core rows' indices (positions in the subset), distances and
    whether each row is exact (module notes).
    """
    graph = build_graph(xy_sub, usable=usable_sub, coincident=coincident_sub, tie_rank=rank_sub, workers=1, **options)
    indices, distances = graph.indices[core_pos], graph.distances[core_pos]
    width = indices.shape[1]
    full = indices[:, width - 1] >= 0 if width else np.zeros(core_pos.size, dtype=bool)
    reach = np.where(full, distances[:, width - 1] if width else 0.0, graph.max_distance)
    exact = ~usable_sub[core_pos] | (reach <= radius)
    return indices, distances, exact, graph.max_distance


def _first_width(xy: np.ndarray, core: np.ndarray, neighbours: int, limit: float) -> float:
    """A halo width likely to hold ``neighbours`` neighbours of most core points
    (twice the k-th neighbour distance of a uniform layer of the core's density),
    never beyond the graph's distance limit."""
    own = xy[core][np.isfinite(xy[core]).all(axis=1)]
    if own.shape[0] < 2:
        return limit if np.isfinite(limit) else 1.0
    extent = own.max(axis=0) - own.min(axis=0)
    area = float(extent[0] * extent[1])
    if not area > 0:
        area = float(max(extent.max(), 1.0)) ** 2
    estimate = 2.0 * np.sqrt(neighbours * area / (np.pi * own.shape[0]))
    estimate = max(estimate, 1e-6 * float(max(extent.max(), 1.0)))
    return min(estimate, limit) if np.isfinite(limit) else estimate


def partitioned_graph(xy, *, partitions, kind="knn", k=10, within=None, max_distance=None, coincident=None,
                      usable=None, tie_rank=None, mapper=None, first_width=None):
    """The neighbour graph of :func:`pointsift.graph.build_graph`, built per partition with exact halos.

    Parameters
    ----------
    xy, kind, k, within, max_distance, coincident, usable, tie_rank
        As for :func:`~pointsift.graph.build_graph`; the result is the same
        graph (module notes), row for row.
    partitions : list of ndarray
        Row numbers of each partition (:func:`spatial_partitions`).
    mapper : callable, optional
        ``mapper(function, list_of_argument_tuples) -> list of results``;
        runs the tasks (default: one after another in this process; the Dask
        engine submits them to its cluster).
    first_width : float, optional
        Halo width of the first round (default: from each partition's density).

    Returns
    -------
    graph : NeighbourGraph
    plan : GraphPlan
    """
    xy = np.asarray(xy, dtype=float)
    n = xy.shape[0]
    mapper = mapper or (lambda function, items: [function(*item) for item in items])
    usable = np.isfinite(xy).all(axis=1) if usable is None else (np.asarray(usable, bool) & np.isfinite(xy).all(axis=1))
    coincident = np.full(n, -1, dtype=np.int64) if coincident is None else np.asarray(coincident, dtype=np.int64)
    rank = np.arange(n, dtype=np.int64) if tie_rank is None else np.asarray(tie_rank, dtype=np.int64)
    limit = np.inf if max_distance is None else float(max_distance)
    if kind == "band":
        limit = min(limit, float(within))
    width_cols = BAND_CAP if kind == "band" else k
    options = dict(kind=kind, k=k, within=within, max_distance=max_distance)
    indices = np.full((n, width_cols), -1, dtype=np.int64)
    distances = np.full((n, width_cols), np.inf)
    groups = np.bincount(coincident[coincident >= 0]).max() if (coincident >= 0).any() else 1
    todo = [(np.asarray(part, dtype=np.int64), first_width if first_width is not None
             else _first_width(xy, part, width_cols + int(groups), limit)) for part in partitions]
    rounds, retried, widths, largest, got_limit = 0, 0, [], 0, limit
    while todo:
        rounds += 1
        widths.append(max(w for _, w in todo))
        items, subsets = [], []
        for core, w in todo:
            rows, radius = halo_rows(xy, core, w)
            pos = np.searchsorted(rows, core)
            subsets.append(rows)
            largest = max(largest, rows.size)
            items.append((xy[rows], pos, radius, usable[rows], coincident[rows], rank[rows], options))
        results = mapper(graph_task, items)
        again = []
        for (core, w), rows, (idx, dist, exact, got_limit) in zip(todo, subsets, results):
            done = core[exact]
            indices[done] = np.where(idx[exact] >= 0, rows[np.where(idx[exact] >= 0, idx[exact], 0)], -1)
            distances[done] = dist[exact]
            if not exact.all():
                retried += int((~exact).sum())
                again.append((core[~exact], 2.0 * w))
        todo = again
    plan = GraphPlan(len(partitions), rounds, retried, tuple(float(w) for w in widths), largest)
    return NeighbourGraph(indices, distances, kind, float(got_limit)), plan
