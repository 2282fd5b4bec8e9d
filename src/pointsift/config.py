"""Options: one table, one frozen config per command, validated once at the edge.

Every option is declared once, in :data:`OPTIONS`: its name (the Python
keyword and the plan key), its command-line flag, its kind (text, whole
number, number, length, list of numbers, choice, true/false), its range or
choices, its default, its help and the commands that take it. From that one
table come

* the command-line options of each command (:func:`pointsift.cli.options`),
* the keys a batch plan accepts and their checks (:mod:`pointsift.batch.plan`),
* the validation of :class:`ScreenConfig`, :class:`DescribeConfig` and
  :class:`ReportConfig` (the Python API).

Messages name an option in the caller's own words (:func:`spell`): ``--crs``
on the command line, ``crs=`` in Python, ``crs`` in a plan. The caller is set
by the edge that reads the options (:func:`caller`); library code only calls
:func:`spell`. Adding an option is one entry here (and a field in the config
that holds it); DEVELOPERS.md says how.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

from .option_values import (
    Option,
    OptionError,
    caller,
    check_range,
    convert_kind,
    current_caller,
    fail,
    parse_length,
    spell_option,
)

__all__ = [
    "Option",
    "OPTIONS",
    "COMMANDS",
    "ScreenConfig",
    "DescribeConfig",
    "ReportConfig",
    "OptionError",
    "parse_length",
    "convert",
    "spell",
    "caller",
    "options_for",
    "plan_keys",
    "current_caller",
    "DEFAULT_SENTINELS",
    "QUANTITIES",
    "TRANSFORMS",
    "LAND_SURFACE_USES",
    "ENGINES",
]

DEFAULT_SENTINELS: tuple[float, ...] = (-9999.0, -999.0, -99999.0)

#: Commands whose options come from the table.
COMMANDS = ("screen", "describe", "batch", "campaigns")
#: What the value column measures (see ``ScreenConfig.quantity``).
QUANTITIES = ("level", "depth", "concentration", "other")
TRANSFORMS = ("none", "log", "auto")
#: How the land surface enters the prediction of a water level.
LAND_SURFACE_USES = ("auto", "depth", "drift", "none")
#: Where a screen runs (``ScreenConfig.engine``).
ENGINES = ("local", "dask")

def _check_crs_text(text, name: str) -> None:
    """A CRS option pyproj cannot read is a usage problem, found before any work."""
    if text is None or not isinstance(text, str):
        return
    from pyproj import CRS
    from pyproj.exceptions import CRSError as PyprojCRSError

    try:
        CRS.from_user_input(text)
    except PyprojCRSError:
        raise OptionError(f"{spell(name, text)} is not a CRS pyproj knows. Use a code such as EPSG:4326 or EPSG:32633.",
                          option=name, problem="is not a CRS pyproj knows.") from None


def spell(name: str, example=None) -> str:
    """An option as the current caller writes it, optionally with an example value.

    Parameters
    ----------
    name : str
        Option name (the Python keyword), e.g. ``"crs"``; names not in the
        table are spelled the same way (``"out"`` -> ``--out``).
    example : object, optional
        A value to show, e.g. ``"EPSG:4326"``.

    Returns
    -------
    str
        ``--crs EPSG:4326`` (command line), ``crs='EPSG:4326'`` (Python),
        ``crs = "EPSG:4326"`` (plan).

    Examples
    --------
    >>> spell("crs", "EPSG:4326")
    "crs='EPSG:4326'"
    >>> with caller("plan"):
    ...     spell("crs", "EPSG:4326")
    'crs = "EPSG:4326"'
    """
    return spell_option(OPTIONS.get(name), name, example)


# --------------------------------------------------------------------------- the table


_SCREEN = ("screen", "batch", "campaigns")
_REPORT = ("screen", "describe", "batch")
_CAMPAIGNS = ("campaigns",)
_ENTRY = ("defaults", "input")

OPTIONS: dict[str, Option] = {
    option.name: option
    for option in (
        # --- reading the layer (every command)
        Option("value", "text", "Column holding the measured values", required=("screen", "describe", "campaigns"),
               metavar="COLUMN"),
        Option("id", "text", "Column identifying each point in reasons and tables (campaigns: the well id joining "
               "readings across campaigns)", default_text="the row number", flag="id", dest="id_column",
               metavar="COLUMN"),
        Option("crs", "text", "CRS of the coordinates when the file has none, e.g. EPSG:4326", metavar="CRS"),
        Option("work_crs", "text", "Metric CRS to compute distances in", default_text="chosen from the data", metavar="CRS"),
        Option("sentinels", "numbers", "Comma-separated no-data codes ('none' for none)", default=DEFAULT_SENTINELS,
               flag="no-data", metavar="CODES"),
        Option("coincident_tolerance", "length", "Points closer than this are one spot", default=0.5, default_text="0.5m",
               minimum=0.0),
        # --- the screen
        Option("graph", "choice", "Neighbour graph: k nearest or a distance band", choices=("knn", "band"),
               default_text="band when a band distance is given, else knn", commands=()),
        Option("k", "int", "k nearest neighbours", default=10, flag="neighbours", minimum=3, maximum=100,
               commands=_SCREEN),
        Option("within", "length", "Use every neighbour within this distance instead of k nearest, e.g. 5km",
               minimum=0.0, min_open=True, commands=_SCREEN),
        Option("min_neighbours", "int", "Fewer neighbours leaves a point unscreened", minimum=2, maximum=50,
               default_text="4, or k when k is below 4", commands=_SCREEN),
        Option("max_distance", "length", "Ignore neighbours farther than this", minimum=0.0, min_open=True,
               default_text="from the spacing", commands=_SCREEN),
        Option("coincident_value_tolerance", "float",
               "Records at one spot disagree when their values differ by more", minimum=0.0, min_open=True,
               default_text="1 local robust sd", flag="duplicate-tolerance", commands=_SCREEN),
        Option("permutations", "int", "Permutations for local Moran's I / Gi*", default=999, minimum=99,
               maximum=100_000, commands=_SCREEN),
        Option("seed", "int", "Seed of all random draws", default=20261202, default_text="fixed, runs repeat"),
        Option("fdr", "float", "False discovery rate", default=0.05, minimum=0.0, maximum=1.0, min_open=True,
               max_open=True, commands=_SCREEN),
        Option("suspect_z", "float", "Standardized residual for 'suspect'", default=3.5, minimum=0.0, min_open=True,
               commands=_SCREEN),
        Option("review_z", "float", "Standardized residual for 'review'", default=3.0, minimum=0.0, min_open=True,
               default_text="3", commands=_SCREEN),
        Option("detrend", "choice", "Regional trend removed before the cluster statistics", default="auto",
               choices=("none", "auto", "surface1", "surface2", "polish")),
        Option("lag_count", "int", "Number of variogram lag classes", minimum=1, maximum=1000,
               default_text="from the extent and spacing"),
        Option("lag_width", "length", "Width of the variogram lag classes (0, W], (W, 2W], ..., e.g. 500m",
               minimum=0.0, min_open=True, default_text="from the extent and spacing"),
        Option("thousands", "choice", "',' says commas in text columns group thousands (\"1,234.5\")", choices=(",",),
               default_text="decided per column from its cells"),
        # --- hydrogeological context (docs/methods.md, "The land surface and the well")
        Option("quantity", "choice", "What the values are: water-level elevation, depth to water, concentration, other",
               default="level", choices=QUANTITIES),
        Option("units", "text", "Units of the values (m, ft, or text such as mg/kg), shown in reasons",
               default_text="not stated", metavar="UNITS"),
        Option("ground_elevation", "text", "Column of land-surface elevation at the well, in the values' vertical units",
               metavar="COLUMN"),
        Option("land_surface", "text", "GeoTIFF elevation model sampled at the wells where the ground elevation is blank",
               metavar="RASTER"),
        Option("well_depth", "text", "Column of the well's depth (screen bottom) below land surface", metavar="COLUMN"),
        Option("site", "text", "Column naming the site: completions of one site are separate wells (nested wells)",
               metavar="COLUMN"),
        Option("aquifer", "text", "Column of aquifer unit or depth zone: wells compared within their unit",
               metavar="COLUMN"),
        Option("flowing", "text", "Column marking flowing (artesian) wells: 1, true, yes, flowing", metavar="COLUMN"),
        Option("land_surface_use", "choice", "With a ground elevation: judge depth to water, per well level or depth "
               "(auto), a land-surface drift, or ignore it", default="depth", choices=LAND_SURFACE_USES),
        Option("surface_tolerance", "float", "How far a level may stand above land surface (value units)",
               minimum=0.0, default_text="0.5 m, 1.5 ft with units ft"),
        Option("depth_tolerance", "float", "Share of the deeper well's depth within which two records are one completion",
               default=0.1, minimum=0.0, maximum=1.0, max_open=True),
        Option("transform", "choice", "Scale the screen judges on (auto: log for a strongly skewed positive variable)",
               default="none", choices=TRANSFORMS),
        Option("depth_weighting", "bool", "Neighbours of other well depths weigh less in the local fit", default=True,
               commands=()),
        # --- describe
        Option("directions", "numbers", "Strip directions: azimuths in degrees along which strips run, "
               "comma-separated; 90 west-east, 0 south-north", default=(90.0, 0.0), config="describe",
               commands=("describe",), plan=(), flag="strips", nonempty=True, metavar="AZIMUTHS"),
        Option("strip_width", "length", "Strip width, e.g. 500m", minimum=0.0, min_open=True,
               default_text="from the point density", config="describe", commands=("describe",), plan=()),
        Option("min_strip_points", "int", "Smaller strips are too small to judge", default=5, minimum=5,
               config="describe", commands=("describe",), plan=()),
        Option("stem_unit", "float", "Stem unit of the stem-and-leaf display, a power of ten", minimum=0.0,
               min_open=True, default_text="chosen", config="describe", commands=("describe",), plan=()),
        Option("stem_split", "choice", "Lines per stem", choices=(1, 2, 5), default_text="chosen",
               config="describe", commands=("describe",), plan=()),
        Option("bin_width", "float", "Histogram bin width", minimum=0.0, min_open=True,
               default_text="Freedman-Diaconis", config="describe", commands=("describe",), plan=()),
        # --- the report (screen --report, describe --report, batch report = true)
        Option("report_labels", "int", "Suspects named by id on the report's map, strongest first; the others carry "
               "a number listed under the map", default=80, minimum=0, maximum=100_000, config="report",
               commands=_REPORT),
        Option("report_points", "int", "The report's maps and clouds draw about this many points at most (density "
               "shading or a stated seeded sample beyond; tables keep every row)", default=50_000, minimum=100,
               config="report", commands=_REPORT),
        Option("report_title", "text", "Title of the report page", default_text="from the value column and the input",
               config="report", commands=_REPORT, metavar="TEXT"),
        # --- repeated campaigns (CampaignConfig; docs/campaigns.md)
        Option("date", "text", "Date column; campaigns are formed from it by the campaign window rule",
               config="campaign", commands=_CAMPAIGNS, plan=_ENTRY, metavar="COLUMN"),
        Option("campaign", "text", "Campaign label column (instead of campaigns from dates)", config="campaign",
               commands=_CAMPAIGNS, plan=_ENTRY, metavar="COLUMN"),
        Option("campaign_window", "text", "Rule forming campaigns from dates: NAME=FIRST-LAST months, e.g. "
               "spring=1-6,fall=7-12, or year, or month", default="spring=1-6,fall=7-12", config="campaign",
               commands=_CAMPAIGNS, plan=_ENTRY, metavar="RULE"),
        Option("change_span", "int", "Campaigns between the two readings of the longer change", minimum=2,
               default_text="a year: the same season a year earlier, or 2 campaigns", config="campaign",
               commands=_CAMPAIGNS, plan=_ENTRY),
        Option("min_campaigns", "int", "Readings a well needs for its history to be judged", default=6, minimum=3,
               config="campaign", commands=_CAMPAIGNS, plan=_ENTRY),
        Option("min_campaign_readings", "int", "Readings a campaign needs for the campaign screen", default=20,
               minimum=5, config="campaign", commands=_CAMPAIGNS, plan=_ENTRY),
        Option("change_permutations", "int", "Permutations for local Moran's I of the changes", default=199,
               minimum=99, maximum=100_000, config="campaign", commands=_CAMPAIGNS, plan=_ENTRY),
        # --- where the work runs (pointsift.engine; docs/scale.md)
        Option("engine", "choice", "Where the screen runs: this process, or a Dask cluster (pip install 'pointsift[dask]')",
               choices=ENGINES, default="local", commands=_SCREEN, plan=("defaults",)),
        Option("scheduler", "text", "Address of a running Dask scheduler, e.g. tcp://10.0.0.5:8786",
               default_text="a local cluster started and closed by the run", commands=_SCREEN, plan=("defaults",),
               metavar="ADDRESS"),
        Option("partition_size", "int", "Points per spatial partition of the Dask engine", default=100_000,
               minimum=100, commands=_SCREEN, plan=("defaults",)),
        # --- which part of the input (read by the commands)
        Option("layer", "text", "Layer to read from a multi-layer file (GeoPackage); campaigns: '*' reads every "
               "layer as one campaign", config=None, commands=("screen", "describe", "campaigns"), plan=(),
               metavar="NAME"),
        Option("layers", "texts", "GeoPackage layer to screen; repeat for several", default_text="every layer",
               config=None, commands=("batch",), flag="layer", multiple=True, metavar="NAME"),
        Option("x", "text", "Column of x / longitude / easting (tables)", config=None, dest="x_column",
               metavar="COLUMN"),
        Option("y", "text", "Column of y / latitude / northing (tables)", config=None, dest="y_column",
               metavar="COLUMN"),
        Option("by", "text", "Screen each group of this column on its own, e.g. network_id or a campaign date column",
               config=None, commands=("batch",), metavar="COLUMN"),
        # --- batch settings
        Option("command", "choice", "What a plan entry runs: the single screen, or the screen of repeated campaigns "
               "(the campaign keys then apply)", default="screen", choices=("screen", "campaigns"), config=None,
               commands=(), plan=_ENTRY),
        Option("path", "texts", "Files, globs or folders of one plan entry", config=None, commands=(), plan=("input",)),
        Option("name", "text", "Output name used instead of the file's stem", config=None, commands=(),
               plan=("input",)),
        Option("report", "bool", "Also write a self-contained HTML report beside each output", default=False,
               config=None, commands=("batch",), plan=("batch", "defaults", "input"), dest="batch_report"),
        Option("out_dir", "text", "Folder for the outputs and the batch index", config=None, commands=("batch",),
               plan=("batch",), metavar="DIR"),
        Option("jobs", "int", "Worker processes", default=1, default_text="1, or the plan's jobs", minimum=1,
               config=None, commands=("batch", "campaigns"), plan=("batch",), short="j"),
    )
}


def options_for(command: str) -> list[Option]:
    """The options ``command`` offers on the command line, in table order."""
    if command not in COMMANDS:
        raise ValueError(f"command {command!r} is not known; choose one of {', '.join(COMMANDS)}.")
    return [option for option in OPTIONS.values() if command in option.commands]


def plan_keys(table: str) -> tuple[str, ...]:
    """Keys a plan table (``"batch"``, ``"defaults"``, ``"input"``) accepts, in table order."""
    return tuple(option.name for option in OPTIONS.values() if table in option.plan)


def convert(name: str, value):
    """Check one option's value on its own and return it in its kind (lengths in metres).

    None (not given) passes through. The message of a wrong value names the
    option as the current :func:`caller` writes it, the value, and what is
    valid.

    Parameters
    ----------
    name : str
        Option name, a key of :data:`OPTIONS`.
    value : object
        As given: text from the command line, a TOML value, a Python value.

    Returns
    -------
    object

    Raises
    ------
    OptionError

    Examples
    --------
    >>> convert("lag_width", "500m"), convert("k", "12"), convert("sentinels", "-9999,-1")
    (500.0, 12, (-9999.0, -1.0))
    >>> convert("k", 2)
    Traceback (most recent call last):
    ...
    pointsift.option_values.OptionError: k=2 is outside the range: it must be a whole number from 3 to 100.
    """
    option = OPTIONS[name]
    if value is None:
        return None
    return check_range(option, convert_kind(option, value), value)


def _check_fields(config) -> None:
    """Convert every table option a config holds (in place: the configs are frozen)."""
    for item in dataclasses.fields(config):
        if item.name in OPTIONS:
            object.__setattr__(config, item.name, convert(item.name, getattr(config, item.name)))


# --------------------------------------------------------------------------- configs


def _joint_error(names: tuple[str, ...], text: str) -> OptionError:
    return OptionError(text, option=names[0], problem=text, names=names)


@dataclass(frozen=True)
class ScreenConfig:
    """All options of a screen (and of reading a layer, which describe shares).

    Every field is declared in :data:`OPTIONS` (kind, range, default, help);
    this class only holds the values and the rules that join two options.

    Parameters
    ----------
    value : str
        Column holding the measured values.
    id : str or None
        Column identifying each point in messages and tables (row number if None).
    sentinels : tuple of float
        Values meaning "no data"; rows holding one are ``unscreened``.
    crs : str or None
        CRS of the input coordinates when the layer has none (e.g. ``"EPSG:4326"``).
    work_crs : str or None
        Metric CRS to compute distances in; chosen automatically for geographic input.
    coincident_tolerance : float or str
        Points closer than this (metres, or a length such as ``"1m"``) are
        treated as records at one spot.
    coincident_value_tolerance : float or None
        Two coincident records whose values differ by more than this disagree.
        None derives it from the data (1 robust local standard deviation).
    graph : {"knn", "band"} or None
        Neighbour graph kind: k nearest neighbours or a distance band. None
        (the default) chooses ``"band"`` when ``within`` is given, else ``"knn"``.
    k : int
        Number of neighbours for ``graph="knn"``.
    within : float, str or None
        Band distance for ``graph="band"`` (metres or a length such as ``"5km"``).
    min_neighbours : int or None
        Fewer usable neighbours than this leaves a point ``unscreened``. None
        (the default) is 4, or ``k`` when k nearest neighbours with k below 4.
    max_distance : float, str or None
        Neighbours farther than this are ignored; a point with no
        neighbour within it is ``unscreened``. None derives it from the spacing.
    permutations : int
        Conditional permutations for Local Moran's I and Getis-Ord Gi*.
    seed : int
        Seed of every random draw, so runs repeat exactly.
    fdr : float
        False discovery rate for the Benjamini-Hochberg adjustment.
    suspect_z, review_z : float
        Standardized local residual beyond which a point is ``suspect`` /
        ``review``. 3.5 follows the usual cut-off for robust (modified)
        z-scores (Iglewicz and Hoaglin 1993, *How to Detect and Handle
        Outliers*); 3 marks values worth a look.
    detrend : {"none", "auto", "surface1", "surface2", "polish"}
        Regional trend removed before the cluster statistics (and, unless
        ``"none"``, reported).
    lag_count, lag_width : int, float or None
        Variogram lag classes ``(0, W], (W, 2W], ...``: their number and width
        (metres or a length such as ``"500m"``). None derives them from the
        extent and spacing (:func:`pointsift.methods.variogram.lag_edges`).
        ``lag_count`` means only this; the lag-pair screen's own classes are
        ``pair_lag_count`` of :func:`pointsift.methods.lagpairs.screen_lag_pairs`.
    thousands : {None, ","}
        ``","`` says commas in text columns group thousands ("1,234.5").
        None decides once per column from all its cells: a column whose
        comma-bearing cells each hold one comma and no dot uses decimal
        commas ("319,910" is 319.91) (:func:`pointsift.prepare.comma_convention`).
    quantity, units, ground_elevation, land_surface, well_depth, site, aquifer, flowing : optional
        Hydrogeological context (see :data:`OPTIONS` and docs/methods.md):
        what the values are and their units; columns of land-surface
        elevation (or a GeoTIFF), well depth, site, aquifer unit and a
        flowing-well marker. Wells with no unit are compared with the nearest
        wells of any unit and are neighbours of none.
    land_surface_use : {"depth", "auto", "drift", "none"}
        With a ground elevation, a level is judged as depth to water (default,
        chosen by measurement), per well level or depth, or with a drift.
    surface_tolerance, depth_tolerance : float
        A level may stand this far above land surface (None: 0.5 m, 1.5 ft);
        depths within this share are one completion.
    transform : {"none", "log", "auto"}
        Scale the screen judges on; reasons stay in the original units.
    depth_weighting : bool
        Neighbours of other depths weigh less in the local fit.
    engine : {"local", "dask"}
        Where the screen runs: this process, or a Dask cluster (same
        results; :mod:`pointsift.engine`, docs/scale.md).
    scheduler : str or None
        Address of a running Dask scheduler; None starts a local cluster for
        the run and closes it after.
    partition_size : int
        Points per spatial (Hilbert-order) partition of the Dask engine.

    Examples
    --------
    >>> ScreenConfig(value="level_m", within="2km").graph
    'band'
    >>> ScreenConfig(value="level_m", k=3).min_neighbours
    3
    """

    value: str
    id: str | None = None
    sentinels: tuple[float, ...] = DEFAULT_SENTINELS
    crs: str | None = None
    work_crs: str | None = None
    coincident_tolerance: float = 0.5
    coincident_value_tolerance: float | None = None
    graph: str | None = None
    k: int = 10
    within: float | None = None
    min_neighbours: int | None = None
    max_distance: float | None = None
    permutations: int = 999
    seed: int = 20261202
    fdr: float = 0.05
    suspect_z: float = 3.5
    review_z: float = 3.0
    detrend: str = "auto"
    lag_count: int | None = None
    lag_width: float | None = None
    thousands: str | None = None
    quantity: str = "level"
    units: str | None = None
    ground_elevation: str | None = None
    land_surface: str | None = None
    well_depth: str | None = None
    site: str | None = None
    aquifer: str | None = None
    flowing: str | None = None
    land_surface_use: str = "depth"
    surface_tolerance: float | None = None
    depth_tolerance: float = 0.1
    transform: str = "none"
    depth_weighting: bool = True
    engine: str = "local"
    scheduler: str | None = None
    partition_size: int = 100_000
    extra: dict = field(default_factory=dict, compare=False, hash=False, repr=False)

    def __post_init__(self) -> None:
        if not isinstance(self.value, str) or not self.value:
            raise OptionError(
                f"{spell('value')} must name the column holding the measurements, e.g. {spell('value', 'level_m')}.",
                option="value", problem="must name the column holding the measurements.",
            )
        _check_fields(self)
        for name in ("crs", "work_crs"):
            _check_crs_text(getattr(self, name), name)
        for name in ("sentinels", "coincident_tolerance", "k", "permutations", "seed", "fdr", "suspect_z",
                     "review_z", "detrend"):
            if getattr(self, name) is None:
                raise fail(OPTIONS[name], "needs a value; leave it out for the default.")
        graph = self.graph if self.graph is not None else ("band" if self.within is not None else "knn")
        object.__setattr__(self, "graph", graph)
        if graph == "band" and self.within is None:
            raise _joint_error(("graph", "within"),
                               f"{spell('graph', 'band')} needs a band distance: pass {spell('within', '5km')}.")
        if self.min_neighbours is None:
            object.__setattr__(self, "min_neighbours", min(4, self.k) if graph == "knn" else 4)
        if graph == "knn" and self.min_neighbours > self.k:
            raise _joint_error(("min_neighbours", "k"), f"{spell('min_neighbours')} ({self.min_neighbours}) "
                               f"cannot exceed {spell('k')} ({self.k}).")
        if self.scheduler is not None and self.engine != "dask":
            raise _joint_error(("scheduler", "engine"), f"{spell('scheduler')} runs the screen on that Dask cluster: "
                               f"pass {spell('engine', 'dask')} with it, or leave it out.")
        if not self.review_z < self.suspect_z:
            raise _joint_error(("review_z", "suspect_z"), f"{spell('review_z')} ({self.review_z}) must be positive "
                               f"and below {spell('suspect_z')} ({self.suspect_z}).")

    def replace(self, **changes) -> "ScreenConfig":
        """Return a copy with some options changed (validated again)."""
        return dataclasses.replace(self, **changes)

    def as_record(self) -> dict:
        """Options as a flat dict of plain values, for the run record."""
        record = dataclasses.asdict(self)
        record.pop("extra", None)
        record["sentinels"] = list(self.sentinels)
        return record

    @classmethod
    def option_names(cls) -> tuple[str, ...]:
        """Names of every option."""
        return tuple(f.name for f in dataclasses.fields(cls) if f.name != "extra")


@dataclass(frozen=True)
class DescribeConfig:
    """The options ``describe`` adds to reading the layer (declared in :data:`OPTIONS`).

    Parameters
    ----------
    directions : tuple of float
        Strip directions, azimuths in degrees (90 west-east, 0 south-north).
    strip_width : float, str or None
        Strip width (None: from the point density).
    min_strip_points : int
        Strips with fewer points are too small to judge.
    stem_unit : float or None
        Stem unit of the stem-and-leaf display (None: chosen).
    stem_split : {1, 2, 5} or None
        Lines per stem (None: chosen).
    bin_width : float or None
        Histogram bin width (None: Freedman-Diaconis).
    """

    directions: tuple[float, ...] = (90.0, 0.0)
    strip_width: float | None = None
    min_strip_points: int = 5
    stem_unit: float | None = None
    stem_split: int | None = None
    bin_width: float | None = None

    def __post_init__(self) -> None:
        _check_fields(self)

    def as_record(self) -> dict:
        """Options as plain values, for the run record."""
        record = dataclasses.asdict(self)
        record["directions"] = list(self.directions)
        return record


@dataclass(frozen=True)
class ReportConfig:
    """How the HTML report is drawn (declared in :data:`OPTIONS`); the numbers are the run's own.

    Parameters
    ----------
    report_labels : int
        Suspects named by id on the overview map, strongest first, where a
        label fits; every other suspect carries its number, listed under the map.
    report_points : int
        Maps and clouds draw at most about this many points (density shading
        or a stated seeded sample beyond; tables keep every row).
    report_title : str or None
        Page title (None: from the value column and the input).

    Examples
    --------
    >>> ReportConfig(report_points="2000").report_points
    2000
    """

    report_labels: int = 80
    report_points: int = 50_000
    report_title: str | None = None

    def __post_init__(self) -> None:
        _check_fields(self)
        for name in ("report_labels", "report_points"):
            if getattr(self, name) is None:
                raise fail(OPTIONS[name], "needs a value; leave it out for the default.")

    def as_record(self) -> dict:
        """Options as plain values, for the run record and the batch fingerprint."""
        return dataclasses.asdict(self)


#: Which config class holds the options of each ``Option.config`` value
#: (``"campaign"``: :class:`pointsift.campaigns.CampaignConfig` checks itself with :func:`check_config_fields`).
CONFIG_CLASSES = {"screen": ScreenConfig, "describe": DescribeConfig, "report": ReportConfig}


def check_config_fields(cls, key: str, others: tuple[str, ...] = ()) -> None:
    """Refuse (at import) a config whose fields and the table's entries under ``key`` disagree.

    ``others`` are fields that hold a table option declared elsewhere (a nested
    config, or an option the command line reads itself, such as ``jobs``).
    """
    fields = {f.name for f in dataclasses.fields(cls)} - {"extra"} - set(others)
    declared = {o.name for o in OPTIONS.values() if o.config == key}
    if fields != declared:
        raise RuntimeError(f"{cls.__name__} fields and OPTIONS disagree: {sorted(fields ^ declared)}")


def check_fields(config) -> None:
    """Convert every table option a frozen config holds, through :func:`convert` (for configs outside this module)."""
    _check_fields(config)


for _key, _cls in CONFIG_CLASSES.items():
    check_config_fields(_cls, _key)
