"""Charts of the report drawn from the findings' numbers: histogram, strips, lag-pair panels, variogram.

Each function takes the plain record of :class:`pointsift.findings.Findings`
(and the arrays of its ``drawing``), computes nothing of its own and returns
a :class:`matplotlib.figure.Figure` 5.2 inches wide with 9-10 point
text, so a figure shrunk to a phone's width stays readable. Every axis names
its unit: values in the units of the value column, separations in m or km.
"""

from __future__ import annotations

import math

import numpy as np

from ..vocabulary import direction_words
from .figures import WIDTH, new_figure
from .numbers import format_length, format_number, plural

__all__ = ["plot_histogram", "plot_strip_profiles", "plot_lag_panels", "plot_variogram",
           "value_axis"]

_BAR = "#4c7fb0"
_FLAG = "#D55E00"

def value_axis(label: str, detrended: bool = False) -> str:
    """Axis title for values: the column name and that its unit is the data's own."""
    return f"{label}{', trend removed' if detrended else ''} (units of the data)"


def _distance_axis(top_m: float) -> tuple[float, str]:
    return (1000.0, "km") if top_m >= 2000.0 else (1.0, "m")


def _people_ticks(ax, axis: str = "both") -> None:
    from matplotlib.ticker import FuncFormatter

    formatter = FuncFormatter(lambda v, _pos: format_number(float(v)))
    if axis in ("x", "both"):
        ax.xaxis.set_major_formatter(formatter)
    if axis in ("y", "both"):
        ax.yaxis.set_major_formatter(formatter)


def plot_histogram(hist: dict, *, label: str):
    """Histogram of the values within the far fences; the far values as LO and HI notes at the ends."""
    edges = np.asarray(hist["edges"], dtype=float)
    counts = np.asarray(hist["counts"], dtype=float)
    fig = new_figure(WIDTH, 3.4)
    ax = fig.add_subplot()
    ax.bar(edges[:-1], counts, width=np.diff(edges), align="edge", color=_BAR, edgecolor="white", linewidth=0.5)
    ax.set_xlabel(value_axis(label))
    ax.set_ylabel("number of values")
    _people_ticks(ax)
    box = {"boxstyle": "round,pad=0.3", "fc": "#fff3e0", "ec": _FLAG}
    for side, key, x, ha in (("LO", "low", 0.01, "left"), ("HI", "high", 0.99, "right")):
        far = hist[key]
        if far["n"]:
            shown = ", ".join(format_number(v) for v in far["values"][:3]) + (", ..." if far["n"] > 3 else "")
            ax.text(x, 0.97, f"{side}: {plural(far['n'], 'far value')}\n{shown}", transform=ax.transAxes, ha=ha,
                    va="top", fontsize=8.5, color="#7a2a00", bbox=box)
    ax.set_title(f"bin width {format_number(hist['bin_width'])} ({hist['rule']})", fontsize=10)
    return fig


def plot_strip_profiles(strips: dict, *, label: str):
    """Strip means and medians across the area, one panel per strip family, flagged strips ringed."""
    rows = strips["rows"]
    directions = list(dict.fromkeys(r["direction"] for r in rows))
    fig = new_figure(WIDTH, 2.8 * max(1, len(directions)) + 0.3)
    axes = fig.subplots(max(1, len(directions)), 1, squeeze=False)[:, 0]
    for ax, direction in zip(axes, directions):
        part = [r for r in rows if r["direction"] == direction]
        origin = min(r["across_from"] for r in part)
        pos = np.array([((r["across_from"] + r["across_to"]) / 2.0 - origin) / 1000.0 for r in part])
        get = lambda key: np.array([np.nan if r[key] is None else r[key] for r in part], dtype=float)  # noqa: E731
        mean, median = get("mean"), get("median")
        ax.fill_between(pos, get("p05"), get("p95"), color="#e3e6ea", label="5-95 %")
        ax.plot(pos, mean, color="#0072B2", lw=1.2, marker="o", ms=3, label="mean")
        ax.plot(pos, median, color="#E69F00", lw=1.2, ls="--", label="median")
        flagged = np.array([bool(r["flagged"]) for r in part])
        if flagged.any():
            ax.scatter(pos[flagged], mean[flagged], facecolor="none", edgecolor=_FLAG, s=110, lw=1.6, zorder=4,
                       label=f"|u| > {format_number(strips['flag_u'])}")
        width = part[0]["width"]
        ax.set_title(f"{direction_words(direction)} strips, {format_length(width)} wide", fontsize=10)
        ax.set_xlabel("strip centre across the area (km from the first strip's edge)")
        ax.set_ylabel(value_axis(label))
        _people_ticks(ax, "y")
        ax.legend(fontsize=8, loc="best", ncols=2)
    return fig


