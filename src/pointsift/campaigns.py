"""Repeated campaigns: each reading against its campaign, its neighbours' change and its own history.

Orchestration only (no printing, no click, no paths). Steps:

1. :func:`pointsift.prepare.prepare` once over all readings (values, work CRS);
2. campaigns from dates or labels and one representative reading per well
   and campaign (:mod:`pointsift.campaign_forming`);
3. each campaign's representative readings screened by the single-campaign
   pipeline (:func:`pointsift.pipeline.screen_frame`, unchanged);
4. each well's change between consecutive campaigns, and over a longer span
   (``change_span`` campaigns: by default the same season a year earlier),
   screened against its neighbours' changes (:mod:`pointsift.methods.change`);
   one neighbour graph per distinct well set, reused across campaigns;
5. each well's series judged by :mod:`pointsift.methods.history`;
6. one verdict per reading (:mod:`pointsift.campaign_verdict`).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from datetime import datetime, timezone

import geopandas as gpd
import numpy as np
import pandas as pd

from .campaign_forming import assign_campaigns, choose_representatives, parse_campaign_window
from .campaign_verdict import READING_COLUMNS, decide_readings
from .config import ScreenConfig
from .errors import ConfigError, InputError
from .graph import build_graph, coincident_groups
from .io import SourceInfo
from .methods.change import change_screen
from .methods.history import history_screen, last_digit, relative_series, series_statistics, theil_sen
from .methods.local import _masked_median
from .pipeline import automatic_max_distance, screen_frame
from .prepare import prepare
from .record import CAUTION, library_versions
from .verdict import STATUSES

__all__ = ["CampaignConfig", "CampaignResult", "screen_campaigns", "campaigns"]


@dataclass(frozen=True)
class CampaignConfig:
    """Options of a campaign screen.

    Parameters
    ----------
    screen : ScreenConfig
        The single-campaign screen's options (value, id, neighbours,
        thresholds, context columns...), used for every campaign and, for
        the graph and thresholds, for the change screen. ``id`` is required.
    date, campaign : str or None
        Date column (campaigns from ``campaign_window``) or campaign label column.
    campaign_window : str
        The rule forming campaigns from dates (:mod:`pointsift.campaign_forming`).
    change_span : int or None
        Campaigns between the two readings of the longer change; None: the
        campaigns per year of the window rule (the same season a year
        earlier), or 2 for year or label campaigns.
    min_campaigns : int
        Readings of a well below which its history is not judged.
    min_campaign_readings : int
        Representative readings below which a campaign is not screened on its own.
    change_permutations : int
        Conditional permutations for Local Moran's I of the changes.
    jobs : int
        Worker processes for the per-campaign screens.
    """

    screen: ScreenConfig
    date: str | None = None
    campaign: str | None = None
    campaign_window: str = "spring=1-6,fall=7-12"
    change_span: int | None = None
    min_campaigns: int = 6
    min_campaign_readings: int = 20
    change_permutations: int = 199
    jobs: int = 1

    def __post_init__(self) -> None:
        if self.screen.id is None:
            raise ConfigError("A campaign screen needs the well id that joins readings across campaigns: pass --id COLUMN.")
        if self.date is None and self.campaign is None:
            raise ConfigError("Say when each reading was taken: pass --date COLUMN (campaigns from dates) or --campaign COLUMN.")
        parse_campaign_window(self.campaign_window)
        for name, low in (("min_campaigns", 3), ("min_campaign_readings", 5), ("jobs", 1)):
            value = getattr(self, name)
            if not (isinstance(value, int) and value >= low):
                raise ConfigError(f"{name} must be a whole number of at least {low}, got {value!r}.")
        if self.change_span is not None and not (isinstance(self.change_span, int) and self.change_span >= 2):
            raise ConfigError(f"change_span must be a whole number of campaigns, at least 2, got {self.change_span!r}.")
        if not (isinstance(self.change_permutations, int) and 99 <= self.change_permutations <= 100_000):
            raise ConfigError(f"change_permutations must be a whole number from 99 to 100000, got {self.change_permutations!r}.")

    def as_record(self) -> dict:
        """Options as plain values, for the run record."""
        record = {k: getattr(self, k) for k in ("date", "campaign", "campaign_window", "change_span", "min_campaigns",
                                                "min_campaign_readings", "change_permutations", "jobs")}
        record["screen"] = self.screen.as_record()
        return record


@dataclass
class CampaignResult:
    """Everything a campaign screen produced.

    Attributes
    ----------
    readings : geopandas.GeoDataFrame
        Every input row, unchanged and in order, input CRS, plus
        :data:`pointsift.campaign_verdict.READING_COLUMNS`.
    wells : geopandas.GeoDataFrame
        One point per well.
    changes : geopandas.GeoDataFrame
        One point per well and campaign pair screened.
    run_info : dict
        Parameters, counts, moved wells, timings, caution.
    counts : dict
        Readings per status.
    series : dict
        Per well: ``rows`` (representative rows in campaign order),
        ``neighbour_level`` (neighbours' median series on the well's level),
        for reports.
    campaign_labels : tuple of str
    """

    readings: gpd.GeoDataFrame
    wells: gpd.GeoDataFrame
    changes: gpd.GeoDataFrame
    run_info: dict
    counts: dict
    series: dict = field(default_factory=dict)
    campaign_labels: tuple = ()


_CAMPAIGN_SCREEN_COLUMNS = ("screen_status", "screen_score", "screen_reasons", "expected_value", "local_residual_z")


def _screen_one(sub: gpd.GeoDataFrame, config: ScreenConfig):
    """One campaign through the single-campaign pipeline (runs in a worker when ``jobs > 1``)."""
    try:
        result = screen_frame(sub, config)
    except InputError as exc:
        return str(exc)
    out = {name: result.frame[name].to_numpy() for name in _CAMPAIGN_SCREEN_COLUMNS}
    out["coherent"] = np.asarray(result.local.coherent, dtype=bool)
    return out


def _screen_change(xy, change, graph, config: ScreenConfig, permutations: int, seed: int):
    """One campaign pair's changes through the change screen (runs in a worker when ``jobs > 1``)."""
    return change_screen(xy, change, graph, min_neighbours=config.min_neighbours, permutations=permutations, seed=seed)


