"""The screening pipeline: prepare -> neighbour graph -> methods -> verdict.

Orchestration only: no printing, no click, no file paths. The command line,
the batch runner and the Python API all call :func:`screen_frame`.
"""

from __future__ import annotations

import dataclasses
import logging
import time
from dataclasses import dataclass, field
from functools import cached_property

import geopandas as gpd
import numpy as np
import pandas as pd

from .config import ScreenConfig, spell
from .errors import InputError
from .graph import NeighbourGraph, canonical_rank
from .io import SourceInfo
from .methods.autocorr import LocalAutocorrelation, local_autocorrelation, point_keys
from .methods.coincident import coincident_conflicts
from .methods.local import LocalResult, local_residuals
from .methods.lagpairs import lag_pair_reasons
from .context import read_context
from .hydro import coincident_z, context_evidence, level_residuals, neighbour_graph
from .judging import choose_judging
from .methods.nested import find_stations, one_per_station, station_echo
from .methods.repairs import KINDS_FOR, likely_slips, repair_chance
from .methods.strips import flagged_strip_evidence
from .prepare import Prepared, prepare
from .engine import open_engine
from .structure import CLIP_SD, SpatialStructure, automatic_max_distance, clipped, spatial_structure, spatial_tables, strips_layer
from .record import CAUTION, library_versions, run_record
from .verdict import decide, format_length
from .vocabulary import QUADRANT_WORDS, STATUSES, UNSCREENED

__all__ = ["ScreenResult", "SpatialStructure", "screen_frame", "screen", "spatial_structure", "ADDED_COLUMNS",
           "automatic_max_distance", "library_versions", "CAUTION"]

#: Kept importable from here for older callers; the run record lives in pointsift.record.
_library_versions = library_versions

log = logging.getLogger(__name__)

#: Columns the screen adds to the layer, in order.
ADDED_COLUMNS = (
    "screen_status",
    "screen_score",
    "screen_reasons",
    "expected_value",
    "local_residual",
    "local_residual_z",
    "residual_scale",
    "neighbour_count",
    "neighbour_distance_m",
    "local_moran_i",
    "local_moran_quadrant",
    "local_moran_p",
    "local_moran_p_adjusted",
    "getis_ord_gi_star_z",
    "coincident_role",
)


@dataclass
class ScreenResult:
    """Everything one screen produced.

    Attributes
    ----------
    frame : geopandas.GeoDataFrame
        The input rows, unchanged and in order, plus :data:`ADDED_COLUMNS`
        (in the input CRS).
    counts : dict
        Rows per status.
    run_info : dict
        Parameters, versions, CRS used, counts and timings.
    tables : dict
        Extra layers and tables for the output GeoPackage, by name.
    prepared : Prepared
        The prepared layer (work-CRS coordinates, parsed values).
    graph : NeighbourGraph
        The neighbour graph used.
    local : LocalResult
        Robust local residuals.
    autocorr : LocalAutocorrelation or None
        Local Moran's I / Gi*.
    artefacts : dict
        Other method results (``structure``, ``strips``, ``coincident``, ...).
    config : ScreenConfig or None
        The options of the screen.

    The :attr:`findings` (every number a report shows) are made from these
    on first use.
    """

    frame: gpd.GeoDataFrame
    counts: dict
    run_info: dict
    tables: dict = field(default_factory=dict)
    prepared: Prepared | None = None
    graph: NeighbourGraph | None = None
    local: LocalResult | None = None
    autocorr: LocalAutocorrelation | None = None
    artefacts: dict = field(default_factory=dict)
    config: ScreenConfig | None = None

    @cached_property
    def findings(self):
        """:class:`pointsift.findings.Findings` of this screen (made once, from the screen's own results)."""
        from .findings import screen_findings

        return screen_findings(self, self.artefacts["structure"], self.artefacts["strips"])


def _raw_ids(frame, config: ScreenConfig, prepared: Prepared):
    """The id column as text ("row N" counted from 1 where blank or without an id column)."""
    if config.id is None:
        return prepared.ids
    ids = frame[config.id].astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
    ids = ids.to_numpy(dtype=object)
    blank = ids == ""
    ids[blank] = [f"row {r + 1}" for r in np.flatnonzero(blank)]
    return ids


