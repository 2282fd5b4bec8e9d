"""Directional strips with a calibrated mean-minus-median statistic.

Monitoring networks are irregular, so instead of the rows and columns of a
grid pointsift summarises the values in parallel *strips*. A strip family is
named by its ``direction``: the azimuth in degrees (clockwise from grid north)
along which the strips run, taken modulo 180. ``direction=90`` gives
west-east strips stacked from south to north; ``direction=0`` gives
south-north strips stacked from west to east. Strips are numbered 0, 1, 2, ...
along the *across* axis, whose azimuth is ``(direction - 90) mod 180`` (north
for west-east strips, east for south-north strips). Strip edges sit at whole
multiples of the width along the across axis, so the same width gives the same
strips on every run. Every usable point (finite x, y and value) falls in
exactly one strip of each family; a point on an edge belongs to the strip on
its far side (intervals are closed below, open above).

Default width: the across extent of the usable points times
``max(target_per_strip, n / max_strips) / n``, rounded to a "nice" number (1,
2, 2.5 or 5 times a power of ten), so that strips hold about
``target_per_strip`` (25) points on average, and large layers get about
``max_strips`` (100) strips per family rather than thousands.

Per strip: n, mean, median, sd (``n - 1`` denominator), min, max, 5th, 25th,
75th and 95th percentiles (linear interpolation, numpy default / R type 7) and
the standardized mean-minus-median statistic (Cressie 1993, *Statistics for
Spatial Data*, rev. ed., sect. 2.2)::

    T = (mean - median) / sigma_hat,   sigma_hat = IQR / 1.349

For Gaussian data ``T`` has mean 0 and, as n grows, variance
``(pi/2 - 1) / n``, which gives the textbook ``u = T sqrt(n / (pi/2 - 1))``
flagged when ``|u| > 3``. That asymptote is badly wrong for small strips: the
robust scale in the denominator gives ``T`` heavy tails, and the rule flags
about 6 % of clean strips at n = 5 instead of 0.27 %.

Calibration. pointsift maps ``T`` through its own null distribution at the
strip's n, so that ``u`` is a *z-equivalent*: ``P(|u| > z) = P(|Z| > z)`` for
Gaussian data of any n, and ``|u| > 3`` flags 0.27 % of clean strips whatever
their size. The null distribution of ``|T|`` does not depend on the mean or
sd of the data (``T`` is location and scale invariant), only on n. It was
simulated once (:func:`build_null_table`, seed ``NULL_TABLE_SEED``; 10**6
Gaussian samples per n for n = 5..100, 5 x 10**5 for n = 101..200, 2 x 10**5
for n = 250, 300, 400, 500, 750, 1000, 1500, 2000) and its quantiles at the
two-sided Gaussian levels ``z = 0.25, 0.5, ..., 3.5`` are shipped in
:mod:`pointsift.methods._strips_null_table`; the calibration lives in
:mod:`pointsift.methods.strips_calibration`. Then

* ``|u|`` is the piecewise-linear interpolation of ``|T|`` between the
  tabulated quantiles (``|T| = 0`` maps to 0); beyond the ``z = 3.5`` quantile
  ``|u|`` grows in proportion to ``|T|`` (no tail calibration there; such a
  strip is flagged anyway); the sign of ``u`` is the sign of ``mean - median``;
* for n between tabulated sizes above 200, the scaled quantiles
  ``q sqrt(n)`` are interpolated linearly in ``1/n``; beyond n = 2000 they are
  interpolated between n = 2000 and the asymptote ``z sqrt(pi/2 - 1)`` at
  ``1/n = 0``. Above n = 200 the small difference between odd and even n is
  ignored.

A strip with fewer than ``min_n`` points (default 5, the smallest tabulated
size) is *too small to judge*, and so is a strip whose IQR is 0 (no spread
to scale by): ``u`` is NaN and ``flagged`` is False, with the reason in
``note``.

The *extreme value* of a strip is the point farthest from the strip median on
the side the mean leans to (the maximum when ``mean >= median``, else the
minimum); ties go to the lower row number. Its row (position in the input
arrays) is ``extreme_row``, so a screen can cite it as evidence when the strip
is flagged.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .strips_calibration import (  # re-exported: importable from here as before
    NULL_TABLE_SEED,
    TABLE_SIZES,
    Z_LEVELS,
    build_null_table,
    calibrate_u,
    null_abs_quantiles,
    simulate_mean_median_ratio,
)
from .summary import SIGMA_FROM_IQR

__all__ = [
    "StripResult",
    "strip_summary",
    "strip_width",
    "calibrate_u",
    "null_abs_quantiles",
    "simulate_mean_median_ratio",
    "build_null_table",
    "plot_strip_profiles",
    "flagged_strip_evidence",
    "DEFAULT_DIRECTIONS",
    "MIN_STRIP_N",
    "FLAG_U",
    "NULL_TABLE_SEED",
    "Z_LEVELS",
    "TABLE_SIZES",
]

#: West-east strips (direction 90) and south-north strips (direction 0).
DEFAULT_DIRECTIONS: tuple[float, ...] = (90.0, 0.0)
#: Smallest strip judged (and the smallest n in the calibration table).
MIN_STRIP_N = 5
#: A strip is flagged when ``|u|`` exceeds this (two-sided 0.27 %).
FLAG_U = 3.0

_NICE = np.array([1.0, 2.0, 2.5, 5.0, 10.0])


# --------------------------------------------------------------------------- strips


@dataclass(frozen=True)
class StripResult:
    """Strip tables of one or more strip families.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per strip and direction (empty strips between the first and
        last included, with ``n = 0``). Columns: ``direction``, ``strip``,
        ``n``, ``mean``, ``median``, ``sd``, ``min``, ``max``, ``p05``,
        ``p25``, ``p75``, ``p95``, ``iqr``, ``mean_minus_median``, ``u``,
        ``flagged``, ``note``, ``extreme_row``, ``extreme_value``,
        ``across_from``, ``across_to``, ``width`` and ``geometry`` (shapely
        polygon of the strip footprint, work-CRS coordinates).
        ``gpd.GeoDataFrame(table, geometry="geometry", crs=work_crs)`` makes
        it a layer.
    membership : pandas.DataFrame
        One row per input point, one int column per direction named
        ``strip_<direction>`` (e.g. ``strip_90``), ``-1`` for unusable points.
    widths : dict
        Strip width (metres) used for each direction.
    min_n : int
        Smallest strip judged.
    flag_u : float
        ``|u|`` above which a strip is flagged.
    """

    table: pd.DataFrame
    membership: pd.DataFrame
    widths: dict
    min_n: int
    flag_u: float

    @property
    def flagged(self) -> pd.DataFrame:
        """Rows of flagged strips."""
        return self.table[self.table["flagged"]]


def _normalise_direction(direction) -> float:
    try:
        value = float(direction)
    except (TypeError, ValueError):
        raise ConfigError(f"Strip direction {direction!r} is not a number; give an azimuth in degrees, e.g. 90.") from None
    if not math.isfinite(value):
        raise ConfigError(f"Strip direction {direction!r} is not a finite azimuth in degrees.")
    value = value % 180.0
    return 0.0 if math.isclose(value, 180.0) else value


def _axes(direction: float) -> tuple[np.ndarray, np.ndarray]:
    theta = math.radians(direction)
    along = np.array([math.sin(theta), math.cos(theta)])
    phi = math.radians((direction - 90.0) % 180.0)
    across = np.array([math.sin(phi), math.cos(phi)])
    # Exact zeros keep axis-aligned strips exactly axis-aligned.
    return np.where(np.abs(along) < 1e-15, 0.0, along), np.where(np.abs(across) < 1e-15, 0.0, across)


def _nice(width: float) -> float:
    exponent = math.floor(math.log10(width))
    mantissa = width / 10.0**exponent
    choice = _NICE[np.argmin(np.abs(np.log(_NICE / mantissa)))]
    return float(choice * 10.0**exponent)


def strip_width(x, y, direction: float = 90.0, target_per_strip: int = 25, max_strips: int = 100) -> float:
    """Default strip width for one direction, from the point density.

    Parameters
    ----------
    x, y : array_like of float
        Coordinates in metres (non-finite ones ignored).
    direction : float
        Azimuth along which the strips run (degrees).
    target_per_strip : int
        Points a strip should hold on average.
    max_strips : int
        Large layers get wider strips so that there are about this many at
        most (a readable layer and chart).

    Returns
    -------
    float
        ``across_extent * max(target_per_strip, n / max_strips) / n`` rounded
        to 1, 2, 2.5 or 5 times a power of ten; 1.0 when the points have no
        across extent.

    Examples
    --------
    >>> strip_width([0, 100, 200, 300], [0, 250, 500, 1000], direction=90, target_per_strip=2)
    500.0
    """
    if not (isinstance(target_per_strip, (int, np.integer)) and target_per_strip >= 1):
        raise ConfigError(f"target_per_strip must be a whole number of at least 1, got {target_per_strip!r}.")
    if not (isinstance(max_strips, (int, np.integer)) and max_strips >= 1):
        raise ConfigError(f"max_strips must be a whole number of at least 1, got {max_strips!r}.")
    xy = np.column_stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)])
    xy = xy[np.isfinite(xy).all(axis=1)]
    if xy.shape[0] == 0:
        raise InputError("No point with finite coordinates to lay strips over.")
    _, across = _axes(_normalise_direction(direction))
    s = xy @ across
    extent = float(s.max() - s.min())
    if not extent > 0:
        return 1.0
    n = xy.shape[0]
    per_strip = min(max(target_per_strip, n / max_strips), n)
    return _nice(extent * per_strip / n)


def _group_percentile(sorted_values: np.ndarray, starts: np.ndarray, counts: np.ndarray, p: float) -> np.ndarray:
    h = starts + (counts - 1) * p
    lo = np.floor(h).astype(np.intp)
    hi = np.ceil(h).astype(np.intp)
    return sorted_values[lo] + (h - lo) * (sorted_values[hi] - sorted_values[lo])


def _extremes(sl, sv, sr, starts, counts, vmin, vmax, median, diff):
    """Row and value of each strip's extreme: the max when the mean leans high, else the min; lowest row on ties.

    ``sl, sv, sr`` are the strip labels, values and rows sorted by (strip, value, row).
    """
    n_strips = counts.size
    has = counts > 0
    is_max_in_strip = has[sl] & (sv == vmax[sl])
    n_at_max = np.bincount(sl, weights=is_max_in_strip, minlength=n_strips).astype(np.int64)
    max_pos = starts + counts - n_at_max
    min_pos = starts
    use_max = np.where(diff == 0, (vmax - median) >= (median - vmin), diff > 0)
    pos = np.where(use_max, max_pos, min_pos)
    extreme_row = np.full(n_strips, -1, dtype=np.int64)
    extreme_value = np.full(n_strips, np.nan)
    extreme_row[has] = sr[pos[has]]
    extreme_value[has] = sv[pos[has]]
    return extreme_row, extreme_value


def _strip_polygons(along, across_from, across_to, width, along_axis, across_axis):
    """One rectangle per strip, spanning the points' extent along the strip."""
    from shapely import polygons

    a_lo, a_hi = float(along.min()), float(along.max())
    if a_hi - a_lo <= 0:
        a_lo, a_hi = a_lo - width / 2, a_hi + width / 2
    corners_a = np.array([a_lo, a_hi, a_hi, a_lo, a_lo])
    corner_s = np.stack([across_from, across_from, across_to, across_to, across_from], axis=1)
    ring = corners_a[None, :, None] * along_axis[None, None, :] + corner_s[:, :, None] * across_axis[None, None, :]
    return polygons(ring)