def plot_lag_panels(panel: dict, *, label: str, detrended: bool):
    """Tail value against head value per lag class of one direction (h-scatterplots), flagged pairs marked."""
    lags = panel["lags"]
    columns = 2
    rows_n = max(1, math.ceil(len(lags) / columns))
    fig = new_figure(WIDTH, 2.4 * rows_n + 0.7)
    axes = fig.subplots(rows_n, columns, squeeze=False).ravel()
    top = max((lag["high"] for lag in lags), default=1.0)
    unit, word = _distance_axis(top)
    for ax, lag in zip(axes, lags):
        tail, head = np.asarray(lag["tail"], dtype=float), np.asarray(lag["head"], dtype=float)
        ft, fh = np.asarray(lag["tail_flagged"], dtype=float), np.asarray(lag["head_flagged"], dtype=float)
        every = np.concatenate([tail, head])
        every = every[np.isfinite(every)]
        if every.size:
            q1, q3 = np.percentile(every, [25, 75])
            lo = max(float(every.min()), q1 - 3 * (q3 - q1))
            hi = min(float(every.max()), q3 + 3 * (q3 - q1))
            pad = 0.05 * (hi - lo) if hi > lo else 1.0
            lo, hi = lo - pad, hi + pad
            ax.scatter(np.clip(tail, lo, hi), np.clip(head, lo, hi), s=3, c="0.45", alpha=0.5, linewidths=0)
            ax.scatter(np.clip(ft, lo, hi), np.clip(fh, lo, hi), s=16, c=_FLAG, marker="D", linewidths=0)
            line = np.array([lo, hi])
            ax.plot(line, line, color="k", lw=0.7)
            if lag["band"] is not None:
                centre, scale = lag["band"]
                for sign in (-1, 1):
                    ax.plot(line, line + centre + sign * panel["threshold"] * scale, color="#0072B2", lw=0.7, ls="--")
            ax.set_xlim(lo, hi)
            ax.set_ylim(lo, hi)
        ax.set_title(f"{format_number(lag['low'] / unit)}-{format_number(lag['high'] / unit)} {word}: "
                     f"{format_number(lag['pairs'])} pairs, {format_number(lag['flagged'])} out", fontsize=9)
        ax.tick_params(labelsize=8)
        _people_ticks(ax)
    for ax in axes[len(lags):]:
        ax.set_visible(False)
    fig.supxlabel(f"value at the tail: {value_axis(label, detrended)}", fontsize=9)
    fig.supylabel("value at the head (same units)", fontsize=9)
    fig.suptitle(f"{panel['name']} pairs (\u00b1{format_number(panel['angle_tolerance'])}\N{DEGREE SIGN}), by separation",
                 fontsize=10)
    return fig


def plot_variogram(v: dict, drawing: dict, *, label: str):
    """Omnidirectional estimates with the fitted model above, directional estimates below."""
    table = v["table"]
    h = np.asarray(drawing.get("h", []), dtype=float)
    curves = drawing.get("curves", {})
    top = float(v["lag_edges"][-1]) if v.get("lag_edges") else 1.0
    unit, word = _distance_axis(top)
    fig = new_figure(WIDTH, 8.0)
    upper, lower = fig.subplots(2, 1)
    model = v.get("model", {})

    def curve(direction, estimator):
        part = [r for r in table if r["direction"] == direction and r["estimator"] == estimator and r["gamma"] is not None]
        return (np.array([r["mean_distance"] for r in part], dtype=float) / unit,
                np.array([r["gamma"] for r in part], dtype=float))

    robust_top = np.nanmax(curve("all", "cressie_hawkins")[1], initial=0.0)
    ceiling = max(robust_top, float(model.get("sill") or 0.0)) * 1.6 or None
    for est, marker, colour in (("matheron", "o", "#56B4E9"), ("cressie_hawkins", "s", "#009E73")):
        x, g = curve("all", est)
        name = est.replace("_", "-").capitalize().replace("Cressie-hawkins", "Cressie-Hawkins")
        if ceiling and g.size and g.max() > ceiling:
            name += f" (up to {format_number(float(g.max()))}, off the scale)"
            g = np.where(g > ceiling, np.nan, g)
        upper.plot(x, g, marker, color=colour, ms=5, label=name)
    if "all" in curves:
        status = "trustworthy" if model.get("trustworthy") else "not trustworthy"
        upper.plot(h / unit, curves["all"], "-", color="k", lw=1.1,
                   label=f"{model.get('model')} model: nugget {format_number(model.get('nugget'))}, sill "
                         f"{format_number(model.get('sill'))}, range {format_length(model.get('practical_range'))} ({status})")
    if ceiling:
        upper.set_ylim(0, ceiling)
    upper.set_title("All directions", fontsize=10)
    palette = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00")
    for colour, direction in zip(palette, v.get("directions", [])):
        x, g = curve(direction, v.get("fit_estimator", "cressie_hawkins"))
        lower.plot(x, g, "o", ms=4, color=colour, label=f"azimuth {direction}\N{DEGREE SIGN}")
        if direction in curves:
            lower.plot(h / unit, curves[direction], "-", lw=0.9, color=colour)
    lower.set_title(f"By direction (\u00b1{format_number(v.get('angle_tolerance'))}\N{DEGREE SIGN})", fontsize=10)
    for ax in (upper, lower):
        ax.set_xlabel(f"separation ({word})")
        ax.set_ylabel(f"semivariance (squared units of {label})")
        _people_ticks(ax)
        ax.set_xlim(0, top / unit)
        ax.legend(fontsize=8.5, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncols=2 if ax is lower else 1,
                  frameon=False)
    if ceiling:
        lower.set_ylim(0, ceiling)
    return fig
