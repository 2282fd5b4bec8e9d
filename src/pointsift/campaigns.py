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

import geopandas as gpd
import numpy as np
import pandas as pd

from .campaign_layers import changes_layer, wells_layer
from .campaign_pairs import change_columns, change_tasks, plan_pairs
from .campaign_forming import assign_campaigns, choose_representatives, parse_campaign_window
from .campaign_verdict import READING_COLUMNS, decide_readings
from .config import OPTIONS, OptionError, ScreenConfig, check_config_fields, check_fields, convert, spell
from .errors import ConfigError, InputError
from .graph import build_graph, coincident_groups
from .io import SourceInfo
from .methods.change import change_screen
from .methods.history import history_screen, last_digit, relative_series, series_statistics
from .methods.local import _masked_median
from .pipeline import automatic_max_distance, screen_frame
from .prepare import prepare
from .record import run_record
from .verdict import STATUSES

__all__ = ["CampaignConfig", "CampaignResult", "screen_campaigns", "campaigns"]


@dataclass(frozen=True)
class CampaignConfig:
    """Options of a campaign screen (each declared in :data:`pointsift.config.OPTIONS`).

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

    Examples
    --------
    >>> config = CampaignConfig(ScreenConfig(value="level_m", id="well"), date="measured", min_campaigns="8")
    >>> config.min_campaigns, config.campaign_window
    (8, 'spring=1-6,fall=7-12')
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
        if not isinstance(self.screen, ScreenConfig):
            raise ConfigError(f"screen must be a ScreenConfig, got {type(self.screen).__name__}; "
                              "build it with ScreenConfig(value=..., id=...).")
        if self.screen.id is None:
            raise OptionError(f"A campaign screen needs the well id that joins readings across campaigns: pass "
                              f"{spell('id', 'COLUMN')}.", option="id",
                              problem="needs the well id column that joins readings across campaigns.")
        check_fields(self)
        object.__setattr__(self, "jobs", convert("jobs", self.jobs))
        for name in ("campaign_window", "min_campaigns", "min_campaign_readings", "change_permutations", "jobs"):
            if getattr(self, name) is None:
                raise OptionError(f"{spell(name)} needs a value; leave it out for the default.", option=name,
                                  problem="needs a value; leave it out for the default.")
        if self.date is None and self.campaign is None:
            text = (f"Say when each reading was taken: pass {spell('date', 'COLUMN')} (campaigns from dates) or "
                    f"{spell('campaign', 'COLUMN')}.")
            raise OptionError(text, option="date", problem=text, names=("date", "campaign"))
        try:
            parse_campaign_window(self.campaign_window)
        except ConfigError as exc:
            raise OptionError(f"{spell('campaign_window', self.campaign_window)}: {exc}", option="campaign_window",
                              problem=str(exc)) from None

    def as_record(self) -> dict:
        """Options as plain values, for the run record."""
        record = {k: getattr(self, k) for k in ("date", "campaign", "campaign_window", "change_span", "min_campaigns",
                                                "min_campaign_readings", "change_permutations", "jobs")}
        record["screen"] = self.screen.as_record()
        return record


# every CampaignConfig field but the nested screen and jobs (read by the command) is in the option table
check_config_fields(CampaignConfig, "campaign", others=("screen", "jobs"))


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
    latest_screen : ScreenResult or None
        The single-campaign screen of the latest campaign large enough to be
        screened (its statuses are that screen's, before the change and
        history evidence), for the report; None when no campaign was screened.
    latest_campaign : str
        Its label ("" when none).
    """

    readings: gpd.GeoDataFrame
    wells: gpd.GeoDataFrame
    changes: gpd.GeoDataFrame
    run_info: dict
    counts: dict
    series: dict = field(default_factory=dict)
    campaign_labels: tuple = ()
    latest_screen: object = field(default=None, repr=False)
    latest_campaign: str = ""


_CAMPAIGN_SCREEN_COLUMNS = ("screen_status", "screen_score", "screen_reasons", "expected_value", "local_residual_z")


