"""Exploratory description of a prepared layer: summary, displays, strips, trend.

Orchestration only, like :mod:`pointsift.pipeline`: no printing, no click, no
file paths. :func:`describe` takes a :class:`~pointsift.prepare.Prepared`
layer (read and prepared by the same functions as a screen) and calls the
pure methods in :mod:`pointsift.methods.summary`, ``stemleaf``, ``strips``
and ``trend``. The command line (``pointsift describe``) prints the result
and writes it with :func:`description_layers`.
"""

from __future__ import annotations

import dataclasses
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

__all__ = ["Description", "describe", "describe_scale", "description_layers", "TREND_CHOICES", "STRIPS_LAYER"]

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

    scale : dict
        The described scale (``run_info["described_scale"]``): skewness,
        whether the values are strongly skewed and positive, the transform
        option and the scale the stem-and-leaf, strips, trend and variogram
        describe.
    judged_summary : Summary or None
        Summary of the log values, when they are described on the log scale
        (``summary`` stays in the original units).
    depth_summary : Summary or None
        Summary of the depth to water (land surface minus level) when a
        water level comes with a ground elevation.
    context_info : dict
        What the context columns hold (``run_info["context"]``): sites with
        several completions, aquifer units, well depths.
    notes : tuple of str
        For the user (skew, depth to water, grouping).

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
    scale: dict = field(default_factory=lambda: {"scale": "the values"})
    judged_summary: Summary | None = None
    depth_summary: Summary | None = None
    context_info: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()

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
        if self.judged_summary is not None:
            table["log_of_values"] = list(self.judged_summary.as_dict().values())
        if self.depth_summary is not None:
            table["depth_to_water"] = list(self.depth_summary.as_dict().values())
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
    config=None,
    where: str = "the layer",
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
    config : ScreenConfig, optional
        Its ``transform`` (``"log"``, or ``"auto"``: log for a strongly
        skewed positive variable other than a level) chooses the scale the
        stem-and-leaf, strips, trend and variogram describe; its context
        columns (ground elevation, well depth, site, aquifer) add the depth
        to water and a note on the grouping (see :func:`describe_scale`).
        Without it: the values, no context.
    where : str
        How to name the layer in messages about the context columns.

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
    scale, described, judged_summary, depth_summary, context_info, notes = describe_scale(prepared, config, where)
    original = prepared
    if described is not None:  # the log scale: rows that are not positive cannot be described on it
        if not np.isfinite(described).any():
            raise InputError(f"No value is positive, so nothing can be described on the log scale; "
                             f"pass {spell('transform', 'none')}.")
        prepared = dataclasses.replace(prepared, values=described, usable=np.isfinite(described))
        usable, values = prepared.usable, described
    shift = _shift_without_suspects(original, suspect_mask)
    unscreened = dict(Counter(str(r) for r in original.unscreened_reason[~original.usable]).most_common())
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
    drawn = _figures(values[usable], strips, variogram, bin_width, value_label) if figures else {}
    return Description(
        prepared=original,
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
        scale=scale,
        judged_summary=judged_summary,
        depth_summary=depth_summary,
        context_info=context_info,
        notes=notes,
    )


def _shift_without_suspects(prepared: Prepared, suspect_mask):
    """How the summary moves without the rows a screen called suspect (None without a mask)."""
    if suspect_mask is None:
        return None
    mask = np.asarray(suspect_mask, dtype=bool)
    if mask.shape != prepared.values.shape:
        raise InputError(f"suspect_mask has {mask.size} entries for {prepared.values.size} rows; pass one per row.")
    return summary_shift(prepared.values[prepared.usable], mask[prepared.usable])


def _figures(values, strips, variogram, bin_width, value_label: str) -> dict:
    """The histogram, strip profiles and variogram figures of a description (``--figures``)."""
    from .methods.strips import plot_strip_profiles
    from .methods.summary import plot_histogram

    drawn = {"histogram": plot_histogram(values, bin_width, label=value_label),
             "strip_profiles": plot_strip_profiles(strips.table, label=value_label, flag_u=strips.flag_u)}
    if variogram is not None:
        from .methods.variogram import plot_sqrt_difference_cloud, plot_variogram, plot_variogram_cloud

        drawn["variogram"] = plot_variogram(variogram)
        drawn["variogram_cloud"] = plot_variogram_cloud(variogram.empirical)
        drawn["sqrt_difference_cloud"] = plot_sqrt_difference_cloud(variogram.empirical)
    return drawn


