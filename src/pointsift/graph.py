"""Neighbour graph over irregular points: k nearest or a distance band.

The graph is stored as padded arrays (one row per point, ``-1`` where a row
has fewer neighbours), which keeps every method vectorised. Neighbours are
ordered by distance, then by row number, so ties and coincident points are
resolved the same way on every run; with ``tie_rank`` from
:func:`canonical_rank` (as the screen does) ties are broken by position and
value instead of row number, so the row order of the input cannot change a
neighbour set. A point is never its own neighbour, and
neither are its coincident twins (records within ``coincident_tolerance``):
those are judged separately (:mod:`pointsift.methods.coincident`). Self is
excluded by row id, never by dropping "the first neighbour".
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["NeighbourGraph", "build_graph", "canonical_rank", "coincident_groups", "BAND_CAP"]

#: A distance band keeps at most this many nearest neighbours per point.
BAND_CAP = 64


@dataclass(frozen=True)
class NeighbourGraph:
    """Neighbours of each point, padded to a common width.

    Attributes
    ----------
    indices : ndarray of int64, shape (n, m)
        Row numbers of the neighbours, nearest first; ``-1`` pads short rows.
    distances : ndarray of float64, shape (n, m)
        Distances in work-CRS units (metres); ``inf`` where padded.
    kind : str
        ``"knn"`` or ``"band"``.
    max_distance : float
        Neighbours beyond this distance were left out.
    """

    indices: np.ndarray
    distances: np.ndarray
    kind: str
    max_distance: float

    @property
    def n(self) -> int:
        """Number of points (rows)."""
        return self.indices.shape[0]

    @property
    def mask(self) -> np.ndarray:
        """Boolean array, True where a neighbour slot is filled."""
        return self.indices >= 0

    @property
    def counts(self) -> np.ndarray:
        """Number of neighbours of each point."""
        return self.mask.sum(axis=1)

    def restrict(self, keep: np.ndarray) -> "NeighbourGraph":
        """Drop neighbours that are not in ``keep`` (a boolean array over points).

        Rows keep their place; dropped slots are moved to the end of each row.
        """
        ok = self.mask & keep[np.where(self.indices >= 0, self.indices, 0)]
        order = np.argsort(~ok, axis=1, kind="stable")
        indices = np.where(ok, self.indices, -1)
        distances = np.where(ok, self.distances, np.inf)
        return NeighbourGraph(
            np.take_along_axis(indices, order, axis=1),
            np.take_along_axis(distances, order, axis=1),
            self.kind,
            self.max_distance,
        )

    def to_sparse(self, symmetric: bool = False):
        """Binary adjacency as a ``scipy.sparse.csr_array`` (row i -> its neighbours)."""
        from scipy import sparse

        rows = np.repeat(np.arange(self.n), self.indices.shape[1])[self.mask.ravel()]
        cols = self.indices[self.mask]
        adjacency = sparse.csr_array((np.ones(rows.size), (rows, cols)), shape=(self.n, self.n))
        if symmetric:
            adjacency = ((adjacency + adjacency.T) > 0).astype(float)
        return adjacency

    def to_libpysal(self):
        """The same neighbours as a ``libpysal.graph.Graph`` (binary weights).

        For work that carries on in the PySAL ecosystem (spatial regression,
        other local statistics) with exactly the neighbours the screen used.
        libpysal is an optional dependency: ``pip install pointsift[pysal]``.

        Returns
        -------
        libpysal.graph.Graph
        """
        try:
            from libpysal.graph import Graph
        except ImportError:
            raise ImportError("to_libpysal needs libpysal: install it with pip install 'pointsift[pysal]'.") from None
        return Graph.from_sparse(self.to_sparse())


def coincident_groups(xy: np.ndarray, tolerance: float) -> np.ndarray:
    """Label groups of points lying within ``tolerance`` of each other.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates in metres.
    tolerance : float
        Points closer than or equal to this are at "one spot" (chained).

    Returns
    -------
    ndarray of int64
        Group label per point; a point alone at its spot gets ``-1``.
    """
    n = xy.shape[0]
    labels = np.full(n, -1, dtype=np.int64)
    if n < 2 or tolerance <= 0:
        return labels
    pairs = cKDTree(xy).query_pairs(tolerance, output_type="ndarray")
    if pairs.size == 0:
        return labels
    from scipy.sparse import coo_array
    from scipy.sparse.csgraph import connected_components

    adjacency = coo_array((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n))
    _, component = connected_components(adjacency, directed=False)
    size = np.bincount(component)
    in_group = size[component] > 1
    # relabel groups 0..g-1 in order of first row, so labels are deterministic
    _, first = np.unique(component[in_group], return_inverse=True)
    labels[in_group] = first
    return labels


def canonical_rank(xy: np.ndarray, values: np.ndarray | None = None) -> np.ndarray:
    """Rank of each point by x, then y, then value (then row): a tie-break for
    equal distances that does not depend on the row order.

    Examples
    --------
    >>> canonical_rank(np.array([[1.0, 0.0], [0.0, 5.0], [0.0, 2.0]])).tolist()
    [2, 1, 0]
    """
    xy = np.asarray(xy, dtype=float)
    keys = (xy[:, 1], xy[:, 0]) if values is None else (np.asarray(values, dtype=float), xy[:, 1], xy[:, 0])
    order = np.lexsort(keys)
    rank = np.empty(order.size, dtype=np.int64)
    rank[order] = np.arange(order.size)
    return rank


def _sorted_query(tree: cKDTree, xy: np.ndarray, width: int, workers: int, tie_rank: np.ndarray):
    distances, indices = tree.query(xy, k=width, workers=workers)
    if width == 1:
        distances, indices = distances[:, None], indices[:, None]
    missing = indices >= tree.n
    indices = np.where(missing, -1, indices).astype(np.int64)
    # order by distance, then tie rank; padding last
    row_key = np.where(missing, np.iinfo(np.int64).max, tie_rank[np.where(missing, 0, indices)])
    order = np.lexsort((row_key, distances), axis=1)
    return np.take_along_axis(distances, order, axis=1), np.take_along_axis(indices, order, axis=1)


def build_graph(
    xy: np.ndarray,
    *,
    kind: str = "knn",
    k: int = 10,
    within: float | None = None,
    max_distance: float | None = None,
    coincident: np.ndarray | None = None,
    usable: np.ndarray | None = None,
    workers: int = -1,
    tie_rank: np.ndarray | None = None,
) -> NeighbourGraph:
    """Build the neighbour graph.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Coordinates in a metric CRS.
    kind : {"knn", "band"}
        k nearest neighbours, or every neighbour within ``within`` (at most
        :data:`BAND_CAP`, nearest first).
    k : int
        Neighbours per point for ``"knn"``.
    within : float
        Band distance for ``"band"``.
    max_distance : float, optional
        Neighbours farther than this are left out (both kinds).
    coincident : ndarray of int, optional
        Labels from :func:`coincident_groups`; twins are never neighbours.
    usable : ndarray of bool, optional
        Only usable points can be neighbours (rows of unusable points are empty).
    workers : int
        Threads for the k-d tree query (``-1``: all cores).
    tie_rank : ndarray of int, optional
        Order among neighbours at equal distance (default: row number);
        :func:`canonical_rank` makes it independent of the row order.

    Returns
    -------
    NeighbourGraph
    """
    xy = np.asarray(xy, dtype=float)
    n = xy.shape[0]
    if usable is None:
        usable = np.isfinite(xy).all(axis=1)
    usable = usable & np.isfinite(xy).all(axis=1)
    if coincident is None:
        coincident = np.full(n, -1, dtype=np.int64)
    limit = np.inf if max_distance is None else float(max_distance)
    if kind == "band":
        if within is None:
            raise ValueError("a distance band needs 'within'")
        limit = min(limit, float(within))
        width = BAND_CAP
    else:
        width = k

    rows = np.flatnonzero(usable)
    m = rows.size
    indices = np.full((n, width), -1, dtype=np.int64)
    distances = np.full((n, width), np.inf)
    if m < 2:
        return NeighbourGraph(indices, distances, kind, limit)

    group_sizes = np.bincount(coincident[rows][coincident[rows] >= 0]) if (coincident[rows] >= 0).any() else np.array([1])
    extra = int(group_sizes.max()) + 2  # twins to skip, plus margin for ties at the cut
    query_width = min(m, width + extra)
    tree = cKDTree(xy[rows])
    local_rank = rows if tie_rank is None else np.asarray(tie_rank, dtype=np.int64)[rows]
    todo = rows
    while todo.size:
        d, j = _sorted_query(tree, xy[todo], query_width, workers, local_rank)
        j_global = np.where(j >= 0, rows[np.where(j >= 0, j, 0)], -1)
        own = todo[:, None]
        own_group = coincident[todo][:, None]
        twin = (own_group >= 0) & (coincident[np.where(j_global >= 0, j_global, 0)] == own_group)
        keep = (j_global >= 0) & (j_global != own) & ~twin & (d <= limit)
        order = np.argsort(~keep, axis=1, kind="stable")[:, :width]
        kept = np.take_along_axis(keep, order, axis=1)
        indices[todo, : order.shape[1]] = np.where(kept, np.take_along_axis(j_global, order, axis=1), -1)
        distances[todo, : order.shape[1]] = np.where(kept, np.take_along_axis(d, order, axis=1), np.inf)
        if query_width >= m:
            break
        # points tied with the last kept neighbour may lie beyond what the tree
        # returned (it breaks ties arbitrarily): ask again, wider, for those rows
        last = distances[todo, width - 1]
        todo = todo[np.isfinite(last) & (d[:, -1] <= last)]
        query_width = min(m, 2 * query_width)
    return NeighbourGraph(indices, distances, kind, limit)