def _screen_one(sub: gpd.GeoDataFrame, config: ScreenConfig, keep: bool = False):
    """One campaign through the single-campaign pipeline (runs in a worker when ``jobs > 1``);
    with ``keep`` (the latest campaign, screened in this process) the whole result as ``"result"`` too."""
    try:
        result = screen_frame(sub, config)
    except InputError as exc:
        return str(exc)
    out = {name: result.frame[name].to_numpy() for name in _CAMPAIGN_SCREEN_COLUMNS}
    out["coherent"] = np.asarray(result.local.coherent, dtype=bool)
    if keep:
        out["result"] = result
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


def _refuse_added_columns(frame) -> None:
    added_lower = {c.lower() for c in READING_COLUMNS}
    clash = [str(c) for c in frame.columns if str(c).lower() in added_lower]
    if clash:
        raise InputError(f"The input already has column(s) {', '.join(clash)} (is it a pointsift output?). Rename or drop them.")


def _well_codes(ids: pd.Series):
    """Dense well codes per row (-1 where the id is blank), the well names, and which rows have no id."""
    raw_id = ids.astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
    well_codes, well_names = pd.factorize(raw_id.to_numpy(dtype=object))
    well_names = np.asarray(well_names, dtype=object)
    missing_id = raw_id.to_numpy() == ""
    if missing_id.any():
        blank = int(np.flatnonzero(well_names == "")[0]) if (well_names == "").any() else -1
        well_codes = np.where(missing_id, -1, well_codes)
        if blank >= 0:  # keep codes dense: drop the blank name
            well_codes = np.where(well_codes > blank, well_codes - 1, well_codes)
            well_names = np.delete(well_names, blank)
    return well_codes, well_names, missing_id


def _representatives(prepared, missing_id, info, well_codes, n_wells: int, where: str):
    """Each row's reason for being left out (or ""), the representative readings, the rows they represent,
    and the (well x campaign) matrix of representative rows (-1: no reading)."""
    reasons = prepared.unscreened_reason.copy()
    reasons = np.where((reasons == "") & missing_id, "no well id", reasons)
    reasons = np.where((reasons == "") & (info.reason != ""), info.reason, reasons).astype(object)
    usable = prepared.usable & (reasons == "")
    if not usable.any():
        raise InputError(f"No reading of {where} has a well id, a campaign, a location and a value (first reason: {reasons[0]}).")
    rep, represented_by = choose_representatives(well_codes, info, usable)
    matrix = np.full((n_wells, len(info.labels)), -1, dtype=np.int64)
    matrix[well_codes[rep], info.code[rep]] = np.flatnonzero(rep)
    return reasons, rep, represented_by, matrix


def _locations(xy, well_codes, rep, n_wells: int, sc: ScreenConfig):
    """Each well's usual spot, the readings away from it, each well's nearest other well, the neighbour fence.

    Returns ``(reference row per well, shift per row in metres, moved rows, nearest distance per well,
    max_distance)``.
    """
    from scipy.spatial import cKDTree

    n = xy.shape[0]
    ref_row = _reference_locations(xy, well_codes, rep, n_wells)
    shift = np.full(n, np.nan)
    shift[rep] = np.hypot(*(xy[rep] - xy[ref_row[well_codes[rep]]]).T)
    moved = rep & (shift > sc.coincident_tolerance)
    ref_xy = xy[ref_row[ref_row >= 0]]
    distinct = np.unique(ref_xy, axis=0)
    nearest = np.full(n_wells, np.inf)
    if distinct.shape[0] >= 2:
        d, _ = cKDTree(distinct).query(xy[np.maximum(ref_row, 0)], k=2)
        nearest = np.where(d[:, 0] > 0, d[:, 0], d[:, 1])
    max_distance = sc.max_distance if sc.max_distance is not None else automatic_max_distance(ref_xy)
    return ref_row, shift, moved, nearest, max_distance


