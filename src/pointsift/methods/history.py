"""A well's own history: robust rules over one series of repeated readings.

Every function takes the readings of **one** well, in campaign order, as plain
arrays and returns per-reading evidence; no I/O, no global state. The
orchestration (:mod:`pointsift.campaigns`) calls them once per well.

The series judged is the well's level *relative to its neighbours*: the
readings minus the neighbours' median anomaly at each campaign (each
neighbour's reading minus its own median), minus the well's own median per
season. A dry year that lowers the whole basin, and the usual spring/fall
swing, are thereby taken out, so what is left is the well's own behaviour.

Scales are robust (Hampel 1974; Rousseeuw and Croux 1993): the median, and
1.4826 x the median absolute deviation (MAD) of the changes between
consecutive readings, divided by sqrt(2) to be the spread of one reading
(the MAD of first differences, a standard robust noise estimate for series;
common practice). The rules:

* **spike** - one reading off and its neighbours in time back in agreement:
  the reading minus the mean of the readings before and after, in units of
  the reading spread x sqrt(1.5) (the standard deviation of that contrast
  for independent noise);
* **step** - the median of the next ``window`` readings differs from the
  median of the previous ``window`` and neither segment wanders: a jump that
  persists, as a changed reference point or datum gives;
* **copied record** - equal, to the last digit, to one of the well's
  ``copy_lookback`` earlier readings although the well's readings normally
  change by far more than their last digit;
* **constant series** - ``constant_run`` or more consecutive identical
  readings;
* **far outside the own range** - beyond the well's other readings and
  ``far_z`` robust sd (1.4826 MAD of the levels) from its median;
* **seasonal pattern broken** - in one year the two seasons' readings are
  ordered against the well's usual order by far (median and MAD of the
  yearly seasonal difference).

No rule judges a series of fewer than ``min_campaigns`` readings; each rule
that cannot judge says so. The level trend is the Theil-Sen slope (Theil 1950;
Sen 1968): the median of the slopes between all pairs of readings.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "SeriesStatistics",
    "HistoryEvidence",
    "series_statistics",
    "relative_series",
    "spike_rule",
    "step_rule",
    "copied_rule",
    "constant_rule",
    "range_rule",
    "seasonal_rule",
    "theil_sen",
    "history_screen",
    "last_digit",
    "pooled_sd",
]

_MAD_TO_SD = 1.482602218505602  # 1 / Phi^-1(3/4), common practice


@dataclass(frozen=True)
class SeriesStatistics:
    """Robust summary of one series.

    Attributes
    ----------
    n : int
        Readings with a value.
    median : float
        Median reading.
    level_sd : float
        1.4826 x MAD of the readings about their median.
    change_sd : float
        1.4826 x MAD of the changes between consecutive readings.
    reading_sd : float
        ``change_sd / sqrt(2)``: the spread of one reading about the series'
        local level.
    """

    n: int
    median: float
    level_sd: float
    change_sd: float
    reading_sd: float


def _mad_sd(a: np.ndarray) -> float:
    a = a[np.isfinite(a)]
    if a.size == 0:
        return float("nan")
    return float(_MAD_TO_SD * np.median(np.abs(a - np.median(a))))


def series_statistics(values: np.ndarray, floor: float = 0.0) -> SeriesStatistics:
    """Median, robust level spread and robust spread of the changes.

    Parameters
    ----------
    values : ndarray
        Readings in campaign order (NaN ignored).
    floor : float
        Smallest spread reported (the reading resolution), so a series with
        identical changes still has a usable scale.

    Returns
    -------
    SeriesStatistics

    Examples
    --------
    >>> s = series_statistics(np.array([10.0, 11.0, 10.0, 11.0, 10.0]))
    >>> s.median, round(s.change_sd, 4)
    (10.0, 1.4826)
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return SeriesStatistics(0, float("nan"), float("nan"), float("nan"), float("nan"))
    change_sd = _mad_sd(np.diff(v)) if v.size > 1 else float("nan")
    change_sd = max(change_sd, floor) if np.isfinite(change_sd) else change_sd
    return SeriesStatistics(
        n=int(v.size),
        median=float(np.median(v)),
        level_sd=max(_mad_sd(v), floor),
        change_sd=change_sd,
        reading_sd=change_sd / np.sqrt(2.0) if np.isfinite(change_sd) else float("nan"),
    )


