"""Empirical semivariograms, model fits, and what they tell the screen.

How fast values change with distance sets how far a point's neighbourhood
should reach and how large a difference between a point and a neighbour at
distance h is ordinary. This module estimates it from the same lag pairs as
:mod:`pointsift.methods.lagpairs`.

Sources
-------
- Estimators (Matheron; Cressie-Hawkins) and the default lag classes: see
  :mod:`pointsift.methods.variogram_empirical`, whose docstring cites them.
- Models and the weighted least-squares fit (Cressie 1985): see
  :mod:`pointsift.methods.variogram_fit`.
- Square-root-difference cloud: Cressie (1993) section 2.4 (from memory).

The estimators are in :mod:`pointsift.methods.variogram_empirical`, the
models and fits in :mod:`pointsift.methods.variogram_fit` (their names are
importable from here too); this module runs them together and turns a
trustworthy fit into what the screen uses, and draws the figures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import ConfigError, InputError
from ..vocabulary import direction_words
from .lagpairs import DEFAULT_DIRECTIONS
from .pairsearch import PairSet, _as_xy
from .variogram_empirical import (  # re-exported: importable from here as before
    DEFAULT_VARIOGRAM_PAIR_BUDGET,
    ESTIMATORS,
    EmpiricalVariogram,
    cressie_hawkins,
    default_cutoff,
    empirical_variogram,
    lag_edges,
    matheron,
    variogram_table,
)
from .variogram_fit import (  # re-exported: importable from here as before
    ANISOTROPY_RATIO,
    MAX_NUGGET_SHARE,
    MIN_CLASS_PAIRS,
    MIN_FIT_CLASSES,
    MIN_R_SQUARED,
    MODELS,
    VariogramFit,
    _plain,
    _structure,
    anisotropy_hint,
    fit_variogram,
    practical_range,
    variogram_model,
)

__all__ = [
    "ESTIMATORS",
    "MODELS",
    "DEFAULT_VARIOGRAM_PAIR_BUDGET",
    "MIN_CLASS_PAIRS",
    "ANISOTROPY_RATIO",
    "EmpiricalVariogram",
    "VariogramFit",
    "VariogramAnalysis",
    "NeighbourhoodHint",
    "default_cutoff",
    "lag_edges",
    "matheron",
    "cressie_hawkins",
    "empirical_variogram",
    "variogram_model",
    "practical_range",
    "fit_variogram",
    "anisotropy_hint",
    "analyse_variogram",
    "variogram_table",
    "neighbourhood_from_fit",
    "expected_difference_sd",
    "plot_variogram_cloud",
    "plot_sqrt_difference_cloud",
    "plot_variogram",
]


@dataclass(frozen=True)
class VariogramAnalysis:
    """Everything :func:`analyse_variogram` found.

    Attributes
    ----------
    empirical : EmpiricalVariogram
    fit : VariogramFit
        Omnidirectional fit.
    directional_fits : dict of str -> VariogramFit
        Same model as ``fit``, per direction.
    anisotropy : dict
        From :func:`anisotropy_hint`.
    fit_estimator : str
    """

    empirical: EmpiricalVariogram
    fit: VariogramFit
    directional_fits: dict
    anisotropy: dict
    fit_estimator: str

    @property
    def table(self) -> pd.DataFrame:
        """The ``variogram`` table."""
        return variogram_table(self.empirical)

    def run_info(self) -> dict:
        """Plain values for ``run_info``: lag classes, fits, anisotropy, pair search, neighbourhood."""
        hint = neighbourhood_from_fit(self.fit)
        return _plain({
            "lag_edges": self.empirical.edges.tolist(),
            "directions": [direction_words(d, "label") for d in self.empirical.directions],
            "angle_tolerance": self.empirical.angle_tolerance,
            "fit_estimator": self.fit_estimator,
            "model": self.fit.as_record(),
            "directional_models": {d: f.as_record() for d, f in self.directional_fits.items()},
            "anisotropy": self.anisotropy,
            "pair_search": self.empirical.pairs.record,
            "neighbourhood": hint.as_record(),
        })


def analyse_variogram(
    xy,
    values,
    *,
    lag_count: int | None = None,
    lag_width: float | None = None,
    edges=None,
    directions=DEFAULT_DIRECTIONS,
    angle_tolerance: float = 22.5,
    model: str = "auto",
    fit_estimator: str = "cressie_hawkins",
    pair_budget: int = DEFAULT_VARIOGRAM_PAIR_BUDGET,
    seed: int = 0,
) -> VariogramAnalysis:
    """Empirical variograms, an omnidirectional model fit, directional fits and an anisotropy hint.

    Parameters
    ----------
    xy, values : array_like
        Coordinates (metric CRS) and values (NaN rows left out).
    lag_count, lag_width, edges :
        Lag classes, see :func:`lag_edges`.
    directions, angle_tolerance :
        Directional classes, see :func:`empirical_variogram`.
    model : {"auto", "spherical", "exponential", "gaussian"}
        Model of the omnidirectional fit; directional fits use the same one.
    fit_estimator : {"cressie_hawkins", "matheron"}
        Estimator whose values are fitted. The default is the robust one:
        the data being screened may hold the very errors that inflate
        Matheron's estimate.
    pair_budget, seed :
        Pair search budget and subsampling seed.

    Returns
    -------
    VariogramAnalysis
    """
    if fit_estimator not in ESTIMATORS:
        raise ConfigError(f"fit_estimator {fit_estimator!r} is not known; choose one of {', '.join(ESTIMATORS)}.")
    xy = _as_xy(xy)
    values = np.asarray(values, dtype=float)
    usable = np.isfinite(values) & np.isfinite(xy).all(axis=1)
    if usable.sum() < 2:
        raise InputError(f"A variogram needs at least two usable points, got {int(usable.sum())}.")
    e = lag_edges(xy[usable], lag_count=lag_count, lag_width=lag_width, edges=edges)
    emp = empirical_variogram(xy, values, e, directions=directions, angle_tolerance=angle_tolerance,
                              pair_budget=pair_budget, seed=seed)
    omni = emp.curve("all", fit_estimator)
    fit = fit_variogram(omni["mean_distance"], omni["gamma"], omni["pairs"], model=model, cutoff=float(e[-1]),
                        estimator=fit_estimator, direction="all")
    directional = {}
    dir_model = fit.model if fit.model in MODELS else model
    for d in emp.directions:
        label = direction_words(d, "label")
        c = emp.curve(label, fit_estimator)
        start = (fit.nugget, fit.partial_sill, fit.range_parameter) if fit.converged else None
        directional[label] = fit_variogram(c["mean_distance"], c["gamma"], c["pairs"], model=dir_model,
                                           cutoff=float(e[-1]), estimator=fit_estimator, direction=label,
                                           start=start)
    return VariogramAnalysis(emp, fit, directional, anisotropy_hint(directional), fit_estimator)


# --------------------------------------------------------------------------- what the screen uses

@dataclass(frozen=True)
class NeighbourhoodHint:
    """Neighbourhood distance and difference scale from a trustworthy fit, or why not.

    Attributes
    ----------
    distance : float or None
        Default neighbourhood distance: the practical range (beyond it a
        neighbour says nothing about the point). None when not trustworthy.
    nugget : float or None
        Semivariance of two distinct records at (almost) the same place.
    reason : str
        Why the hint is given or withheld.
    fit : VariogramFit or None
    """

    distance: float | None
    nugget: float | None
    reason: str
    fit: VariogramFit | None

    @property
    def usable(self) -> bool:
        """True when the screen may use the hint."""
        return self.distance is not None

    def difference_sd(self, h):
        """Expected standard deviation of the difference of two records at separation ``h``, or None."""
        if self.fit is None or not self.usable:
            return None
        return expected_difference_sd(self.fit, h)

    def as_record(self) -> dict:
        """Plain values for ``run_info``."""
        return {"usable": self.usable, "distance": self.distance, "nugget": self.nugget, "reason": self.reason}


def neighbourhood_from_fit(fit: VariogramFit | None) -> NeighbourhoodHint:
    """Neighbourhood distance and difference scale for the screen, from a trustworthy fit.

    Returns a hint with ``distance=None`` and the failed checks as the reason
    when the fit is missing or not trustworthy; the screen then keeps its
    robust default.
    """
    if fit is None:
        return NeighbourhoodHint(None, None, "no variogram was fitted; the robust default neighbourhood is used.", None)
    if not fit.trustworthy:
        failed = [r[len("failed: "):] for r in fit.reasons if r.startswith("failed: ")]
        failed = failed or [r for r in fit.reasons]
        return NeighbourhoodHint(
            None, None,
            "the fitted variogram is not trustworthy (" + "; ".join(failed) + "); the robust default is used.",
            fit,
        )
    return NeighbourhoodHint(
        float(fit.practical_range), float(fit.nugget),
        f"{fit.model} model fitted to the {fit.estimator} variogram is trustworthy: neighbourhood distance "
        f"= practical range {fit.practical_range:.4g}.",
        fit,
    )


def expected_difference_sd(fit: VariogramFit, h) -> np.ndarray:
    """Standard deviation of ``Z(x) - Z(x + h)`` for two distinct records: ``sqrt(2 gamma(h))``.

    Under intrinsic stationarity ``Var(Z(x) - Z(x + h)) = 2 gamma(h)``. The
    nugget is included even at ``h = 0`` because two distinct records differ
    by measurement error.
    """
    h = np.asarray(h, dtype=float)
    g = fit.nugget + fit.partial_sill * _structure(fit.model, np.abs(h), fit.range_parameter)
    return np.sqrt(2.0 * g)


def _cloud_sample(pairs: PairSet, diff: np.ndarray, max_points: int, seed: int):
    ok = np.flatnonzero(np.isfinite(diff) & (pairs.distance > 0))
    note = ""
    if ok.size > max_points:
        note = f" ({max_points} of {ok.size} pairs shown)"
        ok = np.sort(np.random.default_rng(seed).choice(ok, size=max_points, replace=False))
    return pairs.distance[ok], diff[ok], note


def plot_variogram_cloud(empirical: EmpiricalVariogram, *, max_points: int = 50_000, seed: int = 0):
    """Variogram cloud: half the squared difference of every pair against its separation.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    d, diff, note = _cloud_sample(empirical.pairs, empirical.differences, max_points, seed)
    fig = Figure(figsize=(6.5, 4.2), layout="constrained")
    ax = fig.subplots()
    half_sq = 0.5 * diff**2
    curve = empirical.curve("all", "matheron")
    positive = half_sq[half_sq > 0]
    # Wild values put pairs orders of magnitude above the bulk: then a log axis shows both.
    log_axis = positive.size > 0 and np.max(positive) > 1000 * np.median(positive)
    if log_axis:
        floor = float(np.percentile(positive, 1))
        half_sq = np.maximum(half_sq, floor)
        ax.set_yscale("log")
        note += "\nlog axis; zero differences drawn at the 1st percentile"
    ax.scatter(d, half_sq, s=4, c="0.4", alpha=0.5, linewidths=0)
    ax.plot(curve["mean_distance"], curve["gamma"], "o-", color="tab:blue", ms=4, label="Matheron")
    robust = empirical.curve("all", "cressie_hawkins")
    ax.plot(robust["mean_distance"], robust["gamma"], "s-", color="tab:orange", ms=4, label="Cressie-Hawkins")
    ax.set_xlabel("separation")
    ax.set_ylabel("half squared difference")
    ax.set_title(f"Variogram cloud{note}", fontsize=10)
    ax.legend(fontsize=8)
    return fig


