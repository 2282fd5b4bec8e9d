"""Physical plausibility of a water level or depth against the land surface and the well.

Checks (common practice in groundwater-level data review; they need the
context columns and are skipped where a value is unknown):

* a level standing above land surface by more than a tolerance (a depth to
  water below zero), unless the well is marked as flowing (artesian);
* a depth to water below the bottom of the well (the well would be dry;
  strong evidence beyond a share of the well depth, a look below that);
* a level equal to the land-surface elevation (the ground elevation copied
  into the level field, or a depth of exactly zero).

The first is strong evidence (``suspect``); the third asks for a look
(``review``), since a water table at the surface does occur in wetlands.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["plausibility", "fmt"]


def fmt(value: float, units: str = "") -> str:
    """A value with five significant digits (whole units from 100,000) and its units.

    >>> fmt(12.345678, "ft"), fmt(1355.12), fmt(0.0421, "mg/l"), fmt(250000.4)
    ('12.346 ft', '1355.1', '0.0421 mg/l', '250000')
    """
    if not np.isfinite(value):
        return "n/a"
    text = f"{value:.0f}" if abs(value) >= 1e5 else f"{value:.5g}"
    return f"{text} {units}".strip()


def plausibility(
    values: np.ndarray,
    quantity: str,
    ground: np.ndarray,
    well_depth: np.ndarray,
    flowing: np.ndarray,
    *,
    tolerance: float,
    units: str = "",
    equal_within: float | None = None,
    depth_share: float = 0.1,
) -> pd.DataFrame:
    """Plausibility of each value.

    Parameters
    ----------
    values : ndarray
        Levels (``quantity="level"``) or depths to water (``"depth"``).
    quantity : str
        Other quantities are not checked (all columns empty).
    ground : ndarray
        Land-surface elevation (NaN unknown); needed for levels.
    well_depth : ndarray
        Depth of the well below land surface (NaN unknown).
    flowing : ndarray of bool
        Marked as flowing: a level above land surface is expected.
    tolerance : float
        Allowance (value units) for a level above land surface and for a
        depth below the well's bottom (measuring-point height, survey error).
    units : str
        Shown in the reasons.
    equal_within : float, optional
        A level this close to land surface counts as equal to it (default: a
        hundredth of ``tolerance``).
    depth_share : float
        A depth to water below the well's bottom by more than this share of
        the well depth (plus ``tolerance``) is strong evidence; less asks for
        a look (recorded well depths are often approximate).

    Returns
    -------
    pandas.DataFrame
        ``strong`` (bool), ``weak`` (bool), ``kind`` ("above_surface",
        "below_well", "at_surface" or ""), ``text``.

    Examples
    --------
    >>> out = plausibility(np.array([105.0, 60.0]), "level", np.array([100.0, 100.0]),
    ...                    np.array([np.nan, 30.0]), np.zeros(2, bool), tolerance=0.5, units="m")
    >>> out["kind"].tolist()
    ['above_surface', 'below_well']
    """
    n = values.size
    strong = np.zeros(n, dtype=bool)
    weak = np.zeros(n, dtype=bool)
    kind = np.full(n, "", dtype=object)
    text = np.full(n, "", dtype=object)
    if quantity not in ("level", "depth"):
        return pd.DataFrame({"strong": strong, "weak": weak, "kind": kind, "text": text})
    equal_within = tolerance / 100.0 if equal_within is None else equal_within
    depth = ground - values if quantity == "level" else values.astype(float)
    with np.errstate(invalid="ignore"):
        above = np.isfinite(depth) & (depth < -tolerance) & ~flowing
        below = np.isfinite(depth) & np.isfinite(well_depth) & (depth > well_depth + tolerance)
        at = np.isfinite(depth) & (np.abs(depth) <= equal_within) & ~flowing & ~above & ~below
    for i in np.flatnonzero(above):
        if quantity == "level":
            text[i] = (f"level {fmt(values[i], units)} stands {fmt(-depth[i], units)} above the land surface "
                       f"({fmt(ground[i], units)}) and the well is not marked as flowing: implausible")
        else:
            text[i] = (f"depth to water {fmt(values[i], units)} puts the water {fmt(-depth[i], units)} above "
                       "the land surface and the well is not marked as flowing: implausible")
    for i in np.flatnonzero(below):
        text[i] = (f"depth to water {fmt(depth[i], units)} lies {fmt(depth[i] - well_depth[i], units)} below the bottom "
                   f"of the well (depth {fmt(well_depth[i], units)}): the well would be dry")
    for i in np.flatnonzero(at):
        text[i] = (f"level equals the land-surface elevation ({fmt(ground[i], units)}): the ground elevation entered as the level?"
                   if quantity == "level" else "depth to water is exactly zero: a blank entered as 0?")
    with np.errstate(invalid="ignore"):
        far_below = below & (depth > well_depth * (1.0 + depth_share) + tolerance)
    strong = above | far_below
    weak = at | (below & ~far_below)
    kind[above] = "above_surface"
    kind[below] = "below_well"
    kind[at] = "at_surface"
    return pd.DataFrame({"strong": strong, "weak": weak, "kind": kind, "text": text})