def _one_direction(xy, values, rows, direction, width, min_n, flag_u):
    along_axis, across_axis = _axes(direction)
    s = xy @ across_axis
    a = xy @ along_axis
    origin = math.floor(s.min() / width) * width
    label = np.floor((s - origin) / width).astype(np.int64)
    # (s - origin) can come out a hair below zero through rounding; that point belongs to strip 0.
    label = np.clip(label, 0, None)
    n_strips = int(label.max()) + 1

    order = np.lexsort((rows, values, label))
    sl, sv, sr = label[order], values[order], rows[order]
    counts = np.bincount(sl, minlength=n_strips)
    starts = np.r_[0, np.cumsum(counts)[:-1]]
    has = counts > 0
    nan = np.full(n_strips, np.nan)

    sums = np.bincount(sl, weights=sv, minlength=n_strips)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(has, sums / np.maximum(counts, 1), np.nan)
        dev2 = np.bincount(sl, weights=(sv - mean[sl]) ** 2, minlength=n_strips)
        sd = np.where(counts > 1, np.sqrt(dev2 / np.maximum(counts - 1, 1)), np.nan)
    s_idx, c_idx = starts[has], counts[has]

    def percentile(p):
        out = nan.copy()
        out[has] = _group_percentile(sv, s_idx, c_idx, p)
        return out

    median, p05, p25, p75, p95 = (percentile(p) for p in (0.5, 0.05, 0.25, 0.75, 0.95))
    vmin, vmax = nan.copy(), nan.copy()
    vmin[has] = sv[s_idx]
    vmax[has] = sv[s_idx + c_idx - 1]
    iqr = p75 - p25
    diff = mean - median

    judged = (counts >= min_n) & (iqr > 0)
    t = np.full(n_strips, np.nan)
    t[judged] = diff[judged] / (iqr[judged] / SIGMA_FROM_IQR)
    u = np.full(n_strips, np.nan)
    if judged.any():
        u[judged] = calibrate_u(t[judged], counts[judged])
    flagged = judged & (np.abs(u) > flag_u)
    note = np.full(n_strips, "", dtype=object)
    note[counts == 0] = "empty"
    note[(counts > 0) & (counts < min_n)] = f"too small to judge (n < {min_n})"
    note[(counts >= min_n) & ~(iqr > 0)] = "too small to judge (no spread: IQR 0)"

    extreme_row, extreme_value = _extremes(sl, sv, sr, starts, counts, vmin, vmax, median, diff)
    across_from = origin + width * np.arange(n_strips)
    across_to = across_from + width
    geometry = _strip_polygons(a, across_from, across_to, width, along_axis, across_axis)

    table = pd.DataFrame(
        {
            "direction": np.full(n_strips, direction),
            "strip": np.arange(n_strips, dtype=np.int64),
            "n": counts.astype(np.int64),
            "mean": mean,
            "median": median,
            "sd": sd,
            "min": vmin,
            "max": vmax,
            "p05": p05,
            "p25": p25,
            "p75": p75,
            "p95": p95,
            "iqr": iqr,
            "mean_minus_median": diff,
            "u": u,
            "flagged": flagged,
            "note": note.astype(str),
            "extreme_row": extreme_row,
            "extreme_value": extreme_value,
            "across_from": across_from,
            "across_to": across_to,
            "width": np.full(n_strips, width),
            "geometry": geometry,
        }
    )
    return table, label