def _call(task):
    kind, args = task
    return _screen_one(*args) if kind == "campaign" else _screen_change(*args)


def _run_tasks(tasks: list, jobs: int) -> list:
    """Run campaign and change screens, in ``jobs`` worker processes when more than one."""
    if jobs <= 1 or len(tasks) < 4:
        return [_call(task) for task in tasks]
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    methods = multiprocessing.get_all_start_methods()
    context = multiprocessing.get_context("fork" if "fork" in methods else methods[0])
    # largest first, so the workers finish together
    order = sorted(range(len(tasks)), key=lambda i: -len(tasks[i][1][0]))
    with ProcessPoolExecutor(max_workers=jobs, mp_context=context) as pool:
        done = list(pool.map(_call, [tasks[i] for i in order], chunksize=max(1, len(tasks) // (8 * jobs))))
    results = [None] * len(tasks)
    for i, got in zip(order, done):
        results[i] = got
    return results


class _GraphCache:
    """One neighbour graph per distinct set of wells and locations, built once."""

    def __init__(self, xy, well, config: ScreenConfig, max_distance: float):
        self.xy, self.well, self.config, self.max_distance = xy, well, config, max_distance
        self.graphs: dict = {}
        self.built = 0
        self.reused = 0

    def get(self, rows: np.ndarray):
        key = hash((self.well[rows].tobytes(), self.xy[rows].tobytes()))
        graph = self.graphs.get(key)
        if graph is None:
            xy = self.xy[rows]
            cfg = self.config
            graph = build_graph(
                xy, kind=cfg.graph, k=cfg.k, within=cfg.within, max_distance=self.max_distance,
                coincident=coincident_groups(xy, cfg.coincident_tolerance), workers=1,
            )
            self.graphs[key] = graph
            self.built += 1
        else:
            self.reused += 1
        return graph


def _reference_locations(xy, well, rep, n_wells):
    """Each well's usual location: its most frequent coordinates among its representative readings."""
    rows = np.flatnonzero(rep)
    key = pd.DataFrame({"w": well[rows], "x": np.round(xy[rows, 0], 3), "y": np.round(xy[rows, 1], 3), "row": rows})
    counted = key.groupby(["w", "x", "y"], sort=False).agg(size=("row", "size"), row=("row", "min")).reset_index()
    counted = counted.sort_values(["w", "size", "row"], ascending=[True, False, True]).drop_duplicates("w")
    ref_row = np.full(n_wells, -1, dtype=np.int64)
    ref_row[counted["w"].to_numpy()] = counted["row"].to_numpy()
    return ref_row


def _regional(values, well_median, well, rows, graph):
    """Neighbours' median anomaly (reading minus the neighbour's own median) for each of ``rows``."""
    anomaly = values[rows] - well_median[well[rows]]
    idx = graph.indices
    safe = np.where(idx >= 0, idx, 0)
    return _masked_median(anomaly[safe], graph.mask)


def _plan_pairs(matrix, span: int, min_neighbours: int):
    """Campaign pairs to screen: each well's change since its previous reading (within ``span`` campaigns) and over ``span``.

    Returns
    -------
    pairs : dict
        ``(a, b) -> (wells measured in both, their rows at b, their rows at a)``, rows at b sorted.
    consecutive : list of (a, b, wells whose previous reading is at a)
    spans : list of (a, b)
    """
    n_wells, n_campaigns = matrix.shape
    present = matrix >= 0
    last_seen = np.full(n_wells, -1, dtype=np.int64)
    pairs: dict = {}
    consecutive, spans = [], []

    def add(a, b):
        if (a, b) not in pairs:
            both = np.flatnonzero(present[:, a] & present[:, b])
            rows_b, rows_a = matrix[both, b], matrix[both, a]
            order = np.argsort(rows_b)
            pairs[(a, b)] = (both[order], rows_b[order], rows_a[order]) if both.size > min_neighbours else None
        return pairs[(a, b)] is not None

    for b in range(n_campaigns):
        here = np.flatnonzero(present[:, b])
        prev = last_seen[here]
        for a in np.unique(prev[(prev >= 0) & (b - prev <= span)]):
            if add(int(a), b):
                consecutive.append((int(a), b, here[prev == a]))
        if b - span >= 0 and add(b - span, b):
            spans.append((b - span, b))
        last_seen[here] = b
    return {k: v for k, v in pairs.items() if v is not None}, consecutive, spans


def _change_tasks(pairs, values, xy, config: CampaignConfig, cache):
    keys = list(pairs)
    tasks = []
    for a, b in keys:
        _, rows_b, rows_a = pairs[(a, b)]
        tasks.append(("change", (xy[rows_b], values[rows_b] - values[rows_a], cache.get(rows_b), config.screen,
                                 config.change_permutations, config.screen.seed + b)))
    return keys, tasks


def _change_columns(n, pairs, results: dict, consecutive, spans):
    """Per-row change columns and the ``changes`` layer records from the screened pairs."""
    cols = {k: np.full(n, np.nan) for k in ("change", "expected_change", "change_z", "nb_median", "nb_sd",
                                              "span_change", "span_expected", "span_z", "span_nb_median", "span_nb_sd")}
    cols["change_from"] = np.full(n, -1, dtype=np.int64)
    cols["span_from"] = np.full(n, -1, dtype=np.int64)
    cols["coherent"] = np.zeros(n, dtype=bool)
    cols["span_coherent"] = np.zeros(n, dtype=bool)
    cols["nb_count"] = np.zeros(n, dtype=np.int64)
    cols["moving_with"] = np.zeros(n, dtype=np.int64)
    cols["span_moving_with"] = np.zeros(n, dtype=np.int64)
    records = []
    for a, b, wells in consecutive:
        both, rows_b, _ = pairs[(a, b)]
        take = np.isin(both, wells)
        r, o = rows_b[take], results[(a, b)][take]
        for col, name in (("change", "change"), ("expected_change", "expected_change"), ("change_z", "change_z"),
                          ("nb_median", "neighbour_median_change"), ("nb_sd", "neighbour_change_sd"),
                          ("nb_count", "change_neighbour_count"), ("coherent", "change_coherent"),
                          ("moving_with", "neighbours_moving_with")):
            cols[col][r] = o[name].to_numpy()
        cols["change_from"][r] = a
        records.append(("consecutive", a, b, r, o))
    for a, b in spans:
        _, rows_b, _ = pairs[(a, b)]
        o = results[(a, b)]
        for col, name in (("span_change", "change"), ("span_expected", "expected_change"), ("span_z", "change_z"),
                          ("span_nb_median", "neighbour_median_change"), ("span_nb_sd", "neighbour_change_sd"),
                          ("span_coherent", "change_coherent"), ("span_moving_with", "neighbours_moving_with")):
            cols[col][rows_b] = o[name].to_numpy()
        cols["span_from"][rows_b] = a
        records.append(("span", a, b, rows_b, o))
    return cols, records


def _history(matrix, values, regional, campaigns_info, config: CampaignConfig):
    """Run the history rules on every well; per-row evidence arrays."""
    n = values.size
    out = {
        "judged": np.zeros(n, dtype=bool), "count": np.zeros(n, dtype=np.int64), "relative": np.full(n, np.nan),
        "spike_z": np.full(n, np.nan), "spike": np.zeros(n, dtype=bool), "step_z": np.full(n, np.nan),
        "step": np.zeros(n, dtype=bool), "range_z": np.full(n, np.nan), "outside": np.zeros(n, dtype=bool),
        "copied_from": np.full(n, -1, dtype=np.int64), "constant_run": np.zeros(n, dtype=np.int64),
        "broken_season": np.zeros(n, dtype=bool), "season_difference": np.full(n, np.nan),
        "season_usual": np.full(n, np.nan), "season_years": np.zeros(n, dtype=np.int64),
        "after_step": np.full(n, -1, dtype=np.int64), "reading_sd": np.full(n, np.nan),
    }
    out["prior_reading_sd"] = None
    seasons = np.asarray(campaigns_info.season, dtype=object)
    years = np.asarray(campaigns_info.year)
    use_seasons = bool(np.any(seasons != ""))
    sc = config.screen
    # a programme-wide reading spread (median over the wells judged) to pool each well's own with
    spreads = []
    for w in range(matrix.shape[0]):
        codes = np.flatnonzero(matrix[w] >= 0)
        if codes.size >= config.min_campaigns:
            rows = matrix[w, codes]
            u = relative_series(values[rows], regional[rows], seasons[codes] if use_seasons else None)
            spreads.append(series_statistics(u, last_digit(values[rows])).reading_sd)
    prior = float(np.nanmedian(spreads)) if spreads else None
    out["prior_reading_sd"] = prior
    for w in range(matrix.shape[0]):
        codes = np.flatnonzero(matrix[w] >= 0)
        if codes.size == 0:
            continue
        rows = matrix[w, codes]
        ev = history_screen(
            values[rows], regional=regional[rows], season=seasons[codes] if use_seasons else None,
            year=years[codes] if use_seasons else None, min_campaigns=config.min_campaigns,
            review_z=sc.review_z, suspect_z=sc.suspect_z, prior_sd=prior,
        )
        out["count"][rows] = codes.size
        if not ev.judged:
            continue
        out["judged"][rows] = True
        out["relative"][rows] = ev.relative
        out["reading_sd"][rows] = ev.stats.reading_sd
        for name in ("spike_z", "spike", "step_z", "step", "range_z", "outside", "constant_run"):
            out[name][rows] = getattr(ev, name)
        out["broken_season"][rows] = ev.broken_season
        out["copied_from"][rows] = np.where(ev.copied_from >= 0, rows[np.maximum(ev.copied_from, 0)], -1)
        if ev.seasonal:
            out["season_difference"][rows] = ev.seasonal["difference"]
            out["season_usual"][rows] = ev.seasonal["usual"]
            out["season_years"][rows] = ev.seasonal["years"]
        # readings after a step carry it until the next step
        start = -1
        for position, row in enumerate(rows):
            if ev.step[position]:
                start = row
            elif start >= 0:
                out["after_step"][row] = start
    return out


def _wells_layer(frame, result_cols, well_codes, well_names, ref_row, matrix, campaigns_info, days, moved_rows, shift, status):
    """One point per well (input CRS): readings, campaigns, counts per status, latest status, Theil-Sen trend."""
    n_wells = well_names.size
    rows_all = pd.Series(np.arange(len(frame)))[well_codes >= 0]
    per_well = rows_all.groupby(well_codes[well_codes >= 0])
    readings = np.zeros(n_wells, dtype=np.int64)
    readings[per_well.size().index.to_numpy()] = per_well.size().to_numpy()
    records = []
    for w in range(n_wells):
        codes = np.flatnonzero(matrix[w] >= 0)
        rows = matrix[w, codes]
        t = days[rows] / 365.2425 + 1970.0
        if not np.isfinite(t).all():
            t = campaigns_info.decimal_year[codes]
        slope, _ = theil_sen(t, result_cols["value"][rows]) if rows.size >= 2 else (np.nan, np.nan)
        records.append({
            "campaigns": int(codes.size),
            "first_campaign": campaigns_info.labels[codes[0]] if codes.size else "",
            "last_campaign": campaigns_info.labels[codes[-1]] if codes.size else "",
            "latest_status": status[rows[-1]] if rows.size else "unscreened",
            "trend_per_year": round(float(slope), 6) if np.isfinite(slope) else np.nan,
            "readings_away_from_usual_location": int(np.isin(rows, moved_rows).sum()),
            "largest_location_shift_m": round(float(np.nanmax(shift[rows])), 2) if rows.size and np.isfinite(shift[rows]).any() else np.nan,
        })
    table = pd.DataFrame(records)
    table.insert(0, "readings", readings)
    table.insert(0, "well_id", well_names)
    counts = pd.crosstab(well_codes[well_codes >= 0], status[well_codes >= 0]).reindex(index=range(n_wells), columns=list(STATUSES), fill_value=0)
    for s in STATUSES:
        table[f"readings_{s}"] = counts[s].to_numpy()
    geometry = frame.geometry.array[np.maximum(ref_row, 0)]
    geometry = np.where(ref_row >= 0, geometry, None)
    return gpd.GeoDataFrame(table, geometry=list(geometry), crs=frame.crs)


def _changes_layer(frame, records, well_names, well_codes, labels):
    """One point per well and campaign pair screened (input CRS)."""
    parts = []
    for kind, a, b, rows, out in records:
        o = out.loc[:, ["change", "expected_change", "neighbour_median_change", "neighbour_change_sd", "change_z",
                        "change_coherent", "change_neighbour_count", "change_moran_quadrant"]].reset_index(drop=True)
        o.insert(0, "to_campaign", labels[b])
        o.insert(0, "from_campaign", labels[a])
        o.insert(0, "pair", kind)
        o.insert(0, "well_id", well_names[well_codes[rows]])
        o["reading_row"] = rows + 1
        parts.append((o, rows))
    if not parts:
        empty = pd.DataFrame(columns=["well_id", "pair", "from_campaign", "to_campaign", "change", "expected_change", "change_z"])
        return gpd.GeoDataFrame(empty, geometry=gpd.GeoSeries([], crs=frame.crs), crs=frame.crs)
    table = pd.concat([p for p, _ in parts], ignore_index=True)
    rows = np.concatenate([r for _, r in parts])
    table = table.rename(columns={"change_coherent": "neighbours_changed_alike", "change_neighbour_count": "neighbour_count",
                                  "change_moran_quadrant": "local_moran_quadrant"})
    return gpd.GeoDataFrame(table, geometry=frame.geometry.array[rows], crs=frame.crs)


def screen_campaigns(
    frame: gpd.GeoDataFrame, config: CampaignConfig, *, campaign_order: list | None = None, source: SourceInfo | None = None
) -> CampaignResult:
    """Screen every reading of a repeated-campaign programme.

    Parameters
    ----------
    frame : geopandas.GeoDataFrame
        Long form: one row per reading with the well id, a date or campaign
        label, the value and the location (not modified).
    config : CampaignConfig
        Options.
    campaign_order : list, optional
        Campaign labels in time order (used with ``config.campaign``).
    source : SourceInfo, optional
        Provenance for the run record.

    Returns
    -------
    CampaignResult

    Raises
    ------
    InputError
        Missing columns, no usable reading, or added column names already present.
    """
    started = time.perf_counter()
    timings: dict[str, float] = {}
    sc = config.screen
    added_lower = {c.lower() for c in READING_COLUMNS}
    clash = [str(c) for c in frame.columns if str(c).lower() in added_lower]
    if clash:
        raise InputError(f"The input already has column(s) {', '.join(clash)} (is it a pointsift output?). Rename or drop them.")
    where = (f"layer {source.layer!r} of {source.path!r}" if source.layer else repr(source.path)) if source else "the readings"
    prepared = prepare(frame, sc, where=where)
    n = prepared.n
    raw_id = frame[sc.id].astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
    well_codes, well_names = pd.factorize(raw_id.to_numpy(dtype=object))
    well_names = np.asarray(well_names, dtype=object)
    missing_id = raw_id.to_numpy() == ""
    if missing_id.any():
        blank = int(np.flatnonzero(well_names == "")[0]) if (well_names == "").any() else -1
        well_codes = np.where(missing_id, -1, well_codes)
        if blank >= 0:  # keep codes dense: drop the blank name
            well_codes = np.where(well_codes > blank, well_codes - 1, well_codes)
            well_names = np.delete(well_names, blank)
    window = parse_campaign_window(config.campaign_window)
    info = assign_campaigns(frame, date=config.date, campaign=config.campaign, window=window, campaign_order=campaign_order)
    reasons = prepared.unscreened_reason.copy()
    reasons = np.where((reasons == "") & missing_id, "no well id", reasons)
    reasons = np.where((reasons == "") & (info.reason != ""), info.reason, reasons).astype(object)
    usable = prepared.usable & (reasons == "")
    if not usable.any():
        raise InputError(f"No reading of {where} has a well id, a campaign, a location and a value (first reason: {reasons[0]}).")
    rep, represented_by = choose_representatives(well_codes, info, usable)
    n_wells, n_campaigns = well_names.size, len(info.labels)
    matrix = np.full((n_wells, n_campaigns), -1, dtype=np.int64)
    matrix[well_codes[rep], info.code[rep]] = np.flatnonzero(rep)
    values, xy = prepared.values, prepared.xy
    timings["prepare_s"] = time.perf_counter() - started

    # --- locations: each well's usual spot, and readings away from it -------------
    ref_row = _reference_locations(xy, well_codes, rep, n_wells)
    shift = np.full(n, np.nan)
    shift[rep] = np.hypot(*(xy[rep] - xy[ref_row[well_codes[rep]]]).T)
    moved = rep & (shift > sc.coincident_tolerance)
    ref_xy = xy[ref_row[ref_row >= 0]]
    from scipy.spatial import cKDTree

    distinct = np.unique(ref_xy, axis=0)
    nearest = np.full(n_wells, np.inf)
    if distinct.shape[0] >= 2:
        d, _ = cKDTree(distinct).query(xy[np.maximum(ref_row, 0)], k=2)
        nearest = np.where(d[:, 0] > 0, d[:, 0], d[:, 1])
    max_distance = sc.max_distance if sc.max_distance is not None else automatic_max_distance(ref_xy)

    # --- 1. each campaign through the single-campaign screen, and each campaign pair's
    #        changes through the change screen (one pool of workers for both)
    t = time.perf_counter()
    # campaigns are screened in the work CRS (already computed): same distances,
    # no reprojection per campaign; the single screen's columns are all the campaign screen keeps
    located = np.isfinite(xy).all(axis=1)
    work_geometry = np.full(n, None, dtype=object)
    work_geometry[located] = gpd.points_from_xy(xy[located, 0], xy[located, 1])
    work_frame = gpd.GeoDataFrame(pd.DataFrame(frame.drop(columns=frame.geometry.name)), geometry=list(work_geometry),
                                  crs=prepared.work_crs)
    work = sc.replace(crs=None, work_crs=None)
    camp = {"status": np.full(n, "", dtype=object), "score": np.full(n, np.nan), "reasons": np.full(n, "", dtype=object),
            "expected": np.full(n, np.nan), "z": np.full(n, np.nan), "coherent": np.zeros(n, dtype=bool)}
    tasks = []
    for c in range(n_campaigns):
        rows = np.flatnonzero(rep & (info.code == c))
        if rows.size < config.min_campaign_readings:
            camp["reasons"][rows] = (f"campaign {info.labels[c]} has {rows.size} reading{'s' if rows.size != 1 else ''} "
                                     f"(at least {config.min_campaign_readings} needed for the campaign screen)")
        else:
            tasks.append((c, rows))
    span = config.change_span or (window.per_year if config.campaign is None and window.per_year >= 2 else 2)
    pairs, consecutive, spans = _plan_pairs(matrix, span, sc.min_neighbours)
    cache = _GraphCache(xy, well_codes, sc, max_distance)
    pair_keys, change_tasks = _change_tasks(pairs, values, xy, config, cache)
    results = _run_tasks([("campaign", (work_frame.iloc[rows], work)) for _, rows in tasks] + change_tasks, config.jobs)
    for (c, rows), got in zip(tasks, results[: len(tasks)]):
        if isinstance(got, str):
            camp["reasons"][rows] = f"campaign {info.labels[c]} not screened: {got}"
            continue
        camp["status"][rows] = got["screen_status"]
        camp["score"][rows] = got["screen_score"]
        camp["reasons"][rows] = got["screen_reasons"]
        camp["expected"][rows] = got["expected_value"]
        camp["z"][rows] = got["local_residual_z"]
        camp["coherent"][rows] = got["coherent"]
    change, records = _change_columns(n, pairs, dict(zip(pair_keys, results[len(tasks):])), consecutive, spans)
    timings["campaign_and_change_screens_s"] = time.perf_counter() - t

    # --- 2. neighbours' shared movement (the regional part each history is relative to)
    t = time.perf_counter()
    well_median = np.full(n_wells, np.nan)
    rep_rows = np.flatnonzero(rep)
    med = pd.Series(values[rep_rows]).groupby(well_codes[rep_rows]).median()
    well_median[med.index.to_numpy()] = med.to_numpy()
    regional = np.full(n, np.nan)
    for c in range(n_campaigns):
        rows = np.flatnonzero(rep & (info.code == c))
        if rows.size > sc.min_neighbours:
            regional[rows] = _regional(values, well_median, well_codes, rows, cache.get(rows))
    timings["regional_s"] = time.perf_counter() - t

    # --- 3. each well's own history -----------------------------------------------
    t = time.perf_counter()
    history = _history(matrix, values, regional, info, config)
    history["_well"] = well_codes
    timings["history_s"] = time.perf_counter() - t

    # --- 4. one verdict per reading ------------------------------------------------
    t = time.perf_counter()
    labels = np.asarray(info.labels, dtype=object)
    prev_row = np.full(n, -1, dtype=np.int64)
    for w in range(n_wells):
        rows = matrix[w][matrix[w] >= 0]
        prev_row[rows[1:]] = rows[:-1]
    verdict = decide_readings(
        n=n, reasons=reasons, representative=rep, represented_by=represented_by, campaign_code=info.code,
        labels=labels, values=values, camp=camp, change=change, history=history, prev_row=prev_row,
        shift=shift, moved=moved, nearest=nearest[np.maximum(well_codes, 0)], days=info.days, config=sc,
        span=span, min_campaigns=config.min_campaigns,
        season=np.where(info.code >= 0, np.asarray(info.season, dtype=object)[np.maximum(info.code, 0)], ""),
    )
    timings["verdict_s"] = time.perf_counter() - t

    out = frame.copy()
    neighbour_level = np.where(np.isfinite(regional), regional + well_median[np.maximum(well_codes, 0)], np.nan)
    verdict["neighbours_median_level"] = np.round(neighbour_level, 6)
    verdict["campaign_label"] = np.where(info.code >= 0, labels[np.maximum(info.code, 0)], "")
    for name in READING_COLUMNS:
        out[name] = verdict[name]
    status = out["reading_status"].to_numpy()
    counts = {s: int((status == s).sum()) for s in STATUSES}
    wells = _wells_layer(frame, {"value": values}, well_codes, well_names, ref_row, matrix, info, info.days,
                         np.flatnonzero(moved), shift, status)
    changes = _changes_layer(frame, records, well_names, well_codes, labels)
    moved_wells = sorted({str(well_names[well_codes[r]]) for r in np.flatnonzero(moved)})
    timings["total_s"] = time.perf_counter() - started
    run_info = {
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "command": "campaigns",
        "input_path": source.path if source else None,
        "input_layer": source.layer if source else None,
        "input_sha256": source.sha256 if source else None,
        "rows": int(n),
        "wells": int(n_wells),
        "campaigns": int(n_campaigns),
        "campaigns_screened": int(len(tasks)),
        "campaign_rule": (f"label column {config.campaign!r}" if config.campaign else f"windows {config.campaign_window!r} on {config.date!r}"),
        "representative_readings": int(rep.sum()),
        "extra_readings": int((represented_by >= 0).sum()),
        "change_span_campaigns": int(span),
        "neighbour_graphs": {"built": cache.built, "reused": cache.reused},
        "moved_wells": moved_wells,
        "input_crs": prepared.input_crs.to_string(),
        "work_crs": prepared.work_crs.to_string(),
        "parameters": config.as_record(),
        "counts": counts,
        "notes": list(prepared.notes),
        "timings_s": {k: round(v, 4) for k, v in timings.items()},
        "versions": library_versions(),
        "caution": CAUTION,
    }
    series = {"matrix": matrix, "neighbour_level": neighbour_level, "values": values, "campaign_year": info.decimal_year,
              "well_names": well_names}
    return CampaignResult(out, wells, changes, run_info, counts, series, info.labels)


def campaigns(gdf: gpd.GeoDataFrame, value: str, id: str, *, date: str | None = None, campaign: str | None = None,
              campaign_window: str = "spring=1-6,fall=7-12", **options) -> gpd.GeoDataFrame:
    """Screen a long-form table of repeated readings; return the readings with status, score and reasons.

    Parameters
    ----------
    gdf : geopandas.GeoDataFrame
        One row per reading.
    value, id : str
        Value and well id columns.
    date, campaign : str, optional
        Date column (campaigns from ``campaign_window``) or campaign label column.
    campaign_window : str
        Rule forming campaigns from dates.
    **options
        :class:`~pointsift.config.ScreenConfig` options (``k=12``...) and
        :class:`CampaignConfig` options (``min_campaigns=8``...).

    Returns
    -------
    geopandas.GeoDataFrame
        The ``readings`` layer.
    """
    campaign_keys = {"change_span", "min_campaigns", "min_campaign_readings", "change_permutations", "jobs"}
    screen_options = {k: v for k, v in options.items() if k not in campaign_keys}
    config = CampaignConfig(
        screen=ScreenConfig(value=value, id=id, **screen_options), date=date, campaign=campaign,
        campaign_window=campaign_window, **{k: v for k, v in options.items() if k in campaign_keys},
    )
    return screen_campaigns(gdf, config).readings
