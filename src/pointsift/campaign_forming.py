"""Campaigns from dates or labels, one representative reading per well and campaign.

The rule (``campaign_window``)
------------------------------
``"spring=1-6,fall=7-12"`` (the default) names windows of months; a reading
belongs to the window holding its month, labelled ``YEAR-NAME`` (for example
``2018-fall``). A window may wrap the year end (``"winter=11-2"``): it takes
the year of its first month (a reading of January 2019 is in
``2018-winter``). ``"year"`` makes one campaign per calendar year, ``"month"``
one per month (``2018-03``). Windows must not overlap; months outside every
window leave their readings unscreened, with the reason.

Campaigns are ordered in time (by year, then by the window's first month).
With a label column (``campaign``) instead, campaigns are ordered by the
median date of their readings when dates are given, else as given
(``campaign_order``), else by the labels sorted as text.

One reading per well per campaign
---------------------------------
The reading that represents a well in a campaign is the one with a usable
value closest to the middle of the window (with a label column: to the
campaign's median date; without dates: the first in input order); ties go
to the earlier row. Every other reading of that well in that campaign is
kept, unscreened, with a reason naming the campaign and the representative
reading.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .errors import ConfigError, InputError

__all__ = ["CampaignWindows", "parse_campaign_window", "assign_campaigns", "Campaigns", "choose_representatives"]


@dataclass(frozen=True)
class CampaignWindows:
    """Parsed ``campaign_window`` rule.

    Attributes
    ----------
    kind : {"windows", "year", "month"}
        How campaigns are made.
    windows : tuple of (name, first_month, last_month)
        For ``"windows"``, in the order given.
    """

    kind: str
    windows: tuple[tuple[str, int, int], ...] = ()

    @property
    def per_year(self) -> int:
        """Campaigns per year."""
        return {"year": 1, "month": 12}.get(self.kind, len(self.windows))


def parse_campaign_window(text: str) -> CampaignWindows:
    """Parse a campaign window rule.

    Parameters
    ----------
    text : str
        ``"year"``, ``"month"`` or ``"NAME=M-M,NAME=M-M,..."`` (months 1-12).

    Returns
    -------
    CampaignWindows

    Examples
    --------
    >>> parse_campaign_window("spring=1-6,fall=7-12").windows
    (('spring', 1, 6), ('fall', 7, 12))
    """
    text = str(text).strip().lower()
    if text in ("year", "month"):
        return CampaignWindows(text)
    windows = []
    taken: dict[int, str] = {}
    for part in text.split(","):
        match = re.fullmatch(r"\s*([a-z][a-z0-9_]*)\s*=\s*(\d{1,2})\s*-\s*(\d{1,2})\s*", part)
        if not match:
            raise ConfigError(
                f"campaign window {part.strip()!r} is not NAME=FIRST-LAST (months 1-12). "
                "Write for example --campaign-window spring=1-6,fall=7-12, or 'year' or 'month'."
            )
        name, first, last = match.group(1), int(match.group(2)), int(match.group(3))
        if not (1 <= first <= 12 and 1 <= last <= 12):
            raise ConfigError(f"campaign window {part.strip()!r}: months must be 1 to 12.")
        months = list(range(first, last + 1)) if first <= last else list(range(first, 13)) + list(range(1, last + 1))
        for m in months:
            if m in taken:
                raise ConfigError(f"campaign windows {taken[m]!r} and {name!r} both hold month {m}; windows must not overlap.")
            taken[m] = name
        windows.append((name, first, last))
    if len({w[0] for w in windows}) != len(windows):
        raise ConfigError("campaign window names must differ (for example spring=1-6,fall=7-12).")
    return CampaignWindows("windows", tuple(windows))


@dataclass(frozen=True)
class Campaigns:
    """Campaign of every row.

    Attributes
    ----------
    code : ndarray of int
        Campaign number per row, in time order (-1 where the row has none).
    labels : tuple of str
        Label of each campaign number.
    reason : ndarray of object
        Why a row has no campaign ("" otherwise).
    target : ndarray of float
        Per row: the time (days since 1970) a representative reading should be
        closest to (NaN without dates).
    days : ndarray of float
        Per row: the reading's date in days since 1970 (NaN without dates).
    season : tuple of str
        Season name of each campaign ("" for year campaigns).
    year : tuple of int
        Year of each campaign (0 when unknown).
    decimal_year : ndarray of float
        Per campaign: its middle, in decimal years (NaN when unknown).
    """

    code: np.ndarray
    labels: tuple[str, ...]
    reason: np.ndarray
    target: np.ndarray
    days: np.ndarray
    season: tuple[str, ...]
    year: tuple[int, ...]
    decimal_year: np.ndarray


def _parse_dates(column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Dates as days since 1970 (NaN where unreadable) and a reason per row."""
    if pd.api.types.is_datetime64_any_dtype(column.dtype):
        parsed = column
    else:
        parsed = pd.to_datetime(column.astype("object"), errors="coerce", utc=True, format="mixed")
    if getattr(parsed.dt, "tz", None) is not None:
        parsed = parsed.dt.tz_convert("UTC").dt.tz_localize(None)
    days = (parsed - pd.Timestamp("1970-01-01")).dt.total_seconds().to_numpy(dtype=float, na_value=np.nan) / 86400.0
    reason = np.full(len(column), "", dtype=object)
    for row in np.flatnonzero(~np.isfinite(days)):
        raw = column.iloc[row]
        reason[row] = "no date" if raw is None or (isinstance(raw, float) and np.isnan(raw)) or raw is pd.NaT else f"date {str(raw)[:30]!r} is not a date"
    return days, reason