def strip_summary(
    x,
    y,
    values,
    directions=DEFAULT_DIRECTIONS,
    width: float | None = None,
    *,
    min_n: int = MIN_STRIP_N,
    target_per_strip: int = 25,
    max_strips: int = 100,
    flag_u: float = FLAG_U,
) -> StripResult:
    """Summarise values in parallel strips and flag strips whose mean and median disagree.

    Parameters
    ----------
    x, y : array_like of float, shape (n,)
        Coordinates in metres (work CRS). A point with a non-finite x, y or
        value is unusable and belongs to no strip.
    values : array_like of float, shape (n,)
        Measured values.
    directions : sequence of float
        Strip families: the azimuth (degrees) along which strips run; 90 for
        west-east strips, 0 for south-north strips. Taken modulo 180.
    width : float, optional
        Strip width in metres for every direction; from the point density
        (:func:`strip_width`) when omitted.
    min_n : int
        Strips with fewer points are too small to judge (at least 5).
    target_per_strip : int
        Average points per strip aimed at by the default width.
    max_strips : int
        The default width keeps the number of strips per family near or
        below this for large layers.
    flag_u : float
        Flag strips with ``|u|`` above this.

    Returns
    -------
    StripResult

    Raises
    ------
    InputError
        When the arrays differ in length or no point is usable.
    ConfigError
        For a bad direction, width or ``min_n``.
    """
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    v = np.asarray(values, dtype=float).ravel()
    if not (x.shape == y.shape == v.shape):
        raise InputError(f"x, y and values must have one entry per point; got {x.size}, {y.size} and {v.size}.")
    if not (isinstance(min_n, (int, np.integer)) and min_n >= MIN_STRIP_N):
        raise ConfigError(
            f"min_n must be a whole number of at least {MIN_STRIP_N} (the smallest calibrated strip), got {min_n!r}."
        )
    if width is not None and not (isinstance(width, (int, float)) and math.isfinite(width) and width > 0):
        raise ConfigError(f"Strip width must be a positive length in metres, got {width!r}.")
    if not (isinstance(flag_u, (int, float)) and flag_u > 0):
        raise ConfigError(f"flag_u must be a positive number, got {flag_u!r}.")
    dirs = [_normalise_direction(d) for d in (directions if np.ndim(directions) else [directions])]
    if not dirs:
        raise ConfigError("Give at least one strip direction, e.g. directions=(90, 0).")
    if len(set(dirs)) != len(dirs):
        raise ConfigError(f"Strip directions {list(directions)!r} repeat one family (azimuths are taken modulo 180).")
    usable = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    if not usable.any():
        raise InputError("No usable point (finite x, y and value) to lay strips over.")
    rows = np.flatnonzero(usable)
    xy = np.column_stack([x[usable], y[usable]])
    vals = v[usable]

    tables, membership, widths = [], {}, {}
    for direction in dirs:
        w = float(width) if width is not None else strip_width(xy[:, 0], xy[:, 1], direction, target_per_strip, max_strips)
        table, label = _one_direction(xy, vals, rows, direction, w, int(min_n), float(flag_u))
        tables.append(table)
        column = np.full(x.size, -1, dtype=np.int64)
        column[rows] = label
        membership[f"strip_{direction:g}"] = column
        widths[direction] = w
    return StripResult(
        table=pd.concat(tables, ignore_index=True),
        membership=pd.DataFrame(membership),
        widths=widths,
        min_n=int(min_n),
        flag_u=float(flag_u),
    )


