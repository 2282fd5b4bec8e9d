"""Screening options: one frozen dataclass tree, validated once at the edge.

The command line and batch plans build a :class:`ScreenConfig`; the pipeline
only reads it.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass, field

from .errors import ConfigError

__all__ = ["ScreenConfig", "parse_length", "DEFAULT_SENTINELS"]

DEFAULT_SENTINELS: tuple[float, ...] = (-9999.0, -999.0, -99999.0)

_LENGTH_UNITS = {
    "": 1.0,
    "m": 1.0,
    "km": 1000.0,
    "ft": 0.3048,
    "mi": 1609.344,
}

_GRAPH_KINDS = ("knn", "band")
_DETREND = ("none", "auto", "surface1", "surface2", "polish")


def parse_length(text: str | float | int, name: str = "length") -> float:
    """Parse a length such as ``"5km"``, ``"750 m"``, ``"2mi"`` or ``1200`` into metres.

    Parameters
    ----------
    text : str or float
        A number with an optional unit (m, km, ft, mi). A bare number is metres.
    name : str
        Option name used in the error message.

    Returns
    -------
    float
        The length in metres.

    Examples
    --------
    >>> parse_length("5km")
    5000.0
    >>> parse_length("250 ft")
    76.2
    """
    if isinstance(text, (int, float)):
        value = float(text)
    else:
        match = re.fullmatch(r"\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([a-zA-Z]*)\s*", str(text))
        if not match or match.group(2).lower() not in _LENGTH_UNITS:
            raise ConfigError(
                f"{name} {text!r} is not a length. Write a number with an optional unit "
                f"({', '.join(u for u in _LENGTH_UNITS if u)}), for example '5km' or '750m'."
            )
        value = float(match.group(1)) * _LENGTH_UNITS[match.group(2).lower()]
        value = round(value, 9)
    if not value > 0:
        raise ConfigError(f"{name} must be a positive length, got {text!r}.")
    return value


@dataclass(frozen=True)
class ScreenConfig:
    """All options of a screen.

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
    coincident_tolerance : float
        Points closer than this (metres) are treated as records at one spot.
    coincident_value_tolerance : float or None
        Two coincident records whose values differ by more than this disagree.
        None derives it from the data (1 robust local standard deviation).
    graph : {"knn", "band"}
        Neighbour graph kind: k nearest neighbours or a distance band.
    k : int
        Number of neighbours for ``graph="knn"``.
    within : float or None
        Band distance in metres for ``graph="band"``.
    min_neighbours : int
        Fewer usable neighbours than this leaves a point ``unscreened``.
    max_distance : float or None
        Neighbours farther than this (metres) are ignored; a point with no
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
        in metres. None derives them from the extent and spacing
        (:func:`pointsift.methods.variogram.lag_edges`).
    thousands : {None, ","}
        ``","`` says commas in text columns group thousands ("1,234.5").
        None decides once per column from all its cells: a column whose
        comma-bearing cells each hold one comma and no dot uses decimal
        commas ("319,910" is 319.91) (:func:`pointsift.prepare.comma_convention`).
    """

    value: str
    id: str | None = None
    sentinels: tuple[float, ...] = DEFAULT_SENTINELS
    crs: str | None = None
    work_crs: str | None = None
    coincident_tolerance: float = 0.5
    coincident_value_tolerance: float | None = None
    graph: str = "knn"
    k: int = 10
    within: float | None = None
    min_neighbours: int = 4
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
    extra: dict = field(default_factory=dict, compare=False, hash=False, repr=False)

    def __post_init__(self) -> None:
        if not isinstance(self.value, str) or not self.value:
            raise ConfigError("value must name the column holding the measurements, e.g. value='level_m'.")
        if self.graph not in _GRAPH_KINDS:
            raise ConfigError(f"graph {self.graph!r} is not known; choose one of {', '.join(_GRAPH_KINDS)}.")
        if self.graph == "band" and self.within is None:
            raise ConfigError("graph='band' needs a band distance: pass within (e.g. --within 5km).")
        if self.detrend not in _DETREND:
            raise ConfigError(f"detrend {self.detrend!r} is not known; choose one of {', '.join(_DETREND)}.")
        if not (isinstance(self.k, int) and 3 <= self.k <= 100):
            raise ConfigError(f"k must be a whole number from 3 to 100, got {self.k!r}.")
        if not (isinstance(self.min_neighbours, int) and 2 <= self.min_neighbours <= 50):
            raise ConfigError(f"min_neighbours must be a whole number from 2 to 50, got {self.min_neighbours!r}.")
        if self.graph == "knn" and self.min_neighbours > self.k:
            raise ConfigError(f"min_neighbours ({self.min_neighbours}) cannot exceed k ({self.k}).")
        if not (isinstance(self.permutations, int) and 99 <= self.permutations <= 100_000):
            raise ConfigError(f"permutations must be a whole number from 99 to 100000, got {self.permutations!r}.")
        if not 0 < self.fdr < 1:
            raise ConfigError(f"fdr must be between 0 and 1, got {self.fdr!r}.")
        if not 0 < self.review_z < self.suspect_z:
            raise ConfigError(
                f"review_z ({self.review_z}) must be positive and below suspect_z ({self.suspect_z})."
            )
        if self.coincident_tolerance < 0:
            raise ConfigError(f"coincident_tolerance must be zero or positive, got {self.coincident_tolerance!r}.")
        if self.lag_count is not None and not (
            isinstance(self.lag_count, int) and not isinstance(self.lag_count, bool) and 1 <= self.lag_count <= 1000
        ):
            raise ConfigError(f"lag_count must be a whole number from 1 to 1000, got {self.lag_count!r}.")
        for name in ("within", "max_distance", "coincident_value_tolerance", "lag_width"):
            value = getattr(self, name)
            if value is not None and not value > 0:
                raise ConfigError(f"{name} must be positive, got {value!r}.")
        if self.thousands not in (None, ","):
            raise ConfigError(f"thousands must be ',' (commas group thousands) or left unset, got {self.thousands!r}.")
        object.__setattr__(self, "sentinels", tuple(float(s) for s in self.sentinels))

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
        """Names of every option, for plan validation messages."""
        return tuple(f.name for f in dataclasses.fields(cls) if f.name != "extra")