def _campaign_and_change_screens(frame, prepared, rep, info, matrix, span: int, cache, config: CampaignConfig):
    """Every campaign large enough through the single-campaign pipeline, every campaign pair's changes through
    the change screen, in one pool of workers.

    Returns ``(campaign columns, change columns, changes-layer records, campaigns screened,
    (the latest campaign's ScreenResult or None, its label))``.
    """
    sc = config.screen
    n, xy, values = prepared.n, prepared.xy, prepared.values
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
    for c in range(len(info.labels)):
        rows = np.flatnonzero(rep & (info.code == c))
        if rows.size < config.min_campaign_readings:
            camp["reasons"][rows] = (f"campaign {info.labels[c]} has {rows.size} reading{'s' if rows.size != 1 else ''} "
                                     f"(at least {config.min_campaign_readings} needed for the campaign screen)")
        else:
            tasks.append((c, rows))
    pairs, consecutive, spans = plan_pairs(matrix, span, sc.min_neighbours)
    pair_keys, pair_tasks = change_tasks(pairs, values, xy, config, cache)
    # the latest campaign is screened here, so its whole result (for the report) never crosses a process boundary
    results = _run_tasks([("campaign", (work_frame.iloc[rows], work)) for _, rows in tasks[:-1]] + pair_tasks,
                         config.jobs)
    if tasks:
        results.insert(len(tasks) - 1, _screen_one(work_frame.iloc[tasks[-1][1]], work, keep=True))
    latest = results[len(tasks) - 1] if tasks and not isinstance(results[len(tasks) - 1], str) else None
    for (c, rows), got in zip(tasks, results[: len(tasks)]):
        if isinstance(got, str):
            camp["reasons"][rows] = f"campaign {info.labels[c]} not screened: {got}"
            continue
        for key, column in (("status", "screen_status"), ("score", "screen_score"), ("reasons", "screen_reasons"),
                            ("expected", "expected_value"), ("z", "local_residual_z"), ("coherent", "coherent")):
            camp[key][rows] = got[column]
    change, records = change_columns(n, pairs, dict(zip(pair_keys, results[len(tasks):])), consecutive, spans)
    latest_screen = (latest["result"], info.labels[tasks[-1][0]]) if latest is not None else (None, "")
    return camp, change, records, len(tasks), latest_screen


def _regional_levels(values, well_codes, rep, info, n_wells: int, cache, min_neighbours: int):
    """Each well's median level, and per representative reading the neighbours' median anomaly."""
    well_median = np.full(n_wells, np.nan)
    rep_rows = np.flatnonzero(rep)
    med = pd.Series(values[rep_rows]).groupby(well_codes[rep_rows]).median()
    well_median[med.index.to_numpy()] = med.to_numpy()
    regional = np.full(values.size, np.nan)
    for c in range(len(info.labels)):
        rows = np.flatnonzero(rep & (info.code == c))
        if rows.size > min_neighbours:
            regional[rows] = _regional(values, well_median, well_codes, rows, cache.get(rows))
    return well_median, regional