def relative_series(values: np.ndarray, regional: np.ndarray | None = None, season: np.ndarray | None = None) -> np.ndarray:
    """The series the rules judge: readings minus the neighbours' shared movement and the well's seasonal medians.

    Parameters
    ----------
    values : ndarray
        Readings in campaign order.
    regional : ndarray, optional
        The neighbours' median anomaly at each reading's campaign (NaN where
        unknown: filled by linear interpolation over the positions in the
        series; when more than half is unknown no regional part is removed).
    season : ndarray, optional
        Season label per reading; each season with at least 3 readings has
        its own median removed.

    Returns
    -------
    ndarray
        Readings relative to the neighbours, centred on zero.
    """
    v = np.asarray(values, dtype=float)
    u = v.copy()
    if regional is not None:
        r = np.asarray(regional, dtype=float)
        known = np.isfinite(r)
        if known.sum() >= max(1, 0.5 * v.size):
            position = np.arange(v.size)
            filled = np.interp(position, position[known], r[known])
            u = v - filled
    if season is not None:
        season = np.asarray(season)
        for label in np.unique(season):
            members = (season == label) & np.isfinite(u)
            if members.sum() >= 3:
                u[members] -= np.median(u[members])
    finite = np.isfinite(u)
    if finite.any():
        u = u - np.median(u[finite])
    return u


def spike_rule(u: np.ndarray, reading_sd: float, *, threshold: float = 3.0) -> tuple[np.ndarray, np.ndarray]:
    """A single reading off and then back.

    Parameters
    ----------
    u : ndarray
        The relative series (:func:`relative_series`).
    reading_sd : float
        Spread of one reading (``SeriesStatistics.reading_sd`` of ``u``).
    threshold : float
        Size of the contrast, in its own sd, from which a reading is a spike.

    Returns
    -------
    z : ndarray
        Reading minus the mean of its two neighbours in time, over
        ``reading_sd * sqrt(1.5)`` (NaN at the ends).
    spike : ndarray of bool
        ``|z| >= threshold`` and the readings before and after agree with
        each other within half the deviation (the series came back).
    """
    u = np.asarray(u, dtype=float)
    n = u.size
    z = np.full(n, np.nan)
    spike = np.zeros(n, dtype=bool)
    if n < 3 or not np.isfinite(reading_sd) or reading_sd <= 0:
        return z, spike
    before, centre, after = u[:-2], u[1:-1], u[2:]
    deviation = centre - 0.5 * (before + after)
    z[1:-1] = deviation / (reading_sd * np.sqrt(1.5))
    with np.errstate(invalid="ignore"):
        back = np.abs(after - before) <= 0.5 * np.abs(deviation)
        spike[1:-1] = (np.abs(z[1:-1]) >= threshold) & back
    return z, spike


def step_rule(u: np.ndarray, reading_sd: float, *, window: int = 3, threshold: float = 3.5) -> tuple[np.ndarray, np.ndarray]:
    """A jump that persists: the level after differs from the level before.

    Parameters
    ----------
    u : ndarray
        The relative series.
    reading_sd : float
        Spread of one reading.
    window : int
        Readings on each side compared (the step must last this long).
    threshold : float
        Size of the shift, in typical changes, from which a step is named.

    Returns
    -------
    z : ndarray
        Shift at each reading (median of ``u[i:i+window]`` minus median of
        ``u[i-window:i]``) in units of the well's typical change between
        consecutive readings (``reading_sd * sqrt(2)``): a step is a jump
        several times larger than the well usually moves from one campaign
        to the next, which a slow drift (a random walk) rarely makes; NaN
        where a side is short.
    step : ndarray of bool
        The reading where a step starts: ``|z| >= threshold``, the largest
        ``|z|`` within ``window`` readings, and each side steady (no reading
        of a side farther than half the shift from its median).
    """
    u = np.asarray(u, dtype=float)
    n = u.size
    z = np.full(n, np.nan)
    step = np.zeros(n, dtype=bool)
    if n < 2 * window or not np.isfinite(reading_sd) or reading_sd <= 0:
        return z, step
    from numpy.lib.stride_tricks import sliding_window_view

    segments = sliding_window_view(u, window)  # segments[j] = u[j:j+window]
    medians = np.median(segments, axis=1)
    spread = np.max(np.abs(segments - medians[:, None]), axis=1)
    i = np.arange(window, n - window + 1)
    shift = medians[i] - medians[i - window]
    z[i] = shift / (reading_sd * np.sqrt(2.0))
    steady = (spread[i] <= 0.5 * np.abs(shift)) & (spread[i - window] <= 0.5 * np.abs(shift))
    candidate = np.zeros(n)
    candidate[i] = np.where(steady & np.isfinite(z[i]), np.abs(z[i]), 0.0)
    for row in i:
        if candidate[row] >= threshold:
            lo, hi = max(0, row - window + 1), min(n, row + window)
            step[row] = candidate[row] >= candidate[lo:hi].max()
    return z, step


