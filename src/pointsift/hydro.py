"""Hydrogeological evidence: the neighbour graph within aquifer units and nested sites, and the context checks.

Orchestrates :mod:`pointsift.methods.nested` and
:mod:`pointsift.methods.plausibility` for the pipeline; see those modules for
the rules and their sources.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .config import ScreenConfig
from .context import Context, surface_tolerance
from .graph import NeighbourGraph, build_graph
from .judging import Judging
from .methods.local import LocalResult, local_residuals
from .methods.nested import Stations, vertical_gradients
from .methods.plausibility import fmt, plausibility
from .prepare import Prepared
from .verdict import format_length

__all__ = ["neighbour_graph", "context_evidence", "misplaced", "level_residuals", "coincident_z"]

def neighbour_graph(xy, usable, stations: Stations, context: Context, config: ScreenConfig, max_distance: float,
                    tie_rank=None, builder=build_graph):
    """The neighbour graph: within each aquifer unit, one neighbour per nested station.

    Wells with a unit take neighbours of that unit only; wells with no unit
    take the nearest wells of any unit and are neighbours of none of the
    wells that have one. Records of one station are never each other's
    neighbours. ``builder`` makes each graph (:func:`pointsift.graph.build_graph`
    or an engine's partitioned builder with the same arguments and result).
    """
    nested = bool(stations.nested.any())
    k = config.k
    if nested and config.graph == "knn":
        widest = int(np.bincount(stations.station[stations.station >= 0]).max())
        k = min(100, config.k + 2 * widest)

    def build(can_be_neighbour):
        return builder(xy, kind=config.graph, k=k, within=config.within, max_distance=max_distance,
                       coincident=stations.station, usable=can_be_neighbour, tie_rank=tie_rank)

    units = context.aquifer
    if not (usable & (units != "")).any():
        return build(usable), k
    graph = build(usable)  # wells without a unit: the nearest wells of any unit
    indices, distances = graph.indices.copy(), graph.distances.copy()
    for unit in np.unique(units[usable & (units != "")]):
        rows = usable & (units == unit)
        part = build(rows)
        indices[rows], distances[rows] = part.indices[rows], part.distances[rows]
    return NeighbourGraph(indices, distances, graph.kind, graph.max_distance), k


def misplaced(prepared: Prepared, context: Context, graph, level_local: LocalResult, config: ScreenConfig, judged_ok):
    """A well whose land surface and level both disagree with its neighbours but fit another spot.

    Returns (flag, text). The ground elevation is predicted from the
    neighbours' ground elevations like any value; the fitting spot is the
    nearest other well whose ground and level are within 2 robust sd of the
    well's own.
    """
    n = prepared.n
    flag = np.zeros(n, dtype=bool)
    text = np.full(n, "", dtype=object)
    ground = np.where(judged_ok, context.ground, np.nan)
    if np.isfinite(ground).sum() < 10:
        return flag, text
    g_local = local_residuals(prepared.xy, ground, graph, min_neighbours=config.min_neighbours)
    with np.errstate(invalid="ignore"):
        off = (np.abs(g_local.z) >= config.suspect_z) & ~g_local.coherent & (np.abs(level_local.z) >= config.suspect_z)
    units = config.units or ""
    for i in np.flatnonzero(off):
        fits = (np.abs(ground - ground[i]) <= 2 * g_local.scale[i]) & (
            np.abs(prepared.values - prepared.values[i]) <= 2 * level_local.scale[i]) & judged_ok
        fits[i] = False
        if not fits.any():
            continue
        dist = np.hypot(*(prepared.xy[fits] - prepared.xy[i]).T)
        j = np.flatnonzero(fits)[np.argmin(dist)]
        flag[i] = True
        text[i] = (
            f"misplaced or on a steep slope? its land surface ({fmt(context.ground[i], units)}) and level do not fit its neighbours "
            f"(land surface expected {fmt(g_local.expected[i], units)}, {abs(g_local.z[i]):.1f} robust sd off) but both fit "
            f"near {prepared.ids[j]}, {format_length(float(dist.min()))} away: check the coordinates"
        )
    return flag, text


def level_residuals(prepared: Prepared, judging: Judging, graph, local: LocalResult, config: ScreenConfig, judged_ok):
    """The local residuals of the levels themselves (``local`` when the values are what is judged).

    With a ground elevation the screen judges depth to water; the level
    judgement beside it serves the same-spot decision (:func:`coincident_z`)
    and the misplaced-well check. No drift and no depth weighting: the
    neighbours' levels as they are.
    """
    if judging.mode == "values":
        return local
    return local_residuals(prepared.xy, np.where(judged_ok, prepared.values, np.nan), graph,
                           min_neighbours=config.min_neighbours)


def coincident_z(judging: Judging, local: LocalResult, level_local: LocalResult) -> tuple[np.ndarray, np.ndarray]:
    """Standardized residuals and scales for judging records at one spot: do they disagree, whom do the neighbours back.

    Where depth to water is judged, each record is compared on the tighter
    of the two judgements (the level or the depth-to-water surface of its
    neighbours, whichever has the smaller residual scale), and the
    disagreement tolerance is that scale. Records at one spot share their
    neighbours, so the choice is the same for all of them and never favours
    one record: it only makes the comparison as sharp as the neighbours
    allow (on a valley floor the levels are smoother than the depths to
    water; in the foothills the reverse). Returns ``(z, scale)``, the scale
    in level units.
    """
    if judging.mode != "depth to water" or level_local is local:
        return local.z, local.scale
    with np.errstate(invalid="ignore"):
        use_level = np.isfinite(level_local.z) & (level_local.scale < local.scale)
    return np.where(use_level, level_local.z, local.z), np.where(use_level, level_local.scale, local.scale)


def frame_column(frame, name):
    """A column of the input frame (it was checked to exist when the context was read)."""
    return frame[name]


def context_evidence(prepared, context: Context, judging: Judging, stations: Stations, graph, local: LocalResult,
                      config: ScreenConfig, judged_ok, level_local: LocalResult | None = None):
    """Evidence from the context columns, as (mask, text, level) with level "suspect", "review" or "note".

    Plausibility against land surface and well depth, vertical gradients
    between completions of one site, misplaced wells, and land-surface
    raster notes. Returns the evidence list and a ``run_info`` entry.
    ``level_local``: :func:`level_residuals`, when already computed.
    """
    units = config.units or ""
    evidence = []
    checks = plausibility(
        np.where(judged_ok, prepared.values, np.nan), config.quantity, context.ground, context.well_depth,
        context.flowing, tolerance=surface_tolerance(config), units=units, depth_share=config.depth_tolerance,
    )
    strong = checks["strong"].to_numpy()
    text = checks["text"].to_numpy(dtype=object).copy()
    # water below the recorded bottom of a well whose level fits its neighbours: the depth record is the likelier
    # mistake, so a look rather than a verdict
    with np.errstate(invalid="ignore"):
        record_only = strong & (checks["kind"].to_numpy() == "below_well") & (np.abs(local.z) < config.review_z)
    text[record_only] = text[record_only] + ", but the level fits its neighbours: check the recorded well depth"
    evidence.append((strong & ~record_only, text, "suspect"))
    evidence.append((checks["weak"].to_numpy() | record_only, text, "review"))
    flagged, text, vertical = vertical_gradients(stations, context.well_depth, np.where(judged_ok, prepared.values, np.nan),
                                                 prepared.ids, units=units)
    evidence.append((flagged, text, "review"))
    info = {
        "plausibility": {kind: int((checks["kind"] == kind).sum()) for kind in ("above_surface", "below_well", "at_surface")},
        "nested_stations": stations.count,
        "records_in_nested_stations": int(stations.nested.sum()),
        "vertical_gradients": vertical,
    }
    if config.quantity == "level" and context.has_ground:
        if level_local is None:
            level_local = level_residuals(prepared, judging, graph, local, config, judged_ok)
        flag, text = misplaced(prepared, context, graph, level_local, config, judged_ok)
        # without an independent land surface this cannot be told from a steep slope: a look, not a verdict
        evidence.append((flag, text, "review"))
        info["misplaced_or_steep"] = int(flag.sum())
    if context.raster_ground is not None and config.ground_elevation is not None:
        column = pd.to_numeric(frame_column(prepared.frame, config.ground_elevation), errors="coerce").to_numpy(dtype=float)
        gap = column - context.raster_ground
        limit = 10.0 * surface_tolerance(config)
        with np.errstate(invalid="ignore"):
            off = judged_ok & np.isfinite(gap) & (np.abs(gap) > limit)
        text = np.full(prepared.n, "", dtype=object)
        for i in np.flatnonzero(off):
            text[i] = (f"misplaced? the recorded land surface {fmt(column[i], units)} differs by {fmt(abs(gap[i]), units)} "
                       f"from the land-surface raster at this spot ({fmt(context.raster_ground[i], units)}): check the coordinates")
        evidence.append((off, text, "suspect"))
        info["misplaced_by_raster"] = int(off.sum())
    evidence.append((context.note != "", np.where(context.note != "", "land surface unknown here (" + context.note.astype(str) + ")", ""), "note"))
    return evidence, info

