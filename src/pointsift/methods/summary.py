"""Global summary of the measured values, and how much the suspects move it.

Definitions (stated once here, repeated in ``docs/methods.md``):

* **Percentiles** are the linear-interpolation definition of Hyndman and Fan
  (1996), type 7: the p-th percentile of sorted values ``x[0..n-1]`` sits at
  position ``h = (n - 1) p`` and is ``x[floor h] + (h - floor h) (x[floor h + 1]
  - x[floor h])``. This is numpy's default (``method="linear"``) and R's
  default ``quantile(type = 7)``. The median is the 50th percentile.
* **Standard deviation and variance** use the ``n - 1`` denominator
  (``ddof=1``, the unbiased sample variance), as pandas does; numpy's default
  is ``n``.
* **IQR** is ``p75 - p25``. Two robust standard deviations are reported:
  ``IQR / 1.349`` and ``1.4826 * MAD`` with ``MAD = median(|x - median(x)|)``.
  Both constants make the estimate equal to sigma for Gaussian data
  (2 x 0.6745 = 1.349, 1 / 0.6745 = 1.4826).
* **Skewness** is the adjusted Fisher-Pearson coefficient
  ``G1 = sqrt(n (n - 1)) / (n - 2) * m3 / m2**1.5`` (Joanes and Gill 1998),
  the estimator of ``pandas.Series.skew`` and ``scipy.stats.skew(bias=False)``.
* **Kurtosis** is the adjusted *excess* kurtosis
  ``G2 = (n - 1) / ((n - 2)(n - 3)) * ((n + 1) g2 + 6)`` with
  ``g2 = m4 / m2**2 - 3`` (Joanes and Gill 1998), 0 for Gaussian data, the
  estimator of ``pandas.Series.kurt`` and
  ``scipy.stats.kurtosis(fisher=True, bias=False)``.

Non-finite values (NaN, inf) are left out and counted in ``n_missing``.

The histogram bin width follows Freedman and Diaconis (1981):
``2 IQR n**(-1/3)``, falling back to Scott's rule ``3.49 sd n**(-1/3)`` when the
IQR is zero, and to one bin when every value is equal; a width can be passed
instead.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

import numpy as np

from ..errors import InputError
from .robust import SIGMA_FROM_IQR, SIGMA_FROM_MAD

__all__ = [
    "Summary",
    "SummaryShift",
    "global_summary",
    "summary_shift",
    "histogram_bin_width",
    "plot_histogram",
    "histogram_edges",
    "SIGMA_FROM_IQR",
    "SIGMA_FROM_MAD",
]



@dataclass(frozen=True)
class Summary:
    """Summary figures of one set of values (see the module docstring for definitions).

    Attributes
    ----------
    n : int
        Number of finite values used.
    n_missing : int
        Non-finite values left out.
    mean, median, sd, variance : float
        ``sd`` and ``variance`` use the ``n - 1`` denominator.
    min, max, p05, p25, p75, p95 : float
        Percentiles by linear interpolation (numpy default, R type 7).
    iqr : float
        ``p75 - p25``.
    mad : float
        Median absolute deviation from the median (unscaled).
    robust_sd_iqr, robust_sd_mad : float
        ``iqr / 1.349`` and ``1.4826 * mad``.
    skewness : float
        Adjusted Fisher-Pearson G1 (NaN below 3 values or with no spread).
    kurtosis : float
        Adjusted excess kurtosis G2 (NaN below 4 values or with no spread).
    """

    n: int
    n_missing: int
    mean: float
    median: float
    sd: float
    variance: float
    min: float
    max: float
    p05: float
    p25: float
    p75: float
    p95: float
    iqr: float
    mad: float
    robust_sd_iqr: float
    robust_sd_mad: float
    skewness: float
    kurtosis: float

    def as_dict(self) -> dict:
        """The figures as a plain ``{name: value}`` dict, in field order."""
        return asdict(self)

    @classmethod
    def names(cls) -> tuple[str, ...]:
        """Field names in display order."""
        return tuple(f.name for f in fields(cls))


@dataclass(frozen=True)
class SummaryShift:
    """The summary with and without the suspect points, and the difference.

    Attributes
    ----------
    all : Summary
        Every finite value.
    without_suspects : Summary
        Finite values whose ``suspect_mask`` is False.
    n_suspects : int
        Finite values left out as suspects.
    mean_shift, sd_shift, median_shift : float
        ``without_suspects`` minus ``all``: how far dropping the suspects moves
        each figure (negative when dropping them lowers it).
    mean_shift_in_sd : float
        ``mean_shift`` divided by the sd of all values (NaN when that is 0).
    sd_shift_ratio : float
        ``without_suspects.sd / all.sd`` (NaN when ``all.sd`` is 0).
    """

    all: Summary
    without_suspects: Summary
    n_suspects: int
    mean_shift: float
    sd_shift: float
    median_shift: float
    mean_shift_in_sd: float
    sd_shift_ratio: float

    def table(self):
        """The two summaries side by side as a DataFrame (rows: figures)."""
        import pandas as pd

        return pd.DataFrame(
            {"all": self.all.as_dict(), "without_suspects": self.without_suspects.as_dict()}
        )


def _finite(values, name: str = "values") -> tuple[np.ndarray, int]:
    arr = np.asarray(values, dtype=float).ravel()
    finite = np.isfinite(arr)
    return arr[finite], int(arr.size - finite.sum())


def global_summary(values) -> Summary:
    """Summarise a set of measured values.

    Parameters
    ----------
    values : array_like of float
        The values; NaN and inf are left out and counted in ``n_missing``.

    Returns
    -------
    Summary
        All figures NaN when no finite value is left (``n == 0``).

    Examples
    --------
    >>> s = global_summary([1.0, 2.0, 3.0, 4.0, 100.0])
    >>> s.n, s.median, s.p25, s.iqr
    (5, 3.0, 2.0, 2.0)
    >>> round(s.sd, 4)  # n - 1 denominator
    43.6177
    """
    x, n_missing = _finite(values)
    n = x.size
    nan = math.nan
    if n == 0:
        return Summary(0, n_missing, *([nan] * 16))
    mean = float(x.mean())
    p05, p25, median, p75, p95 = (float(v) for v in np.percentile(x, [5, 25, 50, 75, 95]))
    variance = float(x.var(ddof=1)) if n > 1 else nan
    sd = math.sqrt(variance) if n > 1 else nan
    iqr = p75 - p25
    mad = float(np.median(np.abs(x - median)))
    dev = x - mean
    m2 = float(np.mean(dev**2))
    skewness = kurtosis = nan
    # Equal values have no shape; testing max > min avoids dividing by a rounding residue.
    if x.max() > x.min():
        m3 = float(np.mean(dev**3))
        m4 = float(np.mean(dev**4))
        if n >= 3:
            g1 = m3 / m2**1.5
            skewness = math.sqrt(n * (n - 1)) / (n - 2) * g1
        if n >= 4:
            g2 = m4 / m2**2 - 3.0
            kurtosis = (n - 1) / ((n - 2) * (n - 3)) * ((n + 1) * g2 + 6.0)
    return Summary(
        n=int(n),
        n_missing=n_missing,
        mean=mean,
        median=median,
        sd=sd,
        variance=variance,
        min=float(x.min()),
        max=float(x.max()),
        p05=p05,
        p25=p25,
        p75=p75,
        p95=p95,
        iqr=iqr,
        mad=mad,
        robust_sd_iqr=iqr / SIGMA_FROM_IQR,
        robust_sd_mad=SIGMA_FROM_MAD * mad,
        skewness=skewness,
        kurtosis=kurtosis,
    )


def summary_shift(values, suspect_mask) -> SummaryShift:
    """Summary with and without the suspect points, and the shift dropping them causes.

    Parameters
    ----------
    values : array_like of float, shape (n,)
        The values (non-finite ones are left out of both summaries).
    suspect_mask : array_like of bool, shape (n,)
        True for the points a screen called ``suspect``.

    Returns
    -------
    SummaryShift
        Shifts are ``without_suspects - all``.

    Raises
    ------
    InputError
        When ``suspect_mask`` does not have one entry per value.

    Examples
    --------
    >>> shift = summary_shift([1.0, 2.0, 3.0, 4.0, 100.0], [False, False, False, False, True])
    >>> shift.n_suspects, shift.mean_shift
    (1, -19.5)
    """
    x = np.asarray(values, dtype=float).ravel()
    mask = np.asarray(suspect_mask).ravel()
    if mask.shape != x.shape:
        raise InputError(
            f"suspect_mask has {mask.size} entries but there are {x.size} values; "
            "pass one True/False per value."
        )
    mask = mask.astype(bool)
    every = global_summary(x)
    kept = global_summary(x[~mask])
    n_suspects = int((mask & np.isfinite(x)).sum())
    mean_shift = kept.mean - every.mean
    sd_shift = kept.sd - every.sd
    return SummaryShift(
        all=every,
        without_suspects=kept,
        n_suspects=n_suspects,
        mean_shift=mean_shift,
        sd_shift=sd_shift,
        median_shift=kept.median - every.median,
        mean_shift_in_sd=mean_shift / every.sd if every.sd > 0 else math.nan,
        sd_shift_ratio=kept.sd / every.sd if every.sd > 0 else math.nan,
    )


def histogram_bin_width(values, bin_width: float | None = None) -> float:
    """Histogram bin width: Freedman-Diaconis unless one is given.

    Parameters
    ----------
    values : array_like of float
        The values (non-finite ones are ignored).
    bin_width : float, optional
        A width to use instead of the rule (must be positive).

    Returns
    -------
    float
        ``2 IQR n**(-1/3)`` (Freedman and Diaconis 1981); Scott's
        ``3.49 sd n**(-1/3)`` when the IQR is 0; 1.0 when every value is equal.

    Raises
    ------
    InputError
        When ``bin_width`` is not a positive number or there is no finite value.
    """
    if bin_width is not None:
        if not (isinstance(bin_width, (int, float)) and math.isfinite(bin_width) and bin_width > 0):
            raise InputError(f"bin_width must be a positive number, got {bin_width!r}.")
        return float(bin_width)
    x, _ = _finite(values)
    if x.size == 0:
        raise InputError("No finite value to draw a histogram of; check the value column.")
    cube_root = x.size ** (-1.0 / 3.0)
    p25, p75 = np.percentile(x, [25, 75])
    if p75 > p25:
        return float(2.0 * (p75 - p25) * cube_root)
    sd = float(x.std(ddof=1)) if x.size > 1 else 0.0
    if sd > 0:
        return float(3.49 * sd * cube_root)
    return 1.0


def histogram_edges(values, bin_width: float | None = None, max_bins: int = 200):
    """Bin edges of the histogram :func:`plot_histogram` draws.

    Parameters
    ----------
    values : array_like of float
        The values (non-finite ones are ignored; at least one is needed).
    bin_width : float, optional
        Bin width; Freedman-Diaconis (see :func:`histogram_bin_width`) when omitted.
    max_bins : int
        Bins are widened so there are at most this many.

    Returns
    -------
    edges : ndarray
        Bin edges, the last one at least the largest value.
    width : float
        The bin width used.
    rule : str
        How the width was chosen, in words.
    """
    x, _ = _finite(values)
    rule = "given" if bin_width is not None else "Freedman-Diaconis"
    width = histogram_bin_width(x, bin_width)
    lo, hi = float(x.min()), float(x.max())
    n_bins = max(1, int(math.ceil((hi - lo) / width)) if hi > lo else 1)
    if n_bins > max_bins:
        n_bins = max_bins
        width = (hi - lo) / n_bins
        rule += f", widened to {max_bins} bins"
    start = lo if hi > lo else lo - width / 2
    edges = start + width * np.arange(n_bins + 1)
    edges[-1] = max(edges[-1], hi)
    return edges, width, rule


def plot_histogram(values, bin_width: float | None = None, *, label: str = "value", max_bins: int = 200):
    """Histogram figure of the values with the bin width rule in the title.

    Parameters
    ----------
    values : array_like of float
        The values (non-finite ones are ignored).
    bin_width : float, optional
        Bin width; Freedman-Diaconis (see :func:`histogram_bin_width`) when omitted.
    label : str
        Axis label (the value column name).
    max_bins : int
        Bins are widened so there are at most this many (keeps a figure of a
        heavy-tailed layer drawable).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    x, _ = _finite(values)
    edges, width, rule = histogram_edges(x, bin_width, max_bins)
    fig = Figure(figsize=(6.4, 4.0), layout="constrained")
    ax = fig.add_subplot()
    ax.hist(x, bins=edges, color="#4c72b0", edgecolor="white")
    ax.set_xlabel(label)
    ax.set_ylabel("count")
    ax.set_title(f"{x.size} values, bin width {width:.4g} ({rule})", fontsize=10)
    return fig