def last_digit(values: np.ndarray) -> float:
    """The reading resolution: the place of the last digit written (0.01 for 12.34 and 5.6).

    Examples
    --------
    >>> last_digit(np.array([12.34, 5.6, 7.0]))
    0.01
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    for decimals in range(0, 5):
        scaled = v * 10.0**decimals
        if np.all(np.abs(scaled - np.round(scaled)) < 1e-6 * np.maximum(1.0, np.abs(scaled))):
            return 10.0**-decimals
    return 1e-5


def copied_rule(values: np.ndarray, change_sd: float, *, lookback: int = 10, digits_apart: float = 20.0) -> np.ndarray:
    """Readings equal to an earlier reading of the well to the last digit.

    Parameters
    ----------
    values : ndarray
        Readings in campaign order.
    change_sd : float
        Robust spread of the well's changes.
    lookback : int
        Earlier readings compared.
    digits_apart : float
        The rule judges only when ``change_sd`` is at least this many times
        the reading resolution (:func:`last_digit`): otherwise equal
        readings are common by chance.

    Returns
    -------
    ndarray of int
        Position of the earlier reading copied (-1 for none). A reading in
        a run of identical consecutive readings is left to
        :func:`constant_rule`.
    """
    v = np.asarray(values, dtype=float)
    n = v.size
    source = np.full(n, -1, dtype=np.int64)
    resolution = last_digit(v)
    if n < 2 or not np.isfinite(change_sd) or change_sd < digits_apart * resolution:
        return source
    tolerance = 0.5 * resolution
    for i in range(1, n):
        if not np.isfinite(v[i]) or (abs(v[i] - v[i - 1]) < tolerance) or (i + 1 < n and abs(v[i + 1] - v[i]) < tolerance):
            continue
        lo = max(0, i - lookback)
        hits = np.flatnonzero(np.abs(v[lo:i] - v[i]) < tolerance)
        if hits.size:
            source[i] = lo + hits[-1]
    return source


def constant_rule(values: np.ndarray, *, run: int = 4) -> np.ndarray:
    """Length of the run of identical consecutive readings each reading is in (0 when shorter than ``run``).

    Examples
    --------
    >>> constant_rule(np.array([1.0, 2.0, 2.0, 2.0, 2.0, 3.0]))
    array([0, 4, 4, 4, 4, 0])
    """
    v = np.asarray(values, dtype=float)
    n = v.size
    out = np.zeros(n, dtype=np.int64)
    if n == 0:
        return out
    resolution = last_digit(v)
    new = np.ones(n, dtype=bool)
    new[1:] = ~(np.abs(np.diff(v)) < 0.5 * resolution)
    labels = np.cumsum(new)
    lengths = np.bincount(labels)[labels]
    return np.where(lengths >= run, lengths, 0)


def range_rule(u: np.ndarray, floor: float, *, far_z: float = 6.0) -> tuple[np.ndarray, np.ndarray]:
    """Readings far outside the well's own range.

    Parameters
    ----------
    u : ndarray
        The relative series.
    floor : float
        Smallest level spread used (the reading spread).
    far_z : float
        Robust sd from the median beyond which a reading is far outside.

    Returns
    -------
    z : ndarray
        ``u`` over the robust level spread.
    outside : ndarray of bool
        ``|z| >= far_z`` and beyond every other reading of the well.
    """
    u = np.asarray(u, dtype=float)
    n = u.size
    sd = max(_mad_sd(u), floor) if n else floor
    z = u / sd if sd > 0 else np.full(n, np.nan)
    outside = np.zeros(n, dtype=bool)
    if n < 3 or not sd > 0:
        return z, outside
    order = np.sort(u)
    for i in np.flatnonzero(np.abs(z) >= far_z):
        others_max = order[-2] if u[i] == order[-1] else order[-1]
        others_min = order[1] if u[i] == order[0] else order[0]
        outside[i] = u[i] > others_max if u[i] > 0 else u[i] < others_min
    return z, outside


def seasonal_rule(values: np.ndarray, year: np.ndarray, season: np.ndarray, *, threshold: float = 3.5, min_years: int = 5) -> dict:
    """Years whose two seasons are ordered against the well's usual order, by far.

    Parameters
    ----------
    values : ndarray
        Readings.
    year : ndarray of int
        Year of each reading's campaign.
    season : ndarray
        Season label of each reading; the two most common labels are
        compared, the one seen first minus the other.
    threshold : float
        Distance of a year's seasonal difference from the usual one, in
        robust sd, from which the pattern is broken.
    min_years : int
        Years with both seasons needed to know the usual order.

    Returns
    -------
    dict
        ``broken`` (bool per reading), ``difference`` (the year's first minus
        second season, per reading), ``usual`` (median difference),
        ``years`` (years with both seasons), ``seasons`` (the two labels).
    """
    v = np.asarray(values, dtype=float)
    n = v.size
    out = {"broken": np.zeros(n, dtype=bool), "difference": np.full(n, np.nan), "usual": np.nan, "years": 0, "seasons": ()}
    labels, first_seen, counts = np.unique(np.asarray(season), return_index=True, return_counts=True)
    if labels.size < 2:
        return out
    # the two most common seasons, in the order they first appear (spring before fall)
    first, second = sorted(labels[np.lexsort((first_seen, -counts))[:2]], key=lambda s: first_seen[labels == s][0])
    year = np.asarray(year)
    a = {y: i for i, (y, s) in enumerate(zip(year, season)) if s == first}
    b = {y: i for i, (y, s) in enumerate(zip(year, season)) if s == second}
    years = sorted(set(a) & set(b))
    out["seasons"] = (str(first), str(second))
    out["years"] = len(years)
    if len(years) < min_years:
        return out
    d = np.array([v[a[y]] - v[b[y]] for y in years])
    usual = float(np.median(d))
    sd = _mad_sd(d)
    out["usual"] = usual
    for y, dy in zip(years, d):
        out["difference"][[a[y], b[y]]] = dy
        clear = sd > 0 and abs(usual) >= 2.0 * sd
        if clear and np.sign(dy) != np.sign(usual) and abs(dy - usual) >= threshold * sd:
            out["broken"][[a[y], b[y]]] = True
    return out


def theil_sen(t: np.ndarray, values: np.ndarray) -> tuple[float, float]:
    """Theil-Sen slope and intercept (Theil 1950; Sen 1968).

    The slope is the median of the slopes between all pairs of readings at
    different times; the intercept is ``median(values) - slope *
    median(t)`` (the same convention as ``scipy.stats.theilslopes``'
    default ``method="separate"``).

    Parameters
    ----------
    t : ndarray
        Times (for example decimal years).
    values : ndarray
        Readings (NaN pairs are left out).

    Returns
    -------
    (slope, intercept) : tuple of float
        NaN when fewer than two distinct times.

    Examples
    --------
    >>> theil_sen(np.arange(5.0), np.array([1.0, 3.0, 5.0, 7.0, 100.0]))
    (2.0, 1.0)
    """
    t = np.asarray(t, dtype=float)
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(t) & np.isfinite(v)
    t, v = t[ok], v[ok]
    if t.size < 2:
        return float("nan"), float("nan")
    i, j = np.triu_indices(t.size, k=1)
    dt = t[j] - t[i]
    keep = dt != 0
    if not keep.any():
        return float("nan"), float("nan")
    slope = float(np.median((v[j] - v[i])[keep] / dt[keep]))
    return slope, float(np.median(v) - slope * np.median(t))


def pooled_sd(own: float, own_df: float, prior: float | None, prior_df: float) -> float:
    """Pool a series' own spread with a programme-wide one, like variances weighted by degrees of freedom.

    Examples
    --------
    >>> round(pooled_sd(1.0, 8, 2.0, 8), 4)
    1.5811
    """
    if prior is None or not np.isfinite(prior) or prior <= 0:
        return own
    if not np.isfinite(own):
        return float(prior)
    return float(np.sqrt((own_df * own * own + prior_df * prior * prior) / (own_df + prior_df)))


@dataclass(frozen=True)
class HistoryEvidence:
    """Per-reading output of :func:`history_screen` for one well.

    Attributes
    ----------
    judged : bool
        The series was long enough (``min_campaigns``).
    relative : ndarray
        The relative series judged.
    stats : SeriesStatistics
        Of the relative series.
    spike_z, step_z, range_z : ndarray
        The rules' statistics.
    spike, step, outside, broken_season : ndarray of bool
        The rules that fired.
    copied_from : ndarray of int
        Position copied (-1 for none).
    constant_run : ndarray of int
        Length of the run of identical readings (0 for none).
    seasonal : dict
        From :func:`seasonal_rule`.
    """

    judged: bool
    relative: np.ndarray
    stats: SeriesStatistics
    spike_z: np.ndarray
    spike: np.ndarray
    step_z: np.ndarray
    step: np.ndarray
    range_z: np.ndarray
    outside: np.ndarray
    copied_from: np.ndarray
    constant_run: np.ndarray
    broken_season: np.ndarray
    seasonal: dict


def history_screen(
    values: np.ndarray,
    *,
    regional: np.ndarray | None = None,
    season: np.ndarray | None = None,
    year: np.ndarray | None = None,
    min_campaigns: int = 6,
    review_z: float = 3.0,
    suspect_z: float = 3.5,
    far_z: float = 6.0,
    step_window: int = 3,
    constant_run: int = 4,
    copy_lookback: int = 10,
    floor: float | None = None,
    prior_sd: float | None = None,
    prior_df: float = 8.0,
) -> HistoryEvidence:
    """Run every history rule on one well's series.

    Parameters
    ----------
    values : ndarray
        The well's readings (one per campaign, in campaign order, no NaN).
    regional : ndarray, optional
        Neighbours' median anomaly per reading (see :func:`relative_series`).
    season, year : ndarray, optional
        Season label and year of each reading's campaign (for the seasonal
        rule and the seasonal medians).
    min_campaigns : int
        Fewer readings: nothing is judged (``judged`` False).
    review_z, suspect_z, far_z : float
        Thresholds (spike from ``review_z``, step from ``suspect_z``, range
        from ``far_z``).
    step_window, constant_run, copy_lookback : int
        Rule settings.
    floor : float, optional
        Smallest spread (default: the reading resolution).
    prior_sd, prior_df : float, optional
        A programme-wide reading spread and its weight: the well's own
        spread (with ``n - 1`` degrees of freedom) is pooled with it like a
        variance (:func:`pooled_sd`), because a MAD of a dozen changes is too
        noisy a scale on its own. The level spread of the range rule is at
        least twice the pooled reading spread.

    Returns
    -------
    HistoryEvidence
    """
    v = np.asarray(values, dtype=float)
    n = v.size
    none_b = np.zeros(n, dtype=bool)
    none_f = np.full(n, np.nan)
    floor = last_digit(v) if floor is None else floor
    if n < min_campaigns:
        stats = series_statistics(v, floor)
        return HistoryEvidence(False, none_f.copy(), stats, none_f, none_b, none_f, none_b, none_f, none_b,
                               np.full(n, -1, dtype=np.int64), np.zeros(n, dtype=np.int64), none_b, {})
    u = relative_series(v, regional, season)
    stats = series_statistics(u, floor)
    raw = series_statistics(v, floor)
    reading_sd = pooled_sd(stats.reading_sd, n - 1, prior_sd, prior_df)
    stats = SeriesStatistics(stats.n, stats.median, max(stats.level_sd, 2.0 * reading_sd), reading_sd * np.sqrt(2.0), reading_sd)
    spike_z, spike = spike_rule(u, stats.reading_sd, threshold=review_z)
    step_z, step = step_rule(u, stats.reading_sd, window=step_window, threshold=suspect_z)
    # the range is judged with each step taken out: the readings before a step are not out of range
    levelled = u.copy()
    for position in np.flatnonzero(step):
        lo = max(0, position - step_window)
        levelled[position:] -= np.median(u[position:position + step_window]) - np.median(u[lo:position])
    range_z, outside = range_rule(levelled - np.median(levelled), stats.level_sd, far_z=far_z)
    copied = copied_rule(v, raw.change_sd, lookback=copy_lookback)
    constant = constant_rule(v, run=constant_run)
    if season is not None and year is not None:
        seasonal = seasonal_rule(v, year, season, threshold=suspect_z)
        broken = seasonal["broken"]
    else:
        seasonal, broken = {}, none_b
    return HistoryEvidence(True, u, stats, spike_z, spike, step_z, step, range_z, outside, copied, constant, broken, seasonal)