def _tighter_of_level_and_depth(prepared, judging, depth_local, depth_back, graph, context, config):
    """Per well, the prediction from the neighbours' levels or from their depth to water, whichever has the smaller scale.

    The scale depends on how tightly the neighbours fit their own surface
    (and on distance and leverage), never on the well's own value, so the
    choice cannot favour the well. Returns the judged result (on the depth
    scale where depth was chosen, else the level result), the result in level
    units, and where depth was chosen. Repairs compare on the same scale.
    """
    level_local = local_residuals(prepared.xy, np.where(np.isfinite(judging.judged), prepared.values, np.nan), graph,
                                  min_neighbours=config.min_neighbours,
                                  depth=context.well_depth if config.depth_weighting and config.well_depth else None)
    with np.errstate(invalid="ignore"):
        use_depth = np.isfinite(depth_back.z) & ~(level_local.scale < depth_back.scale)
    pick = {}
    for name in ("expected", "residual", "scale", "z", "curved_z", "echo", "neighbour_count", "neighbour_distance",
                 "coherent", "explained_by_curvature", "excluded", "quadratic_used"):
        pick[name] = np.where(use_depth, getattr(depth_back, name), getattr(level_local, name))
    back = dataclasses.replace(depth_back, **pick)
    # the judged scale for the repairs: depth to water where chosen, else level expressed as depth (ground - level)
    judged = dataclasses.replace(depth_local, expected=np.where(use_depth, depth_local.expected, context.ground - level_local.expected),
                                 scale=np.where(use_depth, depth_local.scale, level_local.scale))
    return judged, back, use_depth


def _widen_for_extrapolation(prepared, judging, judged_local, local, graph, context):
    """A prediction outside every neighbour's value is uncertain by at least how far it leaves them.

    The scale becomes ``sqrt(scale**2 + excess**2)`` (judged scale), so an
    edge well "expected 1355" among neighbours of 772-1088 is judged on a
    wider scale; the words go into the reasons (``extrapolated`` text per row).
    """
    from .methods.local import extrapolation

    excess, one_sided = extrapolation(prepared.xy, judging.judged, judged_local.expected, graph)
    wide = np.isfinite(excess) & (excess > 0)
    text = np.full(prepared.n, "", dtype=object)
    if wide.any():
        scale = np.where(wide, np.hypot(judged_local.scale, np.nan_to_num(excess)), judged_local.scale)
        with np.errstate(invalid="ignore", divide="ignore"):
            factor = np.where(wide, scale / judged_local.scale, 1.0)
        judged_local = dataclasses.replace(judged_local, scale=scale, z=judged_local.z / factor)
        local = dataclasses.replace(local, scale=local.scale * factor, z=local.z / factor)
        text[wide] = "the expected value lies well outside the range of the neighbours' values (an extrapolation): judged on a scale widened by that distance"
    edge = one_sided & ~wide & np.isfinite(local.z)
    text[edge] = "all neighbours lie on one side (an edge well): the prediction is an extrapolation, on a scale widened by the fit's leverage"
    return judged_local, local, text


def screen_frame(frame: gpd.GeoDataFrame, config: ScreenConfig, *, source: SourceInfo | None = None) -> ScreenResult:
    """Screen a point layer.

    Parameters
    ----------
    frame : geopandas.GeoDataFrame
        Input points (not modified).
    config : ScreenConfig
        Options.
    source : SourceInfo, optional
        Provenance, copied to the run record.

    Returns
    -------
    ScreenResult

    Raises
    ------
    InputError
        Missing columns, non-point geometry, added column names already in
        the input, or no usable point at all.
    CRSError
        Missing or contradictory CRS.
    ConfigError
        ``engine="dask"`` without the Dask packages, or no scheduler at ``scheduler``.

    Notes
    -----
    ``config.engine`` chooses where the per-point stages run
    (:mod:`pointsift.engine`); the result is the same with either.
    """
    with open_engine(config) as engine:
        return _screen(frame, config, source, engine)


