"""Exploratory description of a prepared layer: summary, displays, strips, trend.

Orchestration only, like :mod:`pointsift.pipeline`: no printing, no click, no
file paths. :func:`describe` takes a :class:`~pointsift.prepare.Prepared`
layer (read and prepared by the same functions as a screen) and calls the
pure methods in :mod:`pointsift.methods.summary`, ``stemleaf``, ``strips``
and ``trend``. The command line (``pointsift describe``) prints the result
and writes it with :func:`description_layers`.
"""

from __future__ import annotations

import logging
from collections import Counter
from dataclasses import dataclass, field
from functools import cached_property

import geopandas as gpd
import numpy as np
import pandas as pd

from .config import spell
from .errors import ConfigError, InputError
from .methods.stemleaf import StemLeaf, stem_and_leaf_table
from .methods.strips import DEFAULT_DIRECTIONS, MIN_STRIP_N, StripResult, strip_summary
from .methods.summary import Summary, SummaryShift, global_summary, summary_shift
from .methods.trend import PolishSurface, TrendSurface
from .prepare import Prepared

__all__ = ["Description", "describe", "description_layers", "TREND_CHOICES", "STRIPS_LAYER"]

log = logging.getLogger(__name__)

#: Trend choices (the same words as ``ScreenConfig.detrend``).
TREND_CHOICES = ("auto", "none", "surface1", "surface2", "polish")
#: Name of the strip polygon layer in output GeoPackages.
STRIPS_LAYER = "strips"


@dataclass
class Description:
    """Everything :func:`describe` produced.

    Attributes
    ----------
    prepared : Prepared
        The layer described.
    summary : Summary
        Global summary of the usable values.
    shift : SummaryShift or None
        Summary without the suspect rows and the shift it causes (None when
        no suspect mask was given).
    unscreened : dict
        Count of unusable rows by reason.
    stem_leaf : StemLeaf
        Stem-and-leaf display of the usable values.
    strips : StripResult
        Strip tables (footprints in the work CRS).
    trend : TrendSurface, PolishSurface or None
        The fitted trend (None for ``trend="none"`` or when it could not be fitted).
    trend_info : dict
        Method and shares of variance explained, or the reason there is no trend.
    figures : dict
        ``{"histogram": Figure, "strip_profiles": Figure}`` when requested
        (plus ``variogram``, ``variogram_cloud`` and ``sqrt_difference_cloud``
        when a variogram was computed).
    variogram : VariogramAnalysis or None
        Semivariograms and model fit of the values (of the trend residuals
        when a trend was fitted); None when they cannot be computed.
    variogram_basis : str
        What the variogram was computed on.
    structure : SpatialStructure or None
        Trend, lag pairs and variogram, made by the same function as a
        screen's (:func:`pointsift.pipeline.spatial_structure`).
    value_label, seed : str, int
        Value column and the seed of the random draws.
    screen : ScreenResult or None
        The screen made alongside (``describe --with-screen``).

    The :attr:`findings` (every number a report shows) are made from these
    on first use.
    """

    prepared: Prepared
    summary: Summary
    shift: SummaryShift | None
    unscreened: dict
    stem_leaf: StemLeaf
    strips: StripResult
    trend: TrendSurface | PolishSurface | None
    trend_info: dict
    figures: dict = field(default_factory=dict)
    variogram: object = None
    variogram_basis: str = ""
    structure: object = None
    value_label: str = "value"
    seed: int = 0
    screen: object = None
    display_options: dict = field(default_factory=dict)

    @cached_property
    def findings(self):
        """:class:`pointsift.findings.Findings` of this description (and of its screen, if any)."""
        from .findings import describe_findings

        return describe_findings(self, self.structure, screen=self.screen, **self.display_options)

    def strips_layer(self) -> gpd.GeoDataFrame:
        """The strip table as a polygon layer in the work CRS."""
        return gpd.GeoDataFrame(self.strips.table.copy(), geometry="geometry", crs=self.prepared.work_crs)

    def summary_table(self) -> pd.DataFrame:
        """Summary figures as rows: ``figure``, ``all`` (and ``without_suspects``)."""
        table = pd.DataFrame({"figure": list(Summary.names()), "all": list(self.summary.as_dict().values())})
        if self.shift is not None:
            table["without_suspects"] = list(self.shift.without_suspects.as_dict().values())
        return table