def flagged_strip_evidence(result: StripResult, n_points: int, *, of: str = "") -> np.ndarray:
    """Evidence text for the points that are the extreme value of a flagged strip.

    Parameters
    ----------
    result : StripResult
        From :func:`strip_summary`.
    n_points : int
        Number of input points (rows).

    Returns
    -------
    ndarray of str, shape (n_points,)
        ``""`` for most points; for an extreme value of a flagged strip e.g.
        ``"extreme value of west-east strip 3, whose mean (379.9) is far from
        its median (260; u = +4.03, n = 18)"``; several families are joined
        with ``"; "``.
    """
    out = np.full(n_points, "", dtype=object)
    for row in result.flagged.itertuples(index=False):
        text = (
            f"extreme value of {direction_words(float(row.direction), 'strip')} {row.strip}, whose mean{of} ({row.mean:.4g}) "
            f"is far from its median ({row.median:.4g}; u = {row.u:+.2f}, n = {row.n})"
        )
        position = int(row.extreme_row)
        out[position] = f"{out[position]}; {text}" if out[position] else text
    return out.astype(str)


def plot_strip_profiles(table: pd.DataFrame, *, label: str = "value", flag_u: float = FLAG_U):
    """Strip means and medians along each strip family (one panel per direction).

    Parameters
    ----------
    table : pandas.DataFrame
        ``StripResult.table``.
    label : str
        Axis label for the values (the value column name).
    flag_u : float
        The ``|u|`` threshold the table was flagged with (legend text).

    Returns
    -------
    matplotlib.figure.Figure
        The 5-95 % band shaded, flagged strips ringed in red, strips too small
        to judge drawn hollow.
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    directions = list(dict.fromkeys(table["direction"]))
    fig = Figure(figsize=(7.0, 3.0 * max(1, len(directions))), layout="constrained")
    axes = fig.subplots(len(directions), 1, squeeze=False)[:, 0]
    for ax, direction in zip(axes, directions):
        part = table[table["direction"] == direction]
        centre = ((part["across_from"] + part["across_to"]) / 2.0).to_numpy()
        origin = float(part["across_from"].min())
        pos = (centre - origin) / 1000.0
        judged = part["u"].notna().to_numpy()
        ax.fill_between(pos, part["p05"], part["p95"], color="#dddddd", label="5-95 %", step=None)
        ax.plot(pos, part["mean"], color="#1f5fa8", lw=1, label="mean")
        ax.plot(pos, part["median"], color="#d9822b", lw=1, ls="--", label="median")
        ax.scatter(pos[judged], part["mean"][judged], color="#1f5fa8", s=14, zorder=3)
        ax.scatter(pos[~judged], part["mean"][~judged], facecolor="white", edgecolor="#1f5fa8", s=14, zorder=3)
        flagged = part["flagged"].to_numpy()
        if flagged.any():
            ax.scatter(pos[flagged], part["mean"][flagged], facecolor="none", edgecolor="#c0392b", s=90, lw=1.5,
                       zorder=4, label=f"|u| > {flag_u:g}")
        ax.set_title(f"{direction_words(float(direction), 'strips')} (width {float(part['width'].iloc[0]):g} m)", fontsize=10)
        ax.set_xlabel("across position of strip centre (km from first strip edge)")
        ax.set_ylabel(label)
        ax.legend(fontsize=8, loc="best")
    return fig