def _screen(frame, config: ScreenConfig, source, engine) -> ScreenResult:
    """:func:`screen_frame` on an open engine."""
    started = time.perf_counter()
    timings: dict[str, float] = {}
    # GeoPackage (SQLite) column names are case-insensitive: SCREEN_STATUS collides too
    added_lower = {name.lower() for name in ADDED_COLUMNS}
    clash = [str(c) for c in frame.columns if str(c).lower() in added_lower]
    if clash:
        raise InputError(
            f"The input already has column(s) {', '.join(clash)} (is it a pointsift output?). "
            "Rename or drop them, or screen the original layer."
        )
    if source is not None:
        where = f"layer {source.layer!r} of {source.path!r}" if source.layer else repr(source.path)
    else:
        where = "the layer"
    prepared = prepare(frame, config, where=where)
    timings["prepare_s"] = time.perf_counter() - started
    if not prepared.usable.any():
        raise InputError(
            f"No row of {where} has both a location and a value "
            f"(first reason: {prepared.unscreened_reason[0]}). Check {spell('value')} and the coordinates."
        )

    context = read_context(frame, config, prepared.xy, prepared.work_crs, where=where)
    judging = choose_judging(prepared.values, prepared.usable, context, config)
    judged_ok = prepared.usable & (judging.unjudged == "")
    raw_ids = None
    if config.id is not None and config.site is not None:
        raw_ids = frame[config.id].astype("object").map(lambda v: "" if v is None else str(v)).to_numpy(dtype=object)
    stations = find_stations(
        prepared.coincident, judged_ok, ids=raw_ids, site=context.site if config.site else None,
        depth=context.well_depth, aquifer=context.aquifer if config.aquifer else None,
        depth_tolerance=config.depth_tolerance,
    )

    t = time.perf_counter()
    usable_xy = prepared.xy[judged_ok]
    max_distance = config.max_distance if config.max_distance is not None else automatic_max_distance(usable_xy)
    graph, _ = neighbour_graph(prepared.xy, judged_ok, stations, context, config, max_distance,
                               tie_rank=canonical_rank(prepared.xy, prepared.values), builder=engine.build_graph)
    if stations.nested.any():
        graph = one_per_station(graph, stations, context.well_depth, judging.judged,
                                config.k if config.graph == "knn" else None)
    timings["graph_s"] = time.perf_counter() - t

    t = time.perf_counter()
    judged_local = local_residuals(prepared.xy, judging.judged, graph, min_neighbours=config.min_neighbours,
                                   drift=judging.drift,
                                   depth=context.well_depth if config.depth_weighting and config.well_depth else None)
    local = judging.back(judged_local, prepared.values, context.ground)
    if judging.mode == "level or depth to water":
        judged_local, local, depth_chosen = _tighter_of_level_and_depth(prepared, judging, judged_local, local, graph,
                                                                         context, config)
        judging.record["wells_judged_on_depth_to_water"] = int((depth_chosen & judged_ok).sum())
        judging.record["wells_judged_on_level"] = int((~depth_chosen & judged_ok & np.isfinite(local.z)).sum())
    judged_local, local, extrapolated = _widen_for_extrapolation(prepared, judging, judged_local, local, graph,
                                                                  context)
    if stations.nested.any():
        # completions of one site deviating alike are a feature of the site, like an echo among neighbours
        shared = station_echo(stations, local.z, 2.0)
        if shared.any():
            local = dataclasses.replace(local, coherent=local.coherent | shared,
                                        echo=np.where(shared, np.fmax(local.echo, 1.0), local.echo))
    timings["local_residual_s"] = time.perf_counter() - t

    counts_nb = graph.counts
    reasons = prepared.unscreened_reason.copy()
    reasons = np.where((reasons == "") & (judging.unjudged != ""), judging.unjudged, reasons)
    too_few = judged_ok & (counts_nb < config.min_neighbours)
    limit = f"within {format_length(graph.max_distance)}" if np.isfinite(graph.max_distance) else "anywhere"
    twins = pd.Series(prepared.coincident).map(pd.Series(prepared.coincident).value_counts()).to_numpy() - 1
    for row in np.flatnonzero(too_few):
        found = counts_nb[row]
        at_spot = f" (besides {twins[row]} record{'s' if twins[row] > 1 else ''} at the same spot)" if prepared.coincident[row] >= 0 else ""
        reasons[row] = (
            f"no neighbour {limit}{at_spot}"
            if found == 0
            else f"only {found} neighbour{'s' if found > 1 else ''} {limit}{at_spot} "
            f"(at least {config.min_neighbours} needed); too isolated to judge"
        )

    t = time.perf_counter()
    structure = spatial_structure(prepared, detrend=config.detrend, lag_count=config.lag_count,
                                  lag_width=config.lag_width, seed=config.seed)
    detrended, trend_info = structure.detrended, structure.trend_info
    timings["trend_lag_pairs_variogram_s"] = time.perf_counter() - t

    t = time.perf_counter()
    judged = judged_ok & ~too_few
    autocorr = local_autocorrelation(
        clipped(np.where(judged, detrended, np.nan)), graph, permutations=config.permutations, seed=config.seed,
        keys=point_keys(prepared.xy, prepared.values), counts=engine.permutation_counts,
    )
    timings["local_autocorrelation_s"] = time.perf_counter() - t

    lag_screen, variogram, spatial_info = structure.lag_screen, structure.variogram, structure.record

    t = time.perf_counter()
    trended = trend_info.get("method", "none") != "none"
    strips, strip_layer = strips_layer(prepared, detrended if trended else None)
    timings["strips_s"] = time.perf_counter() - t

    # the levels' own judgement: for the misplaced-well check, and (depth to water is judged
    # only for a level with a ground elevation) for records at one spot
    level_local = None
    if config.quantity == "level" and context.has_ground:
        level_local = level_residuals(prepared, judging, graph, local, config, judged_ok)
    same_spot_z, same_spot_scale = local.z, judged_local.scale
    if judging.mode == "depth to water":
        same_spot_z, same_spot_scale = coincident_z(judging, local, level_local)
    coincident = coincident_conflicts(
        judging.judged if judging.mode == "log" else prepared.values,
        stations.duplicate,
        same_spot_z,
        same_spot_scale,
        value_tolerance=config.coincident_value_tolerance,
        decisive_z=2.0,
    )
    farthest = np.where(graph.mask, graph.distances, -np.inf).max(axis=1, initial=-np.inf)
    farthest = np.where(np.isfinite(farthest), farthest, np.nan)

    evidence, context_info = context_evidence(prepared, context, judging, stations, graph, local, config, judged_ok,
                                              level_local=level_local)
    with np.errstate(invalid="ignore"):
        evidence.append(((extrapolated != "") & (np.abs(local.z) >= config.review_z), extrapolated, "note"))
    candidates = (reasons == "") & np.isfinite(local.z) & (np.abs(local.z) >= config.review_z)
    kinds = KINDS_FOR[config.quantity]
    if config.units is not None and config.units.lower() not in ("m", "ft") and "units" in kinds:
        kinds = tuple(k for k in kinds if k != "units")
    sound = (reasons == "") & np.isfinite(local.z) & (np.abs(local.z) < config.review_z)
    slip_args = dict(kinds=kinds, ground=context.ground, to_judged=judging.to_judged)
    chance = repair_chance(prepared.values, judged_local.expected, judged_local.scale, sound, seed=config.seed, **slip_args)
    slips = likely_slips(prepared.values, judged_local.expected, judged_local.scale, candidates, chance=chance,
                         units=config.units or "", **slip_args)

    t = time.perf_counter()
    verdict = decide(
        slips=slips,
        ids=prepared.ids,
        values=prepared.values,
        unscreened_reason=reasons,
        local=local,
        max_neighbour_distance=farthest,
        autocorr=autocorr,
        coincident=coincident,
        config=config,
        supporting=(lag_pair_reasons(lag_screen), flagged_strip_evidence(strips, prepared.n, of=" trend residual" if trended else "")),
        evidence=evidence,
    )
    timings["verdict_s"] = time.perf_counter() - t

    screened = verdict["screen_status"].to_numpy() != UNSCREENED
    out = frame.copy()
    if out.crs is None:
        # the CRS the run used (--crs), so the output is not written without one
        out = out.set_crs(prepared.input_crs)
    added = {
        "screen_status": verdict["screen_status"].to_numpy(dtype=object),
        "screen_score": verdict["screen_score"].to_numpy(dtype=float),
        "screen_reasons": verdict["screen_reasons"].to_numpy(dtype=object),
        "expected_value": np.where(screened, local.expected, np.nan),
        "local_residual": np.where(screened, local.residual, np.nan),
        "local_residual_z": np.where(screened, np.round(local.z, 4), np.nan),
        "residual_scale": np.where(screened, local.scale, np.nan),
        "neighbour_count": np.where(prepared.usable, counts_nb, 0).astype("int32"),
        "neighbour_distance_m": np.where(screened, np.round(local.neighbour_distance, 2), np.nan),
        "local_moran_i": np.where(screened, autocorr.moran_i, np.nan),
        "local_moran_quadrant": np.array(
            [QUADRANT_WORDS.get(int(q)) if s and p <= config.fdr else None
             for q, s, p in zip(autocorr.quadrant, screened, np.nan_to_num(autocorr.p_adjusted, nan=np.inf))], dtype=object
        ),
        "local_moran_p": np.where(screened, autocorr.p_value, np.nan),
        "local_moran_p_adjusted": np.where(screened, autocorr.p_adjusted, np.nan),
        "getis_ord_gi_star_z": np.where(screened, autocorr.gi_star_z, np.nan),
        # NULL, not "", where there is nothing to say (unscreened or alone)
        "coincident_role": np.where(coincident["role"].to_numpy(dtype=object) == "", None, coincident["role"].to_numpy(dtype=object)),
    }
    for name in ADDED_COLUMNS:
        out[name] = added[name]

    counts = {status: int((added["screen_status"] == status).sum()) for status in STATUSES}
    timings["total_s"] = time.perf_counter() - started
    run_info = run_record(
        "screen",
        config=config,
        prepared=prepared,
        source=source,
        graph={
            "kind": config.graph,
            "k": config.k if config.graph == "knn" else None,
            "within_m": config.within,
            "max_distance_m": round(float(graph.max_distance), 3),
            "max_distance_automatic": config.max_distance is None,
            "min_neighbours": config.min_neighbours,
        },
        distance_scale={
            name: {
                "distance_m": [round(float(np.exp(k)), 3) for k in knots],
                "robust_sd": [round(float(s), 6) for s in knot_scale],
            }
            for name, (knots, knot_scale) in local.distance_model.items()
        },
        predictor={
            "local_plane": int((screened & ~local.quadratic_used).sum()),
            "local_quadratic": int((screened & local.quadratic_used).sum()),
        },
        trend=trend_info,
        judged_scale=judging.record,
        strips={"values": "residuals from the regional trend" if trended else "the values"},
        context={**context.record, **context_info},
        repairs={"kinds": list(kinds), "chance_of_fitting_by_chance": {k: (round(v, 4) if isinstance(v, float) else v) for k, v in chance.items()},
                 "counted_when_chance_at_most": 0.01},
        local_autocorrelation={
            "kernel": autocorr.kernel,
            "permutations": config.permutations,
            "points_with_more_permutations": int((autocorr.permutations > config.permutations).sum()),
            "p_adjustment": "Benjamini-Hochberg",
            "standardization": (f"values clipped at the median +- {CLIP_SD:g} robust sd (1.4826 x MAD) before the "
                                "mean/sd standardization, so gross errors neither inflate the sd nor squash the scatter"),
            "quadrant_column": "filled only where the adjusted p passes the fdr",
            "fdr": config.fdr,
        },
        **spatial_info,
        engine=engine.record(),
        counts=counts,
        timings_s={k: round(v, 4) for k, v in timings.items()},
    )
    run_info["notes"] = run_info["notes"] + list(judging.notes)
    return ScreenResult(
        frame=out,
        counts=counts,
        run_info=run_info,
        tables={"strips": strip_layer, **spatial_tables(
            lag_screen, variogram, prepared, status=added["screen_status"], coherent=local.coherent,
            raw_ids=_raw_ids(frame, config, prepared), detrended=trend_info.get("method", "none") != "none")},
        prepared=prepared,
        graph=graph,
        local=local,
        autocorr=autocorr,
        config=config,
        artefacts={
            "structure": structure,
            "coincident": coincident,
            "detrended": detrended,
            "lag_pairs": lag_screen,
            "variogram": variogram,
            "strips": strips,
        },
    )