def _previous_rows(matrix, n: int):
    """Per representative reading, the row of the same well's previous representative reading (-1: none)."""
    prev_row = np.full(n, -1, dtype=np.int64)
    for w in range(matrix.shape[0]):
        rows = matrix[w][matrix[w] >= 0]
        prev_row[rows[1:]] = rows[:-1]
    return prev_row


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
    _refuse_added_columns(frame)
    where = (f"layer {source.layer!r} of {source.path!r}" if source.layer else repr(source.path)) if source else "the readings"
    prepared = prepare(frame, sc, where=where)
    n = prepared.n
    well_codes, well_names, missing_id = _well_codes(frame[sc.id])
    window = parse_campaign_window(config.campaign_window)
    info = assign_campaigns(frame, date=config.date, campaign=config.campaign, window=window, campaign_order=campaign_order)
    reasons, rep, represented_by, matrix = _representatives(prepared, missing_id, info, well_codes, well_names.size,
                                                            where)
    n_wells, n_campaigns = matrix.shape
    values, xy = prepared.values, prepared.xy
    timings["prepare_s"] = time.perf_counter() - started
    ref_row, shift, moved, nearest, max_distance = _locations(xy, well_codes, rep, n_wells, sc)

    # 1. each campaign through the single-campaign screen, and each campaign pair's changes
    #    through the change screen (one pool of workers for both)
    t = time.perf_counter()
    span = config.change_span or (window.per_year if config.campaign is None and window.per_year >= 2 else 2)
    cache = _GraphCache(xy, well_codes, sc, max_distance)
    camp, change, records, screened, latest = _campaign_and_change_screens(frame, prepared, rep, info, matrix, span,
                                                                           cache, config)
    timings["campaign_and_change_screens_s"] = time.perf_counter() - t

    # 2. neighbours' shared movement (the regional part each history is relative to)
    t = time.perf_counter()
    well_median, regional = _regional_levels(values, well_codes, rep, info, n_wells, cache, sc.min_neighbours)
    timings["regional_s"] = time.perf_counter() - t

    # 3. each well's own history
    t = time.perf_counter()
    history = _history(matrix, values, regional, info, config)
    history["_well"] = well_codes
    timings["history_s"] = time.perf_counter() - t

    # 4. one verdict per reading
    t = time.perf_counter()
    labels = np.asarray(info.labels, dtype=object)
    verdict = decide_readings(
        n=n, reasons=reasons, representative=rep, represented_by=represented_by, campaign_code=info.code,
        labels=labels, values=values, camp=camp, change=change, history=history, prev_row=_previous_rows(matrix, n),
        shift=shift, moved=moved, nearest=nearest[np.maximum(well_codes, 0)], days=info.days, config=sc,
        span=span, min_campaigns=config.min_campaigns,
        season=np.where(info.code >= 0, np.asarray(info.season, dtype=object)[np.maximum(info.code, 0)], ""),
    )
    timings["verdict_s"] = time.perf_counter() - t

    neighbour_level = np.where(np.isfinite(regional), regional + well_median[np.maximum(well_codes, 0)], np.nan)
    verdict["neighbours_median_level"] = np.round(neighbour_level, 6)
    verdict["campaign_label"] = np.where(info.code >= 0, labels[np.maximum(info.code, 0)], "")
    out = frame.copy()
    for name in READING_COLUMNS:
        out[name] = verdict[name]
    status = out["reading_status"].to_numpy()
    counts = {s: int((status == s).sum()) for s in STATUSES}
    wells = wells_layer(frame, {"value": values}, well_codes, well_names, ref_row, matrix, info, info.days,
                         np.flatnonzero(moved), shift, status)
    changes = changes_layer(frame, records, well_names, well_codes, labels)
    timings["total_s"] = time.perf_counter() - started
    run_info = run_record(
        "campaigns", config=sc, prepared=prepared, source=source, parameters=config.as_record(),
        wells=int(n_wells), campaigns=int(n_campaigns), campaigns_screened=int(screened),
        campaign_rule=(f"label column {config.campaign!r}" if config.campaign
                       else f"windows {config.campaign_window!r} on {config.date!r}"),
        representative_readings=int(rep.sum()), extra_readings=int((represented_by >= 0).sum()),
        change_span_campaigns=int(span), neighbour_graphs={"built": cache.built, "reused": cache.reused},
        moved_wells=sorted({str(well_names[well_codes[r]]) for r in np.flatnonzero(moved)}),
        counts=counts, timings_s={k: round(v, 4) for k, v in timings.items()},
    )
    series = {"matrix": matrix, "neighbour_level": neighbour_level, "values": values, "campaign_year": info.decimal_year,
              "well_names": well_names}
    return CampaignResult(out, wells, changes, run_info, counts, series, info.labels, *latest)


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
    campaign_keys = {o.name for o in OPTIONS.values() if o.config == "campaign"} | {"jobs"}
    screen_options = {k: v for k, v in options.items() if k not in campaign_keys}
    config = CampaignConfig(
        screen=ScreenConfig(value=value, id=id, **screen_options), date=date, campaign=campaign,
        campaign_window=campaign_window, **{k: v for k, v in options.items() if k in campaign_keys},
    )
    return screen_campaigns(gdf, config).readings