def describe_scale(prepared: Prepared, config=None, where: str = "the layer"):
    """The scale a description describes, and what the context columns add.

    Skew is measured as the screen measures it
    (:func:`pointsift.judging.skewness`, the adjusted Fisher-Pearson G1 of
    ``scipy.stats.skew(bias=False)``); a positive variable with G1 of at
    least :data:`pointsift.judging.STRONG_SKEW` is strongly skewed, and the
    note offers ``transform log`` (or ``auto``). ``transform="log"`` always
    describes the log values; ``"auto"`` does so for a strongly skewed
    positive variable that is not a water level (the screen's rule, so
    ``describe`` and ``screen`` judge alike). A water level with a ground
    elevation is also summarised as depth to water; sites with several
    completions and aquifer units are counted and noted.

    Parameters
    ----------
    prepared : Prepared
        The layer.
    config : ScreenConfig, optional
        Transform and context options (None: the values, no context).
    where : str
        How to name the layer in messages.

    Returns
    -------
    tuple
        ``(scale, described, judged_summary, depth_summary, context_info, notes)``:
        the scale record, the log values per row (NaN where not positive or
        unusable; None when the values themselves are described), the summary
        of the log values (or None), the depth-to-water summary (or None),
        the context record and the notes.
    """
    from .judging import skew_check

    transform = getattr(config, "transform", "none") or "none"
    quantity = getattr(config, "quantity", "level") or "level"
    check = skew_check(prepared.values, prepared.usable, transform, quantity)
    skew = check.skewness
    scale = {**check.record(quantity, transform), "scale": "the values"}
    notes: list[str] = []
    described = judged_summary = None
    if check.use_log:
        described = check.log_values
        judged_summary = global_summary(described[np.isfinite(described)])
        scale["scale"] = "log of the values (natural log); the summary also in the original units"
        dropped = int((prepared.usable & ~np.isfinite(described)).sum())
        scale["rows_not_positive"] = dropped
        notes.append(
            f"Described on the log scale (transform {transform}"
            + (f", skewness {skew:.2f}" if np.isfinite(skew) else "") + "): stem-and-leaf, strips, trend and variogram "
            f"of the natural log; skewness of the logs {_fmt(judged_summary.skewness)}"
            + (f"; {dropped} value{'s' if dropped != 1 else ''} not positive left out" if dropped else "") + "."
        )
    elif check.strongly:
        notes.append(check.advice())
    if config is None:
        return scale, described, judged_summary, None, {}, tuple(notes)
    depth_summary, context_info, context_notes = _context_description(prepared, config, where, quantity)
    return scale, described, judged_summary, depth_summary, context_info, tuple(notes + context_notes)


def _fmt(value) -> str:
    return "n/a" if value is None or not np.isfinite(value) else f"{value:.2f}"


def _context_description(prepared: Prepared, config, where: str, quantity: str):
    """Depth to water, completions per site and aquifer units, from the context columns."""
    from .context import read_context

    context = read_context(prepared.frame, config, prepared.xy, prepared.work_crs, where=where)
    usable = prepared.usable
    info = dict(context.record)
    notes: list[str] = []
    depth_summary = None
    units = f" {config.units}" if config.units else ""
    with_ground = usable & np.isfinite(context.ground)
    if quantity == "level" and with_ground.any():
        dtw = context.ground[with_ground] - prepared.values[with_ground]
        depth_summary = global_summary(dtw)
        above = int((dtw < 0).sum())
        info["depth_to_water_rows"] = int(with_ground.sum())
        notes.append(
            f"Depth to water (land surface minus level) of {with_ground.sum()} rows: median "
            f"{_fmt(depth_summary.median)}{units}, 25-75 % {_fmt(depth_summary.p25)} to {_fmt(depth_summary.p75)}{units}, "
            f"robust sd {_fmt(depth_summary.robust_sd_mad)}{units} against {_fmt(global_summary(prepared.values[usable]).robust_sd_mad)}"
            f"{units} for the levels"
            + (f"; {above} level{'s' if above != 1 else ''} above land surface" if above else "") + "."
        )
    if config.site:
        site = np.where(usable, context.site, "")
        named = site[site != ""]
        if named.size:
            counts = pd.Series(named).value_counts()
            nested = counts[counts >= 2]
            info["sites"] = int(counts.size)
            info["sites_with_several_records"] = int(nested.size)
            notes.append(
                f"Sites: {counts.size} named; {nested.size} with several records ({int(nested.sum())} rows), which the "
                "screen treats as separate completions when their depths or units differ (nested wells)."
            )
        info["rows_without_site"] = int((usable & (context.site == "")).sum())
    if config.aquifer:
        unit = np.where(usable, context.aquifer, "")
        counts = pd.Series(unit[usable]).replace("", "(none)").value_counts()
        info["aquifer_units"] = {str(k): int(v) for k, v in counts.items()}
        shown = ", ".join(f"{k} {v}" for k, v in list(counts.items())[:6]) + (", ..." if counts.size > 6 else "")
        notes.append(
            f"Aquifer units ({int((counts.index != '(none)').sum())}): {shown}; the screen compares wells within "
            "their unit (wells of no unit with the nearest wells of any unit)."
        )
    if config.well_depth:
        depth = context.well_depth[usable & np.isfinite(context.well_depth)]
        if depth.size:
            notes.append(
                f"Well depth known for {depth.size} of {int(usable.sum())} rows: median {np.median(depth):.4g}{units}, "
                f"5-95 % {np.percentile(depth, 5):.4g} to {np.percentile(depth, 95):.4g}{units}."
            )
    return depth_summary, info, notes


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
    described = prepared.values
    if description.judged_summary is not None:  # described on the log scale: the trend is of the logs
        described = np.where(prepared.usable & (prepared.values > 0),
                             np.log(np.where(prepared.values > 0, prepared.values, 1.0)), np.nan)
    points["trend_fitted"] = described - residual if fit is not None else np.nan
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
