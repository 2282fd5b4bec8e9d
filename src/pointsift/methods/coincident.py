"""Records at one spot that disagree.

Two records within the coincident tolerance are one well measured (or
entered) twice. They are never each other's neighbours; each is judged against
the other neighbours by its own standardized local residual. When the values
disagree by more than the tolerance, the record the neighbours contradict is
the suspect one; when the neighbours cannot tell them apart, both need a
look. (Common practice in well-database cleaning: compare duplicates with the
surrounding wells before choosing one.)
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..vocabulary import ROLE_AGREES, ROLE_ALONE, ROLE_CONTRADICTED, ROLE_SUPPORTED, ROLE_UNDECIDED

__all__ = ["coincident_conflicts"]


def coincident_conflicts(
    values: np.ndarray,
    groups: np.ndarray,
    z: np.ndarray,
    scale: np.ndarray,
    *,
    value_tolerance: float | None = None,
    decisive_z: float = 2.0,
    margin: float = 2.0,
) -> pd.DataFrame:
    """Judge records that share a spot.

    Parameters
    ----------
    values : ndarray
        Values (NaN where unusable).
    groups : ndarray of int
        Coincident group per row (-1 when alone), from
        :func:`pointsift.graph.coincident_groups`.
    z, scale : ndarray
        Standardized local residual and its scale per row (twins excluded
        from each other's predictions).
    value_tolerance : float, optional
        Records differing by more than this disagree. Default: the local
        residual scale of the record (the spread expected between a value and
        its neighbours; two records of one well at one time should differ by
        less than that).
    decisive_z : float
        A record is contradicted by its neighbours when its |z| reaches this
        and exceeds its twin's by ``margin``.
    margin : float
        See ``decisive_z``.

    Returns
    -------
    pandas.DataFrame
        Per row: ``role`` ("" alone or unusable, "agrees", "contradicted",
        "supported", "undecided"), ``difference`` (largest absolute
        difference to a twin), ``partner`` (row of that twin, -1 if none).
    """
    n = values.size
    role = np.full(n, "", dtype=object)
    difference = np.full(n, np.nan)
    partner = np.full(n, -1, dtype=np.int64)
    member = (groups >= 0) & np.isfinite(values)
    if not member.any():
        return pd.DataFrame({"role": role, "difference": difference, "partner": partner})
    rows = np.flatnonzero(member)
    frame = pd.DataFrame({"row": rows, "group": groups[rows], "value": values[rows], "absz": np.abs(z[rows])})
    grouped = frame.groupby("group")
    size = grouped["value"].transform("size").to_numpy()
    gmin = grouped["value"].transform("min").to_numpy()
    gmax = grouped["value"].transform("max").to_numpy()
    row_of_min = frame.loc[grouped["value"].idxmin().reindex(frame["group"]).to_numpy(), "row"].to_numpy()
    row_of_max = frame.loc[grouped["value"].idxmax().reindex(frame["group"]).to_numpy(), "row"].to_numpy()
    min_absz = grouped["absz"].transform(lambda s: s.min(skipna=False)).to_numpy()
    v = frame["value"].to_numpy()
    far_is_max = (gmax - v) >= (v - gmin)
    diff = np.where(far_is_max, gmax - v, v - gmin)
    other = np.where(far_is_max, row_of_max, row_of_min)
    # equal values: the extreme may be the row itself; name another member instead
    first = grouped["row"].transform("first").to_numpy()
    last = grouped["row"].transform("last").to_numpy()
    other = np.where(other == rows, np.where(first != rows, first, last), other)
    tol = scale[rows] * 1.0 if value_tolerance is None else np.full(rows.size, float(value_tolerance))
    tol = np.where(np.isfinite(tol), tol, 0.0)
    single = size < 2
    disagree = ~single & (diff > tol)
    absz = frame["absz"].to_numpy()
    known = np.isfinite(absz) & np.isfinite(min_absz)
    contradicted = disagree & known & (absz >= decisive_z) & (absz - min_absz >= margin)
    group_has_contradicted = pd.Series(contradicted).groupby(frame["group"].to_numpy()).transform("any").to_numpy()
    supported = disagree & ~contradicted & group_has_contradicted
    undecided = disagree & ~contradicted & ~supported
    local_role = np.where(
        contradicted, ROLE_CONTRADICTED,
        np.where(supported, ROLE_SUPPORTED, np.where(undecided, ROLE_UNDECIDED, np.where(single, ROLE_ALONE, ROLE_AGREES))),
    )
    role[rows] = local_role
    difference[rows] = np.where(single, np.nan, diff)
    partner[rows] = np.where(single, -1, other)
    return pd.DataFrame({"role": role, "difference": difference, "partner": partner})