def describe(
    prepared: Prepared,
    *,
    directions=DEFAULT_DIRECTIONS,
    strip_width: float | None = None,
    min_strip_n: int = MIN_STRIP_N,
    trend: str = "auto",
    stem_unit: float | None = None,
    split: int | None = None,
    suspect_mask=None,
    figures: bool = False,
    bin_width: float | None = None,
    value_label: str = "value",
    lag_count: int | None = None,
    lag_width: float | None = None,
    seed: int | None = None,
    screen=None,
) -> Description:
    """Describe a prepared layer: summary, stem-and-leaf, strips and trend.

    Parameters
    ----------
    prepared : Prepared
        From :func:`pointsift.prepare.prepare`.
    directions : sequence of float
        Strip families (azimuth along which strips run; 90 west-east, 0 south-north).
    strip_width : float, optional
        Strip width in metres (default from the point density).
    min_strip_n : int
        Smaller strips are too small to judge.
    trend : {"auto", "none", "surface1", "surface2", "polish"}
        Trend fitted and reported.
    stem_unit, split
        Stem-and-leaf options (see :func:`pointsift.methods.stemleaf.stem_and_leaf_table`).
    suspect_mask : array_like of bool, optional
        Rows a screen called ``suspect``; adds the summary without them.
    figures : bool
        Also draw the histogram and the strip profile figures.
    bin_width : float, optional
        Histogram bin width (Freedman-Diaconis when omitted).
    value_label : str
        Axis label of the figures.
    lag_count, lag_width : optional
        Variogram lag classes (see :func:`pointsift.methods.variogram.lag_edges`).
    seed : int, optional
        Seed of the pair subsampling (the screen's default when omitted).
    screen : ScreenResult, optional
        A screen of the same layer: its statuses, flags and local evidence
        join the findings.

    Returns
    -------
    Description

    Raises
    ------
    InputError
        When no row is usable.
    ConfigError
        For an unknown trend choice or bad strip options.
    """
    if trend not in TREND_CHOICES:
        raise ConfigError(f"trend {trend!r} is not known; choose one of {', '.join(TREND_CHOICES)}.")
    usable = prepared.usable
    if not usable.any():
        raise InputError(
            f"No row has both a location and a value (first reason: {prepared.unscreened_reason[0]}). "
            f"Check {spell('value')} and the coordinates."
        )
    values = np.where(usable, prepared.values, np.nan)
    summary = global_summary(values[usable])
    shift = None
    if suspect_mask is not None:
        mask = np.asarray(suspect_mask, dtype=bool)
        if mask.shape != values.shape:
            raise InputError(f"suspect_mask has {mask.size} entries for {values.size} rows; pass one per row.")
        shift = summary_shift(values[usable], mask[usable])
    unscreened = dict(Counter(str(r) for r in prepared.unscreened_reason[~usable]).most_common())
    stem_leaf = stem_and_leaf_table(values[usable], stem_unit, split)
    strips = strip_summary(
        prepared.xy[:, 0], prepared.xy[:, 1], values, directions, strip_width, min_n=min_strip_n
    )
    from .config import ScreenConfig
    from .pipeline import spatial_structure

    seed = ScreenConfig.seed if seed is None else int(seed)
    structure = spatial_structure(prepared, detrend=trend, lag_count=lag_count, lag_width=lag_width, seed=seed)
    fit, trend_info = structure.trend, structure.trend_info
    variogram, variogram_basis = structure.variogram, structure.basis
    drawn = {}
    if figures:
        from .methods.strips import plot_strip_profiles
        from .methods.summary import plot_histogram

        drawn["histogram"] = plot_histogram(values[usable], bin_width, label=value_label)
        drawn["strip_profiles"] = plot_strip_profiles(strips.table, label=value_label, flag_u=strips.flag_u)
        if variogram is not None:
            from .methods.variogram import plot_sqrt_difference_cloud, plot_variogram, plot_variogram_cloud

            drawn["variogram"] = plot_variogram(variogram)
            drawn["variogram_cloud"] = plot_variogram_cloud(variogram.empirical)
            drawn["sqrt_difference_cloud"] = plot_sqrt_difference_cloud(variogram.empirical)
    return Description(
        prepared=prepared,
        summary=summary,
        shift=shift,
        unscreened=unscreened,
        stem_leaf=stem_leaf,
        strips=strips,
        trend=fit,
        trend_info=trend_info,
        figures=drawn,
        variogram=variogram,
        variogram_basis=variogram_basis,
        structure=structure,
        value_label=value_label,
        seed=seed,
        screen=screen,
        display_options={"bin_width": bin_width, "stem_unit": stem_unit, "split": split},
    )


def description_layers(description: Description) -> dict:
    """Layers and tables of a description, ready for :func:`pointsift.io.write_geopackage`.

    Returns
    -------
    dict
        ``strips`` (polygon layer, work CRS), ``points`` (the input rows with
        their strip numbers and the trend's fitted value and residual, input
        CRS), and the tables ``summary``, ``stem_leaf``, ``unscreened`` and
        ``trend`` (and ``variogram`` when one was computed).
    """
    prepared = description.prepared
    points = prepared.frame.copy()
    for column in description.strips.membership.columns:
        points[column] = description.strips.membership[column].to_numpy()
    fit = description.trend
    # over every row, also when the surface was fitted on a sample (spatial_structure)
    residual = description.structure.detrended if description.structure is not None else None
    points["trend_fitted"] = prepared.values - residual if fit is not None else np.nan
    points["trend_residual"] = residual if fit is not None else np.nan
    trend_rows = [("method", description.trend_info.get("method", "none"))]
    for key in ("variance_explained", "robust_variance_explained", "note"):
        if key in description.trend_info:
            trend_rows.append((key, str(description.trend_info[key])))
    if isinstance(fit, TrendSurface):
        trend_rows += [(f"coefficient {term}", repr(float(c))) for term, c in zip(fit.terms, fit.coefficients)]
        trend_rows += [("centre_x", repr(fit.centre[0])), ("centre_y", repr(fit.centre[1])), ("scale_m", repr(fit.scale))]
    elif isinstance(fit, PolishSurface):
        trend_rows += [("overall", repr(float(fit.polish.overall))), ("cell_size_m", repr(fit.cell_size))]
    unscreened = pd.DataFrame(
        {"reason": list(description.unscreened), "rows": list(description.unscreened.values())},
        columns=["reason", "rows"],
    )
    stem = description.stem_leaf.as_frame()
    return {
        STRIPS_LAYER: description.strips_layer(),
        "points": points,
        "summary": description.summary_table(),
        "stem_leaf": stem,
        "unscreened": unscreened.astype({"reason": str, "rows": "int64"}),
        "trend": pd.DataFrame(trend_rows, columns=["key", "value"]),
        **({"variogram": description.variogram.table} if description.variogram is not None else {}),
    }