def plot_sqrt_difference_cloud(empirical: EmpiricalVariogram, *, max_points: int = 50_000, seed: int = 0):
    """Square-root-difference cloud: ``|difference|^(1/2)`` of every pair against its separation.

    Class medians and means are drawn; the root of the difference is far
    less skewed than its square, so single wild pairs stand out (Cressie
    1993, section 2.4, from memory).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    d, diff, note = _cloud_sample(empirical.pairs, empirical.differences, max_points, seed)
    root = np.sqrt(np.abs(diff))
    fig = Figure(figsize=(6.5, 4.2), layout="constrained")
    ax = fig.subplots()
    ax.scatter(d, root, s=4, c="0.4", alpha=0.5, linewidths=0)
    e = empirical.edges
    all_root = np.sqrt(np.abs(empirical.differences))
    cls = np.searchsorted(e, empirical.pairs.distance, side="left") - 1
    centres, medians, means = [], [], []
    for k in range(e.size - 1):
        sel = (cls == k) & np.isfinite(all_root)
        if sel.any():
            centres.append(0.5 * (e[k] + e[k + 1]))
            medians.append(float(np.median(all_root[sel])))
            means.append(float(np.mean(all_root[sel])))
    ax.plot(centres, medians, "s-", color="tab:orange", ms=4, label="class median")
    ax.plot(centres, means, "o--", color="tab:blue", ms=4, label="class mean")
    ax.set_xlabel("separation")
    ax.set_ylabel("square root of |difference|")
    ax.set_title(f"Square-root-difference cloud{note}", fontsize=10)
    ax.legend(fontsize=8)
    return fig


def plot_variogram(analysis: VariogramAnalysis):
    """Omnidirectional Matheron and Cressie-Hawkins semivariograms with the fitted model, and directional ones.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    emp = analysis.empirical
    fig = Figure(figsize=(11, 4.2), layout="constrained")
    left, right = fig.subplots(1, 2)
    h = np.linspace(0, emp.edges[-1], 200)[1:]
    fit = analysis.fit
    robust = emp.curve("all", "cressie_hawkins")["gamma"].to_numpy()
    top = np.nanmax(robust) if np.isfinite(robust).any() else np.nan
    if fit.model in MODELS and math.isfinite(fit.range_parameter):
        top = np.nanmax([top, fit.sill])
    for est, marker in zip(ESTIMATORS, ("o", "s")):
        c = emp.curve("all", est)
        gamma = c["gamma"].to_numpy()
        label = est.replace("_", "-")
        # A few wild values can lift Matheron's estimate far above the robust one;
        # then keep the axis on the robust scale and say how far off it went.
        if est == "matheron" and np.isfinite(top) and top > 0 and np.nanmax(gamma, initial=0) > 3 * top:
            label += f" (off the scale, up to {np.nanmax(gamma):.3g}: wild values inflate it)"
            gamma = np.where(gamma > 1.6 * top, np.nan, gamma)
        left.plot(c["mean_distance"], gamma, marker, label=label, ms=5)
    if fit.model in MODELS and math.isfinite(fit.range_parameter):
        status = "trustworthy" if fit.trustworthy else "not trustworthy"
        left.plot(h, fit.gamma(h), "-", color="k", lw=1,
                  label=f"{fit.model}: nugget {fit.nugget:.3g}, sill {fit.sill:.3g}, "
                        f"range {fit.practical_range:.4g} ({status})")
    if np.isfinite(top) and top > 0:
        left.set_ylim(0, 1.6 * top)
    left.set_xlabel("separation")
    left.set_ylabel("semivariance")
    left.set_title("Omnidirectional", fontsize=10)
    left.legend(fontsize=7)
    for d in emp.directions:
        label = direction_words(d, "label")
        c = emp.curve(label, analysis.fit_estimator)
        name = direction_words(d, "abbrev")
        line = right.plot(c["mean_distance"], c["gamma"], "o", ms=4, label=f"{name} ({label})")[0]
        f = analysis.directional_fits.get(label)
        if f is not None and f.model in MODELS and math.isfinite(f.range_parameter):
            right.plot(h, f.gamma(h), "-", lw=0.8, color=line.get_color())
    right.set_xlabel("separation")
    right.set_title(f"Directional ({analysis.fit_estimator.replace('_', '-')}, "
                    f"+/- {emp.angle_tolerance:g} deg)", fontsize=10)
    if emp.directions:
        right.legend(fontsize=7)
    if analysis.anisotropy.get("text"):
        fig.suptitle(analysis.anisotropy["text"], fontsize=8)
    return fig
