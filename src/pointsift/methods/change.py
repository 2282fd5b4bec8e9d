"""Each well's change between two campaigns, screened against its neighbours' changes.

The change (later reading minus earlier) of every well measured in both
campaigns is treated exactly as the single-campaign screen treats a value
(:mod:`pointsift.methods.local`): a robust local plane through the
neighbours' changes predicts the well's change, the residual is
standardized by the pooled local and distance scale, and the coherence test
asks whether the neighbours deviate alike (echo, curvature). A regional
decline moves every change together, so the plane absorbs it and nothing is
flagged; a new pumping centre lowers a coherent group, which the echo test
recognises; a lone well that jumps stands out. Local Moran's I and
Getis-Ord Gi* of the changes (:mod:`pointsift.methods.autocorr`) add
whether the well sits in a cluster of like changes or is a spatial outlier.

How many neighbours moved the same way by at least half as much (from the
regional change, the median of all) tells a group that fell together from a
lone well. The neighbours' median change and their robust spread (1.4826
MAD; common practice) are returned for the plain-language reason ("fell 6.2 while its 9
neighbours fell 0.3 +- 0.4").
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..graph import NeighbourGraph
from .autocorr import QUADRANT_WORDS, local_autocorrelation
from .local import local_residuals

__all__ = ["change_screen", "CHANGE_COLUMNS", "neighbour_change_summary", "neighbours_moving_with"]

_MAD_TO_SD = 1.482602218505602  # 1 / Phi^-1(3/4), common practice

#: Columns returned by :func:`change_screen`.
CHANGE_COLUMNS = (
    "change",
    "expected_change",
    "change_residual",
    "change_z",
    "change_scale",
    "change_coherent",
    "change_echo",
    "neighbour_median_change",
    "neighbour_change_sd",
    "change_neighbour_count",
    "neighbours_moving_with",
    "change_moran_i",
    "change_moran_quadrant",
    "change_moran_p_adjusted",
)


def neighbour_change_summary(change: np.ndarray, graph: NeighbourGraph) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Median, robust sd and count of each point's neighbours' changes.

    Parameters
    ----------
    change : ndarray
        Change per point (NaN where unknown).
    graph : NeighbourGraph
        Neighbours.

    Returns
    -------
    (median, sd, count) : tuple of ndarray
    """
    idx = graph.indices
    ok = graph.mask & np.isfinite(change[np.where(idx >= 0, idx, 0)])
    nb = np.where(ok, change[np.where(idx >= 0, idx, 0)], np.nan)
    count = ok.sum(axis=1)
    with np.errstate(all="ignore"):
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            median = np.nanmedian(nb, axis=1) if nb.shape[1] else np.full(len(change), np.nan)
            sd = _MAD_TO_SD * np.nanmedian(np.abs(nb - median[:, None]), axis=1) if nb.shape[1] else median
    return np.where(count > 0, median, np.nan), np.where(count > 0, sd, np.nan), count


def neighbours_moving_with(change: np.ndarray, graph: NeighbourGraph, *, share: float = 0.5) -> np.ndarray:
    """How many neighbours moved the same way as the point, by at least ``share`` of its move.

    Moves are measured from the median change of all points (the regional
    change), so a basin-wide decline moves nobody; a new pumping centre
    moves a group together.

    Parameters
    ----------
    change : ndarray
        Change per point (NaN where unknown).
    graph : NeighbourGraph
        Neighbours.
    share : float
        Part of the point's own move a neighbour must reach.

    Returns
    -------
    ndarray of int

    Examples
    --------
    >>> from pointsift.graph import build_graph
    >>> xy = np.column_stack([[0, 1, 2, 50, 51, 52, 53, 54], np.zeros(8)]).astype(float)
    >>> change = np.array([-5.0, -4.0, -1.5, 0, 0, 0, 0, 0])   # a group of three fell; the rest did not move
    >>> neighbours_moving_with(change, build_graph(xy, k=2)).tolist()
    [1, 1, 2, 0, 0, 0, 0, 0]
    """
    change = np.asarray(change, dtype=float)
    finite = np.isfinite(change)
    if not finite.any():
        return np.zeros(change.size, dtype=np.int64)
    move = change - np.median(change[finite])
    idx = graph.indices
    other = np.where(graph.mask, move[np.where(idx >= 0, idx, 0)], np.nan)
    with np.errstate(invalid="ignore"):
        alike = (np.sign(other) == np.sign(move)[:, None]) & (np.abs(other) >= share * np.abs(move)[:, None]) & (move[:, None] != 0)
    return np.where(finite, alike.sum(axis=1), 0).astype(np.int64)


def change_screen(
    xy: np.ndarray,
    change: np.ndarray,
    graph: NeighbourGraph,
    *,
    min_neighbours: int = 4,
    permutations: int = 199,
    seed: int = 0,
) -> pd.DataFrame:
    """Screen each point's change against its neighbours' changes.

    Parameters
    ----------
    xy : ndarray, shape (n, 2)
        Well locations (metres).
    change : ndarray
        Later minus earlier reading (NaN where the well lacks one of them;
        those rows are not judged and never used as neighbours).
    graph : NeighbourGraph
        Neighbours among the same rows.
    min_neighbours : int
        Fewer neighbours with a change: not judged (NaN z).
    permutations : int
        Conditional permutations for Local Moran's I / Gi* of the change.
    seed : int
        Seed of the permutations.

    Returns
    -------
    pandas.DataFrame
        One row per point, columns :data:`CHANGE_COLUMNS`.

    Examples
    --------
    >>> from pointsift.graph import build_graph
    >>> rng = np.random.default_rng(1)
    >>> xy = rng.uniform(0, 10_000, (200, 2))
    >>> change = -2.0 + rng.normal(0, 0.2, 200)      # a regional decline
    >>> change[5] = 4.0                               # one well that jumps
    >>> out = change_screen(xy, change, build_graph(xy, k=10))
    >>> bool(abs(out.change_z[5]) > 6), bool((abs(out.change_z.drop(5)) > 4).sum() == 0)
    (True, True)
    """
    change = np.asarray(change, dtype=float)
    finite = np.isfinite(change)
    used = graph.restrict(finite)
    local = local_residuals(xy, np.where(finite, change, np.nan), used, min_neighbours=min_neighbours)
    median, sd, count = neighbour_change_summary(change, used)
    judged = np.isfinite(local.z)
    if judged.sum() >= 3:
        autocorr = local_autocorrelation(np.where(judged, change, np.nan), used, permutations=permutations, seed=seed)
        moran_i = np.where(judged, autocorr.moran_i, np.nan)
        quadrant = np.array([QUADRANT_WORDS.get(int(q), "") if j else "" for q, j in zip(autocorr.quadrant, judged)], dtype=object)
        p_adjusted = np.where(judged, autocorr.p_adjusted, np.nan)
    else:
        moran_i = np.full(change.size, np.nan)
        quadrant = np.full(change.size, "", dtype=object)
        p_adjusted = np.full(change.size, np.nan)
    return pd.DataFrame(
        {
            "change": change,
            "expected_change": local.expected,
            "change_residual": local.residual,
            "change_z": local.z,
            "change_scale": local.scale,
            "change_coherent": local.coherent & judged,
            "change_echo": local.echo,
            "neighbour_median_change": median,
            "neighbour_change_sd": sd,
            "change_neighbour_count": count.astype("int32"),
            "neighbours_moving_with": neighbours_moving_with(change, used),
            "change_moran_i": moran_i,
            "change_moran_quadrant": quadrant,
            "change_moran_p_adjusted": p_adjusted,
        }
    )