def screen(gdf: gpd.GeoDataFrame, value: str, id: str | None = None, **options) -> gpd.GeoDataFrame:
    """Screen a point layer and return it with status, score and reasons.

    Parameters
    ----------
    gdf : geopandas.GeoDataFrame
        Point measurements with a CRS (or pass ``crs=``).
    value : str
        Column of values to screen.
    id : str, optional
        Column identifying the points in reasons.
    **options
        Any other :class:`~pointsift.config.ScreenConfig` option, e.g.
        ``k=12``, ``suspect_z=6``, ``permutations=499``.

    Returns
    -------
    geopandas.GeoDataFrame
        A copy of ``gdf`` (rows and columns unchanged, same CRS) with the
        columns in :data:`ADDED_COLUMNS`.

    Examples
    --------
    >>> import geopandas as gpd, numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x, y = rng.uniform(0, 5000, (2, 300))
    >>> level = 200 + 0.01 * x + rng.normal(0, 0.2, 300)
    >>> level[7] = level[7] * 10                    # a decimal slip
    >>> wells = gpd.GeoDataFrame({"level": level}, geometry=gpd.points_from_xy(x, y), crs="EPSG:32633")
    >>> out = screen(wells, value="level")
    >>> out.loc[7, "screen_status"]
    'suspect'
    """
    config = ScreenConfig(value=value, id=id, **options)
    return screen_frame(gdf, config).frame
