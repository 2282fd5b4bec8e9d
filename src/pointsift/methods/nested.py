"""Nested wells: several completions at one site are different wells, not duplicates.

Records at one spot (within the coincident tolerance) or sharing a site name
form a *station*. Inside a station, records are the same completion (and so
possible duplicate entries) only when nothing tells them apart: the same
aquifer unit, the same id when a site column is given, and well depths within
a share of each other (or unknown). Different completions are never compared
as duplicates. Around a station, the station counts as one neighbour: the
completion closest in depth to the well being predicted, or, when depths are
unknown, the completion whose value is the station's median (common practice
for multi-level piezometers: compare like depths). Completions of one station
are compared with each other only through the vertical head gradient, judged
against the gradients of the other stations of the layer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.sparse import coo_array
from scipy.sparse.csgraph import connected_components

from ..graph import NeighbourGraph

__all__ = ["Stations", "find_stations", "one_per_station", "vertical_gradients", "station_echo"]


@dataclass(frozen=True)
class Stations:
    """Stations and completions per row.

    Attributes
    ----------
    station : ndarray of int64
        Station label (-1: a well alone, with no site and nobody at its spot).
    completion : ndarray of int64
        Completion label, unique over the layer (-1 where ``station`` is -1).
    duplicate : ndarray of int64
        Group of records of one completion (possible duplicate entries), -1 alone:
        what :func:`pointsift.methods.coincident.coincident_conflicts` judges.
    nested : ndarray of bool
        The row's station holds at least two completions.
    """

    station: np.ndarray
    completion: np.ndarray
    duplicate: np.ndarray
    nested: np.ndarray

    @property
    def count(self) -> int:
        """Number of stations with more than one completion."""
        return int(np.unique(self.station[self.nested]).size)


def _components(n: int, pairs: list[np.ndarray]) -> np.ndarray:
    edges = np.vstack([p for p in pairs if p.size]) if any(p.size for p in pairs) else np.empty((0, 2), dtype=np.int64)
    if edges.size == 0:
        return np.arange(n)
    adjacency = coo_array((np.ones(len(edges)), (edges[:, 0], edges[:, 1])), shape=(n, n))
    return connected_components(adjacency, directed=False)[1]


def _chain_pairs(labels: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """Edges joining consecutive members of each non-empty label (a chain connects the group)."""
    frame = pd.DataFrame({"label": labels, "row": np.arange(labels.size)})[usable & (labels != "")]
    if frame.empty:
        return np.empty((0, 2), dtype=np.int64)
    frame = frame.sort_values(["label", "row"])
    same = frame["label"].to_numpy()[1:] == frame["label"].to_numpy()[:-1]
    rows = frame["row"].to_numpy()
    return np.column_stack([rows[:-1][same], rows[1:][same]])


def _chain_spots(coincident: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """Edges joining consecutive usable members of each spot group (``coincident >= 0``)."""
    rows = np.flatnonzero(usable & (coincident >= 0))
    if rows.size < 2:
        return np.empty((0, 2), dtype=np.int64)
    rows = rows[np.argsort(coincident[rows], kind="stable")]
    same = coincident[rows[1:]] == coincident[rows[:-1]]
    return np.column_stack([rows[:-1][same], rows[1:][same]])


def _station_depth_clusters(station: np.ndarray, depth: np.ndarray, tolerance: float) -> np.ndarray:
    """Depth clusters within each station at once (NaN depth: -1).

    Within a station, depths sorted (ties by row) chain together while each is
    within ``tolerance`` of the deeper one of the two; clusters are numbered
    0, 1, ... from the shallowest.
    """
    cluster = np.full(station.size, -1, dtype=np.int64)
    known = np.flatnonzero(np.isfinite(depth))
    if known.size == 0:
        return cluster
    order = known[np.lexsort((depth[known], station[known]))]  # by station, then depth, then row
    st, d = station[order], depth[order]
    first = np.r_[True, st[1:] != st[:-1]]
    with np.errstate(invalid="ignore"):
        step = np.r_[False, ~(d[1:] - d[:-1] <= tolerance * np.maximum(d[1:], 1e-12))] & ~first
    count = np.cumsum(step)
    start = np.maximum.accumulate(np.where(first, np.arange(order.size), 0))
    cluster[order] = count - count[start]
    return cluster


def _completions(station, in_station, ids, site, depth, aquifer, depth_tolerance):
    """Completion label of every row and the number of completions.

    Inside a station (in ascending station order), records share a
    completion when their aquifer unit, id (only when the station has a site
    name) and depth cluster agree; labels are numbered by first row, station
    after station.
    """
    n = station.size
    completion = np.full(n, -1, dtype=np.int64)
    rows = np.flatnonzero(in_station)
    if rows.size == 0:
        return completion, 0
    rows = rows[np.argsort(station[rows], kind="stable")]  # station after station, rows ascending
    st = station[rows]
    cluster = _station_depth_clusters(st, depth[rows], depth_tolerance)
    has_site = np.bincount(st, weights=(site[rows] != ""), minlength=int(st.max()) + 1) > 0
    member_id = np.where(has_site[st], ids[rows], "")
    codes = pd.MultiIndex.from_arrays([st, aquifer[rows], member_id, cluster]).factorize()[0]
    completion[rows] = codes
    return completion, int(codes.max()) + 1


def find_stations(
    coincident: np.ndarray,
    usable: np.ndarray,
    *,
    ids: np.ndarray | None = None,
    site: np.ndarray | None = None,
    depth: np.ndarray | None = None,
    aquifer: np.ndarray | None = None,
    depth_tolerance: float = 0.1,
) -> Stations:
    """Group records into stations and completions.

    Parameters
    ----------
    coincident : ndarray of int
        Spot group per row (-1 alone), from :func:`pointsift.graph.coincident_groups`.
    usable : ndarray of bool
        Rows that can be judged.
    ids : ndarray of object, optional
        The id column as text (raw, "" where blank); with ``site``, rows of
        one site with different ids are different completions.
    site, aquifer : ndarray of object, optional
        Site and unit names ("" unknown).
    depth : ndarray, optional
        Well depth (NaN unknown).
    depth_tolerance : float
        Depths within this share of the deeper one are one completion.

    Returns
    -------
    Stations

    Examples
    --------
    >>> groups = np.array([0, 0, 0, -1])
    >>> s = find_stations(groups, np.ones(4, bool), depth=np.array([20.0, 100.0, 21.0, 50.0]))
    >>> s.duplicate.tolist(), s.nested.tolist()
    ([0, -1, 0, -1], [True, True, True, False])
    """
    n = coincident.size
    blank = np.full(n, "", dtype=object)
    site = blank if site is None else np.asarray(site, dtype=object)
    aquifer = blank if aquifer is None else np.asarray(aquifer, dtype=object)
    depth = np.full(n, np.nan) if depth is None else np.asarray(depth, dtype=float)
    ids = blank if ids is None else np.asarray(ids, dtype=object)
    component = _components(n, [_chain_spots(coincident, usable), _chain_pairs(site, usable)])
    size = np.bincount(component[usable], minlength=n) if usable.any() else np.zeros(n, dtype=np.int64)
    in_station = usable & (size[component] > 1)
    station = np.full(n, -1, dtype=np.int64)
    _, station[in_station] = np.unique(component[in_station], return_inverse=True)

    completion, offset = _completions(station, in_station, ids, site, depth, aquifer, depth_tolerance)
    per_station = pd.Series(completion[in_station]).groupby(station[in_station]).nunique()
    nested = np.zeros(n, dtype=bool)
    nested[in_station] = per_station.reindex(station[in_station]).to_numpy() > 1
    counts = np.bincount(completion[in_station], minlength=max(offset, 1))
    duplicate = np.full(n, -1, dtype=np.int64)
    twin = in_station & (counts[np.where(completion >= 0, completion, 0)] > 1)
    _, duplicate[twin] = np.unique(completion[twin], return_inverse=True)
    return Stations(station, completion, duplicate, nested)


def one_per_station(graph: NeighbourGraph, stations: Stations, depth: np.ndarray, values: np.ndarray, k: int | None) -> NeighbourGraph:
    """Keep one neighbour per nested station in every row.

    The kept member is the completion closest in depth to the row's own well
    (both depths known), else the member whose value is closest to the
    station's median. Rows then keep their ``k`` nearest (all, for ``k=None``).
    The graph must already exclude a row's own station.
    """
    idx, dist = graph.indices, graph.distances
    mask = graph.mask
    rows, slots = np.nonzero(mask)
    nb = idx[rows, slots]
    st = np.where(stations.nested[nb], stations.station[nb], -1)
    if not (st >= 0).any():
        keep = mask
    else:
        med = pd.Series(values).groupby(stations.station).transform("median").to_numpy()
        both = np.isfinite(depth[rows]) & np.isfinite(depth[nb])
        score = np.where(both, np.abs(depth[nb] - depth[rows]), 1e15 + np.abs(values[nb] - med[nb]))
        frame = pd.DataFrame({"row": rows, "slot": slots, "st": st, "score": score})
        nested_part = frame[frame["st"] >= 0].sort_values(["row", "st", "score", "slot"])
        chosen = nested_part.drop_duplicates(["row", "st"])
        keep = np.zeros_like(mask)
        plain = frame[frame["st"] < 0]
        keep[plain["row"].to_numpy(), plain["slot"].to_numpy()] = True
        keep[chosen["row"].to_numpy(), chosen["slot"].to_numpy()] = True
    indices = np.where(keep, idx, -1)
    distances = np.where(keep, dist, np.inf)
    order = np.argsort(~keep, axis=1, kind="stable")
    indices = np.take_along_axis(indices, order, axis=1)
    distances = np.take_along_axis(distances, order, axis=1)
    if k is not None:
        indices, distances = indices[:, :k], distances[:, :k]
    return NeighbourGraph(indices, distances, graph.kind, graph.max_distance)


def vertical_gradients(
    stations: Stations,
    depth: np.ndarray,
    values: np.ndarray,
    ids: np.ndarray,
    *,
    limit_iqr: float = 3.0,
    min_pairs: int = 5,
    units: str = "",
) -> tuple[np.ndarray, np.ndarray, dict]:
    """Vertical head gradients between consecutive completions of each station.

    The gradient of a pair is the head difference per unit of depth
    (deeper minus shallower, divided by the depth difference). A pair whose
    gradient lies beyond the far fences of all pairs of the layer (Tukey
    1977: ``limit_iqr`` interquartile ranges beyond the quartiles) is
    unusual: both completions get the reason (the check cannot tell which
    one is off).

    Returns
    -------
    flagged : ndarray of bool
    text : ndarray of object
    record : dict
        Pairs, median and robust sd of the gradients (for ``run_info``).
    """
    n = values.size
    flagged = np.zeros(n, dtype=bool)
    text = np.full(n, "", dtype=object)
    use = stations.nested & np.isfinite(depth) & np.isfinite(values)
    frame = pd.DataFrame({"row": np.flatnonzero(use), "st": stations.station[use], "d": depth[use], "v": values[use]})
    frame = frame.sort_values(["st", "d", "row"])
    same = frame["st"].to_numpy()[1:] == frame["st"].to_numpy()[:-1]
    upper = frame["row"].to_numpy()[:-1][same]
    lower = frame["row"].to_numpy()[1:][same]
    gap = depth[lower] - depth[upper]
    keep = gap > 0
    upper, lower, gap = upper[keep], lower[keep], gap[keep]
    gradient = (values[lower] - values[upper]) / gap
    record = {"pairs": int(gradient.size)}
    if gradient.size < min_pairs:
        record["note"] = f"fewer than {min_pairs} pairs of completions with known depths: not judged"
        return flagged, text, record
    q1, centre, q3 = (float(q) for q in np.percentile(gradient, [25, 50, 75]))
    iqr = q3 - q1
    record.update({"median_gradient": round(centre, 5), "q1": round(q1, 5), "q3": round(q3, 5),
                   "fences": "Tukey far fences, Q1 - 3 IQR and Q3 + 3 IQR"})
    if not iqr > 0:
        return flagged, text, record
    low, high = q1 - limit_iqr * iqr, q3 + limit_iqr * iqr
    unit = f" {units}" if units else ""
    for a, b, g in zip(upper, lower, gradient):
        if low <= g <= high:
            continue
        for row, other in ((a, b), (b, a)):
            flagged[row] = True
            sentence = (
                f"vertical gradient to the completion {ids[other]} of the same site is unusual: the head changes by "
                f"{values[b] - values[a]:+.3g}{unit} over {depth[b] - depth[a]:.3g}{unit} of depth "
                f"({g:+.2g} per unit depth, beyond the far fences {low:+.2g} to {high:+.2g} of this layer's sites); "
                "check both completions"
            )
            text[row] = sentence if text[row] == "" else f"{text[row]}; {sentence}"
    return flagged, text, record


def station_echo(stations: Stations, z: np.ndarray, threshold: float) -> np.ndarray:
    """Completions of one station that deviate the same way.

    Two or more separate completions of a site standing out in the same
    direction (each beyond ``threshold``) are independent wells telling the
    same story: a real feature of the site (a different aquifer, a local
    cone), not a lone entry mistake.
    """
    n = z.size
    out = np.zeros(n, dtype=bool)
    with np.errstate(invalid="ignore"):
        high = stations.nested & (z >= threshold)
        low = stations.nested & (z <= -threshold)
    for side in (high, low):
        if not side.any():
            continue
        per_station = pd.Series(stations.completion[side]).groupby(stations.station[side]).nunique()
        shared = per_station[per_station >= 2].index.to_numpy()
        out |= side & np.isin(stations.station, shared)
    return out