def _decimal_year(days: np.ndarray) -> np.ndarray:
    return 1970.0 + np.asarray(days, dtype=float) / 365.2425


def assign_campaigns(
    frame: pd.DataFrame,
    *,
    date: str | None,
    campaign: str | None,
    window: CampaignWindows,
    campaign_order: list | None = None,
) -> Campaigns:
    """Campaign of each row, by the documented rule (module docstring).

    Parameters
    ----------
    frame : pandas.DataFrame
        The readings.
    date : str or None
        Date column.
    campaign : str or None
        Campaign label column (takes precedence over windows).
    window : CampaignWindows
        The window rule (used with ``date`` when ``campaign`` is None).
    campaign_order : list, optional
        Labels in time order (several files, one per campaign).

    Returns
    -------
    Campaigns
    """
    n = len(frame)
    for name, what in ((date, "date"), (campaign, "campaign")):
        if name is not None and name not in frame.columns:
            raise InputError(f"The readings have no {what} column {name!r}. Columns present: {', '.join(map(str, frame.columns))}.")
    if date is None and campaign is None:
        raise ConfigError("Say when each reading was taken: pass --date COLUMN (campaigns from dates) or --campaign COLUMN (labels).")
    days, reason = _parse_dates(frame[date]) if date is not None else (np.full(n, np.nan), np.full(n, "", dtype=object))
    if campaign is not None:
        raw = frame[campaign]
        label = raw.astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v)).to_numpy(dtype=object)
        reason = np.where(label == "", "no campaign label", "").astype(object)
        present = sorted(set(label[label != ""]))
        if campaign_order is not None:
            order = [str(c) for c in campaign_order if str(c) in set(present)]
            order += [c for c in present if c not in set(order)]
        elif date is not None:
            medians = pd.Series(days).groupby(label).median()
            order = sorted(present, key=lambda c: (np.nan_to_num(medians.get(c, np.inf), nan=np.inf), c))
        else:
            order = present
        lookup = {c: i for i, c in enumerate(order)}
        code = np.array([lookup.get(c, -1) for c in label], dtype=np.int64)
        med = pd.Series(days).groupby(code).median()
        target = np.array([med.get(c, np.nan) if c >= 0 else np.nan for c in code], dtype=float)
        centre = np.array([med.get(i, np.nan) for i in range(len(order))], dtype=float)
        years = tuple(int(_decimal_year(c)) if np.isfinite(c) else 0 for c in centre)
        return Campaigns(code, tuple(order), reason, target, days, tuple("" for _ in order), years, _decimal_year(centre))

    stamp = pd.to_datetime(pd.Series(days), unit="D", errors="coerce")
    year = stamp.dt.year.to_numpy(dtype=float, na_value=np.nan)
    month = stamp.dt.month.to_numpy(dtype=float, na_value=np.nan)
    ok = np.isfinite(days)
    if window.kind == "year":
        key = np.where(ok, year, np.nan)
        names = {k: (f"{int(k)}", "", int(k), k + 0.5) for k in np.unique(key[ok])}
    elif window.kind == "month":
        key = np.where(ok, year * 12 + month - 1, np.nan)
        names = {k: (f"{int(k // 12)}-{int(k % 12) + 1:02d}", f"{int(k % 12) + 1:02d}", int(k // 12), k / 12 + 1 / 24) for k in np.unique(key[ok])}
    else:
        slot = np.full(n, -1)
        start_year = np.full(n, np.nan)
        for w, (_, first, last) in enumerate(window.windows):
            months = range(first, last + 1) if first <= last else list(range(first, 13)) + list(range(1, last + 1))
            inside = ok & np.isin(month, list(months))
            slot[inside] = w
            wraps = first > last
            start_year[inside] = np.where(wraps & (month[inside] < first), year[inside] - 1, year[inside])
        reason = np.where(ok & (slot < 0), [f"month {int(m) if np.isfinite(m) else '?'} is in no campaign window" for m in month], reason).astype(object)
        starts = np.array([w[1] for w in window.windows])
        lengths = np.array([(w[2] - w[1]) % 12 + 1 for w in window.windows])
        key = np.where(slot >= 0, start_year * 12 + starts[np.maximum(slot, 0)] - 1, np.nan)
        names = {}
        for k in np.unique(key[np.isfinite(key)]):
            w = int(np.flatnonzero(starts == int(k % 12) + 1)[0])
            names[k] = (f"{int(k // 12)}-{window.windows[w][0]}", window.windows[w][0], int(k // 12), k / 12 + lengths[w] / 24)
    order = sorted(names)
    lookup = {k: i for i, k in enumerate(order)}
    code = np.array([lookup.get(k, -1) if np.isfinite(k) else -1 for k in key], dtype=np.int64)
    middle = np.array([names[k][3] for k in order], dtype=float)  # decimal year of each campaign's middle
    target = np.where(code >= 0, (middle[np.maximum(code, 0)] - 1970.0) * 365.2425, np.nan)
    return Campaigns(
        code, tuple(names[k][0] for k in order), reason, target, days,
        tuple(names[k][1] for k in order), tuple(names[k][2] for k in order), middle,
    )


def choose_representatives(well: np.ndarray, campaigns: Campaigns, usable: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The reading that represents each well in each campaign.

    Parameters
    ----------
    well : ndarray of int
        Well number per row (-1 where unknown).
    campaigns : Campaigns
        From :func:`assign_campaigns`.
    usable : ndarray of bool
        Rows with a value and a location.

    Returns
    -------
    representative : ndarray of bool
        The chosen rows.
    represented_by : ndarray of int
        For every other usable row of a (well, campaign) pair: the chosen row
        (-1 elsewhere).
    """
    n = well.size
    candidate = usable & (well >= 0) & (campaigns.code >= 0)
    rows = np.flatnonzero(candidate)
    distance = np.abs(campaigns.days[rows] - campaigns.target[rows])
    distance = np.where(np.isfinite(distance), distance, 0.0)
    order = np.lexsort((rows, distance, campaigns.code[rows], well[rows]))
    ordered = rows[order]
    pair_w, pair_c = well[ordered], campaigns.code[ordered]
    first = np.ones(ordered.size, dtype=bool)
    first[1:] = (pair_w[1:] != pair_w[:-1]) | (pair_c[1:] != pair_c[:-1])
    representative = np.zeros(n, dtype=bool)
    representative[ordered[first]] = True
    group_first = ordered[first][np.cumsum(first) - 1]
    represented_by = np.full(n, -1, dtype=np.int64)
    represented_by[ordered[~first]] = group_first[~first]
    return representative, represented_by
