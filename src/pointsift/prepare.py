"""Prepare a point layer for screening: values, geometry, CRS and work CRS.

Nothing is dropped here. Every row the screen cannot use is kept and given a
plain reason, which becomes its ``unscreened`` reason in the output.
Distances are never computed in degrees: geographic input is projected to a
local metric CRS chosen from the data (a UTM zone when the points fit in
one, otherwise a Lambert azimuthal equal-area projection centred on them).
"""

from __future__ import annotations

import logging
import re
from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS, Proj, Transformer
from pyproj.exceptions import CRSError as PyprojCRSError
from pyproj.exceptions import ProjError

from .config import ScreenConfig
from .errors import ConfigError, CRSError, InputError
from .graph import coincident_groups

__all__ = ["Prepared", "prepare", "choose_work_crs", "parse_values", "comma_convention", "scale_error", "SCALE_TOLERANCE", "LOCATION_REASONS", "READ_NOTES"]

log = logging.getLogger(__name__)

#: Largest scale error accepted in the input's own projected CRS before a local
#: metric work CRS is chosen instead: 0.5 % (a 10 km distance off by 50 m). The
#: error is the largest |h - 1| or |k - 1| of pyproj's meridional and parallel
#: scale factors at the layer's points. A UTM zone stays within 0.1 % inside its
#: band (0.9996 on the central meridian, common practice); Web Mercator is off
#: by 18.6 % at 32.5 degrees S and 146 % at 66 degrees N.
SCALE_TOLERANCE = 0.005

#: ``frame.attrs`` key of per-row location reasons found while reading (a pandas
#: Series aligned with the rows, "" where the location was read).
LOCATION_REASONS = "pointsift_location_reasons"
#: ``frame.attrs`` key of notes made while reading (tuple of str).
READ_NOTES = "pointsift_read_notes"

#: Farthest a projected coordinate may lie from its CRS's origin (metres): no place
#: on Earth is more than about 2e7 m (half the equator) from any origin of a
#: sensible projection; 1e8 leaves room for false eastings and odd projections.
_FARTHEST_ON_EARTH_M = 1e8


@dataclass(frozen=True)
class Prepared:
    """A layer ready for the methods (see DEVELOPERS.md, "Prepared").

    Attributes
    ----------
    frame : geopandas.GeoDataFrame
        The input rows, untouched.
    xy : ndarray, shape (n, 2)
        Coordinates in the work CRS (metres); NaN where unusable.
    values : ndarray
        Parsed values; NaN where unusable.
    usable : ndarray of bool
        Rows with both a location and a value.
    unscreened_reason : ndarray of object
        Plain-language reason per row ("" when usable).
    ids : ndarray of object
        Identifier per row (the id column as text, or "row N").
    input_crs, work_crs : pyproj.CRS
        CRS of the input and of the computations.
    coincident : ndarray of int64
        Group label of records at one spot (-1 when alone).
    notes : tuple of str
        Things the user should know (printed and recorded).
    """

    frame: gpd.GeoDataFrame
    xy: np.ndarray
    values: np.ndarray
    usable: np.ndarray
    unscreened_reason: np.ndarray
    ids: np.ndarray
    input_crs: CRS
    work_crs: CRS
    coincident: np.ndarray
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n(self) -> int:
        """Number of rows."""
        return len(self.values)


def _format_number(value: float) -> str:
    return f"{value:g}"


_THOUSANDS = re.compile(r"[+-]?\d{1,3}(?:,\d{3})+(?:\.\d*)?")
_DECIMAL_COMMA = re.compile(r"[+-]?\d+,\d+")
_ONE_COMMA_NO_DOT = re.compile(r"[+-]?\d*,\d*(?:[eE][+-]?\d+)?")


def comma_convention(cells, thousands: str | None = None) -> str:
    """Decide once, from every cell of a text column, what a comma means in it.

    Parameters
    ----------
    cells : iterable
        The column's cells (non-text cells are ignored).
    thousands : str, optional
        ``","`` when the user says commas group thousands (``--thousands ,``).

    Returns
    -------
    str
        ``"none"`` (no cell has a comma), ``"decimal"`` (every comma-bearing
        cell has exactly one comma and no dot, as in "319,910" or "12,5": a
        decimal comma) or ``"thousands"`` (commas group thousands, as in
        "1,234.5"; a cell like "12,5" is then not a number).

    Examples
    --------
    >>> comma_convention(["319,910", "12,5", "7"])
    'decimal'
    >>> comma_convention(["319,910", "1,234,567.5"])
    'thousands'
    >>> comma_convention(["319,910"], thousands=",")
    'thousands'
    """
    with_comma = [c.strip() for c in cells if isinstance(c, str) and "," in c]
    if not with_comma:
        return "none"
    if thousands == ",":
        return "thousands"
    if all(_ONE_COMMA_NO_DOT.fullmatch(c) for c in with_comma):
        return "decimal"
    return "thousands"


def _numbers_from_text(text: pd.Series, convention: str) -> pd.Series:
    if convention == "decimal":
        return text.map(lambda v: v.strip().replace(",", ".") if isinstance(v, str) else v)
    if convention == "thousands":
        # commas are dropped only where they group thousands ("1,234.5")
        return text.map(lambda v: (v.strip().replace(",", "") if _THOUSANDS.fullmatch(v.strip()) else v.strip()) if isinstance(v, str) else v)
    return text.map(lambda v: v.strip() if isinstance(v, str) else v)


def _shortest_float(column: pd.Series) -> np.ndarray:
    """A float32 column as the decimals it was written with (328.17, not 328.1700134277344)."""
    stored = column.to_numpy(dtype=np.float32, na_value=np.nan)
    # numpy prints the shortest text that reads back to the same float32 (a
    # number's text is short, so the fixed-width strings stay small)
    return stored.astype(str).astype(float)


def parse_values(column: pd.Series, sentinels: tuple[float, ...], *, thousands: str | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Parse a value column into floats and a reason for each unusable row.

    Parameters
    ----------
    column : pandas.Series
        The raw column (numbers, text, or a mix).
    sentinels : tuple of float
        No-data codes.
    thousands : str, optional
        ``","`` when commas group thousands. By default the meaning of a
        comma is decided once for the whole column (:func:`comma_convention`),
        never cell by cell.

    Returns
    -------
    values : ndarray of float
        NaN where unusable.
    reasons : ndarray of object
        "" where the value is usable, else why not.

    Examples
    --------
    >>> v, r = parse_values(pd.Series(["12.5", "n/a", None, -9999]), (-9999.0,))
    >>> v[0], list(r)
    (np.float64(12.5), ['', "value 'n/a' is not a number", 'no value (blank)', 'no-data code -9999'])
    """
    n = len(column)
    reasons = np.full(n, "", dtype=object)
    if pd.api.types.is_bool_dtype(column.dtype):
        raise InputError(f"Value column {column.name!r} holds true/false values, not measurements. Choose a numeric column.")
    float32 = pd.api.types.is_float_dtype(column.dtype) and np.dtype(getattr(column.dtype, "numpy_dtype", column.dtype)).itemsize < 8
    if float32:
        values = _shortest_float(column)
    elif pd.api.types.is_numeric_dtype(column.dtype):
        values = column.to_numpy(dtype=float, na_value=np.nan)
    else:
        text = column.astype("object")
        convention = comma_convention(text, thousands)
        stripped = _numbers_from_text(text, convention)
        values = pd.to_numeric(stripped, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        blank_text = stripped.map(lambda v: isinstance(v, str) and v == "").to_numpy(dtype=bool)
        bad_text = np.isnan(values) & text.notna().to_numpy() & ~blank_text
        for row in np.flatnonzero(bad_text):
            raw = str(text.iloc[row])[:40]
            hint = f" (a decimal comma? write {raw.strip().replace(',', '.')!r})" if _DECIMAL_COMMA.fullmatch(raw.strip()) else ""
            reasons[row] = f"value {raw!r} is not a number{hint}"
        reasons[blank_text] = "no value (blank)"
    missing = np.isnan(values) & (reasons == "")
    reasons[missing] = "no value (blank)"
    infinite = np.isinf(values)
    reasons[infinite] = "value is not finite"
    for code in sentinels:
        # a float32 column (GeoPackage FLOAT) holds -99.99 as -99.98999786: compare
        # the codes at the column's own precision too
        hit = values == code
        if float32:
            hit |= values == float(np.float32(code))
        reasons[hit] = f"no-data code {_format_number(code)}"
    values = np.where(reasons == "", values, np.nan)
    return values, reasons


def choose_work_crs(lon: np.ndarray, lat: np.ndarray) -> CRS:
    """Choose a local metric CRS for points given in longitude/latitude.

    A UTM zone (WGS 84) when every point lies within 4 degrees of longitude
    of the zone's central meridian and between 80S and 84N; otherwise a Lambert
    azimuthal equal-area projection centred on the points, whose distance
    errors stay small over a region.

    Parameters
    ----------
    lon, lat : ndarray
        Coordinates in degrees (finite values only).

    Returns
    -------
    pyproj.CRS
    """
    lon = np.asarray(lon, dtype=float)
    # points straddling the antimeridian: take the centre in 0..360, or the
    # median of -179 and 179 would put it on the far side of the globe
    shifted = np.mod(lon, 360.0)
    if np.ptp(shifted) < np.ptp(lon):
        lon = shifted
    lon_c = (float(np.median(lon)) + 180.0) % 360.0 - 180.0
    lat_c = float(np.median(lat))
    zone = int(np.floor((lon_c + 180.0) / 6.0)) % 60 + 1
    meridian = -183.0 + 6.0 * zone
    if lat.min() >= -80 and lat.max() <= 84 and np.abs(((lon - meridian + 180) % 360) - 180).max() <= 4.0:
        return CRS.from_epsg((32600 if lat_c >= 0 else 32700) + zone)
    return CRS.from_proj4(f"+proj=laea +lat_0={lat_c:.6f} +lon_0={lon_c:.6f} +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs")


def _resolve_input_crs(frame: gpd.GeoDataFrame, crs_option: str | None, where: str) -> CRS:
    if crs_option is not None:
        try:
            given = CRS.from_user_input(crs_option)
        except PyprojCRSError as exc:
            # a mistyped option is a usage problem (exit 2), not a data problem
            raise ConfigError(f"--crs {crs_option!r} is not a CRS pyproj knows. Use a code such as EPSG:4326 or EPSG:32633.") from exc
        if frame.crs is not None and not CRS(frame.crs).equals(given, ignore_axis_order=True):
            raise CRSError(
                f"{where} declares {CRS(frame.crs).to_string()} but --crs says {given.to_string()}. "
                "Drop --crs to use the layer's own CRS, or fix the layer."
            )
        return given
    if frame.crs is None:
        raise CRSError(
            f"{where} has no CRS, so distances cannot be computed. "
            "Pass --crs EPSG:XXXX to say what the coordinates are (for example EPSG:4326 for longitude/latitude in degrees)."
        )
    return CRS(frame.crs)


def _point_coordinates(frame: gpd.GeoDataFrame, reasons: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    geometry = frame.geometry.array
    kinds = shapely.get_type_id(geometry)  # -1 for missing
    # 0 point, 4 multipoint; any other feature is kept as an unscreened row
    names = {1: "a line (LineString)", 2: "a ring (LinearRing)", 3: "a polygon", 5: "a line (MultiLineString)",
             6: "a polygon (MultiPolygon)", 7: "a geometry collection"}
    other = ~np.isin(kinds, (-1, 0, 4))
    for row in np.flatnonzero(other):
        reasons[row] = (
            f"feature is {names.get(int(kinds[row]), 'not a point')}, not a point; convert it to a point "
            "(for example its centroid) to screen it"
        )
    n = len(frame)
    x = np.full(n, np.nan)
    y = np.full(n, np.nan)
    missing = kinds == -1
    empty = ~missing & ~other & shapely.is_empty(geometry)
    reasons[missing] = "no location (no geometry)"
    reasons[empty] = "no location (empty geometry)"
    parts = shapely.get_num_geometries(geometry)
    multi = (kinds == 4) & ~empty & (parts > 1)
    for row in np.flatnonzero(multi):
        reasons[row] = f"location has {parts[row]} points (multi-part); split it into single points"
    single = ~missing & ~empty & ~multi & ~other
    points = geometry[single]
    points = np.where(shapely.get_type_id(points) == 4, shapely.get_geometry(points, 0), points)
    x[single] = shapely.get_x(points)
    y[single] = shapely.get_y(points)
    bad = single & ~(np.isfinite(x) & np.isfinite(y))
    reasons[bad] = "location has non-finite coordinates"
    return x, y


def _check_geographic(x, y, reasons, ids, where):
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    if not located.any():
        return
    bad_lat = located & (np.abs(y) > 90)
    bad_lon = located & (np.abs(x) > 180)
    bad = bad_lat | bad_lon
    if not bad.any():
        return
    swapped = located & (np.abs(x) <= 90) & (np.abs(y) <= 180)
    share = bad.sum() / located.sum()
    sample = ", ".join(str(ids[r]) for r in np.flatnonzero(bad)[:5])
    if share > 0.5:
        hint = (
            "Longitude and latitude look swapped: check the coordinate columns (--x is longitude, --y latitude)."
            if swapped[bad].mean() > 0.9
            else "The coordinates look projected, not degrees: pass the right --crs (for example the UTM zone's EPSG code)."
        )
        raise CRSError(
            f"{bad.sum()} of {located.sum()} points in {where} lie outside longitude -180..180 / latitude -90..90 "
            f"for a geographic CRS (first: {sample}). {hint}"
        )
    for row in np.flatnonzero(bad_lat):
        reasons[row] = f"latitude {y[row]:g} is impossible (beyond 90); check the coordinates (swapped longitude/latitude?)"
    for row in np.flatnonzero(bad_lon & ~bad_lat):
        reasons[row] = f"longitude {x[row]:g} is impossible (beyond 180); check the coordinates"


def _read_location_reasons(frame: gpd.GeoDataFrame) -> np.ndarray:
    """Per-row reasons found while reading coordinate columns ("" elsewhere)."""
    reasons = np.full(len(frame), "", dtype=object)
    found = frame.attrs.get(LOCATION_REASONS)
    if isinstance(found, pd.Series) and found.index.is_unique:
        aligned = found.reindex(frame.index)
        reasons[:] = aligned.where(aligned.notna(), "").to_numpy(dtype=object)
    return reasons


def _unit(crs: CRS) -> tuple[str, float]:
    """Name of the first axis' unit and metres per unit."""
    if not crs.axis_info:
        return "unknown unit", float("nan")
    axis = crs.axis_info[0]
    return axis.unit_name, float(axis.unit_conversion_factor or float("nan"))


def _is_metre(crs: CRS) -> bool:
    return _unit(crs)[0] in ("metre", "meter")


def _is_engineering(crs: CRS) -> bool:
    return bool(getattr(crs, "is_engineering", False)) or (not crs.is_geographic and crs.geodetic_crs is None)


def _sample(located: np.ndarray, x: np.ndarray, y: np.ndarray, limit: int = 2000) -> np.ndarray:
    """Rows spread over the layer: an even stride plus the extremes of its extent."""
    rows = np.flatnonzero(located)
    if rows.size <= limit:
        return rows
    picked = rows[np.linspace(0, rows.size - 1, limit).astype(int)]
    extremes = rows[[np.argmin(x[rows]), np.argmax(x[rows]), np.argmin(y[rows]), np.argmax(y[rows])]]
    return np.unique(np.concatenate([picked, extremes]))


def scale_error(crs: CRS, x: np.ndarray, y: np.ndarray) -> float:
    """Largest scale error of a projected CRS at the given points.

    Parameters
    ----------
    crs : pyproj.CRS
        A projected CRS.
    x, y : ndarray
        Coordinates in ``crs``.

    Returns
    -------
    float
        The largest ``|h - 1|`` or ``|k - 1|`` of pyproj's meridional (h) and
        parallel (k) scale factors at the points (NaN when no point can be
        placed on the globe).

    Examples
    --------
    >>> round(scale_error(CRS.from_epsg(3857), np.array([0.0]), np.array([0.0])), 6)
    0.0
    """
    to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    lon, lat = to_lonlat.transform(np.asarray(x, dtype=float), np.asarray(y, dtype=float), errcheck=False)
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    finite = np.isfinite(lon) & np.isfinite(lat)
    if not finite.any():
        return float("nan")
    factors = Proj(crs).get_factors(lon[finite], lat[finite], errcheck=False)
    error = np.fmax(np.abs(np.asarray(factors.meridional_scale) - 1.0), np.abs(np.asarray(factors.parallel_scale) - 1.0))
    return float(np.nanmax(error)) if np.isfinite(error).any() else float("nan")


def _lonlat_work_crs(input_crs: CRS, x, y, where: str) -> CRS:
    try:
        to_lonlat = Transformer.from_crs(input_crs, CRS.from_epsg(4326), always_xy=True)
        lon, lat = to_lonlat.transform(x, y, errcheck=False)
    except ProjError as exc:
        raise CRSError(
            f"{where} uses {input_crs.name}, which pyproj cannot relate to longitude/latitude. "
            "Give the layer a CRS in metres or degrees, or reproject it first."
        ) from exc
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    finite = np.isfinite(lon) & np.isfinite(lat)
    if not finite.any():
        raise CRSError(
            f"No point of {where} can be placed on the globe with {input_crs.to_string()}: the coordinates do "
            "not fit that CRS. Check the coordinates and the CRS (--crs for a file without one)."
        )
    return choose_work_crs(lon[finite], lat[finite])


def _work_crs(input_crs: CRS, x: np.ndarray, y: np.ndarray, config: ScreenConfig, where: str, notes: list) -> CRS:
    """The metric CRS distances are computed in (see :data:`SCALE_TOLERANCE`); x, y: located points."""
    if _is_engineering(input_crs):
        unit, _ = _unit(input_crs)
        if config.work_crs is not None:
            raise ConfigError(
                f"--work-crs cannot be used with {where}: its CRS {input_crs.name!r} is a local engineering CRS "
                "that is not tied to the globe. Leave --work-crs out."
            )
        if not _is_metre(input_crs):
            raise CRSError(
                f"{where} uses the local engineering CRS {input_crs.name!r} in {unit}; distances are computed in "
                "metres and a local CRS cannot be reprojected. Convert the coordinates to metres (or to a CRS tied to the globe)."
            )
        notes.append(f"Distances computed in the local engineering CRS {input_crs.name!r} (metres on a plane), as given.")
        return input_crs
    if config.work_crs is not None:
        try:
            work_crs = CRS.from_user_input(config.work_crs)
        except PyprojCRSError as exc:
            raise ConfigError(f"--work-crs {config.work_crs!r} is not a CRS pyproj knows. Use a code such as EPSG:32633.") from exc
        if not work_crs.is_projected or not _is_metre(work_crs):
            raise ConfigError(f"--work-crs {config.work_crs!r} must be a projected CRS in metres (for example a UTM zone).")
        return work_crs
    if input_crs.is_projected and _is_metre(input_crs):
        rows = _sample(np.ones(x.size, dtype=bool), x, y)
        error = scale_error(input_crs, x[rows], y[rows])
        if not error > SCALE_TOLERANCE:
            return input_crs
        work_crs = _lonlat_work_crs(input_crs, x, y, where)
        notes.append(
            f"Distances computed in {work_crs.name} ({work_crs.to_string()}), chosen for these points: "
            f"lengths in the input CRS {input_crs.name} are off by up to {100 * error:.1f} % over the layer "
            f"(more than the {100 * SCALE_TOLERANCE:g} % accepted)."
        )
        return work_crs
    work_crs = _lonlat_work_crs(input_crs, x, y, where)
    notes.append(f"Distances computed in {work_crs.name} ({work_crs.to_string()}), chosen for these points.")
    return work_crs


def _check_projected(x, y, reasons, crs: CRS) -> None:
    """Coordinates no place on Earth can have in a projected (or local) CRS."""
    unit, metres = _unit(crs)
    if not np.isfinite(metres):
        metres = 1.0
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    far = located & ((np.abs(x) * metres > _FARTHEST_ON_EARTH_M) | (np.abs(y) * metres > _FARTHEST_ON_EARTH_M))
    for row in np.flatnonzero(far):
        reasons[row] = (
            f"coordinates ({x[row]:.6g}, {y[row]:.6g}) are impossible in {crs.name} (farther from its origin "
            f"than any place on Earth, in {unit}); check the coordinates and the CRS"
        )


def _check_area_of_use(x, y, reasons, crs: CRS, where: str, notes: list) -> None:
    """Points far outside the area the CRS is meant for (pyproj's area of use).

    "Far" is beyond the area's bounds by more than 2 degrees plus a quarter of
    the area's size (a UTM zone: 3.5 degrees of longitude). A few such points are unscreened with the reason; when most are,
    the layer's coordinates or CRS are wrong: degrees in a projected layer are
    an error, anything else a warning.
    """
    area = crs.area_of_use
    located = np.isfinite(x) & np.isfinite(y) & (reasons == "")
    if area is None or not located.any() or _is_engineering(crs):
        return
    west, south, east, north = area.bounds
    if west > east:  # the area crosses the antimeridian
        east += 360.0
    if east - west >= 359 and north - south >= 170:
        return  # the whole globe: nothing is outside
    xl, yl = x[located], y[located]
    if not crs.is_geographic and np.all((np.abs(xl) <= 180) & (np.abs(yl) <= 90)):
        # projected numbers that, read as degrees, fall in the very area the CRS serves
        lon_d = np.where(xl < west, xl + 360, xl)
        if np.mean((lon_d >= west) & (lon_d <= east) & (yl >= south) & (yl <= north)) > 0.5:
            raise CRSError(
                f"The coordinates of {where} look like longitude/latitude in degrees (all within -180..180 and "
                f"-90..90, inside {area.name}), but its CRS is {crs.name} ({crs.to_string()}), in {_unit(crs)[0]}. "
                "If they are degrees, set the layer's CRS to EPSG:4326 (or pass --crs EPSG:4326 for a file without a CRS)."
            )
    try:
        to_lonlat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
        lon, lat = to_lonlat.transform(xl, yl, errcheck=False)
    except ProjError:
        return
    lon, lat = np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)
    lon = np.where(lon < west - 180, lon + 360, lon)
    margin_x, margin_y = 2.0 + (east - west) / 4, 2.0 + (north - south) / 4
    outside = ~(np.isfinite(lon) & np.isfinite(lat)) | (lon < west - margin_x) | (lon > east + margin_x) | (lat < south - margin_y) | (lat > north + margin_y)
    if not outside.any():
        return
    rows = np.flatnonzero(located)[outside]
    degrees = not crs.is_geographic and bool(np.all((np.abs(x[rows]) <= 180) & (np.abs(y[rows]) <= 90)))
    if outside.mean() > 0.5:
        if degrees:
            raise CRSError(
                f"The coordinates of {where} look like longitude/latitude in degrees (all within -180..180 and "
                f"-90..90), but its CRS is {crs.name} ({crs.to_string()}), in {_unit(crs)[0]}. If they are degrees, "
                "set the layer's CRS to EPSG:4326 (or pass --crs EPSG:4326 for a file without a CRS)."
            )
        message = (
            f"{int(outside.sum())} of {int(located.sum())} points of {where} lie far outside the area "
            f"{crs.name} is meant for ({area.name}). Check the coordinates (swapped columns?) and the CRS."
        )
        log.warning(message)
        notes.append(message)
        return
    hint = " (degrees in a projected layer?)" if degrees else ""
    for row in rows:
        reasons[row] = (
            f"location ({x[row]:.6g}, {y[row]:.6g}) lies far outside the area {crs.name} is meant for "
            f"({area.name}){hint}; check its coordinates"
        )


def prepare(frame: gpd.GeoDataFrame, config: ScreenConfig, *, where: str = "the layer") -> Prepared:
    """Validate a point layer and project it to a metric work CRS.

    Parameters
    ----------
    frame : geopandas.GeoDataFrame
        Input rows (never modified).
    config : ScreenConfig
        Options; uses ``value``, ``id``, ``sentinels``, ``crs``, ``work_crs``,
        ``coincident_tolerance``.
    where : str
        How to name the layer in messages.

    Returns
    -------
    Prepared

    Raises
    ------
    InputError
        The value or id column is missing, or the geometry is not points.
    CRSError
        No CRS is known, or the coordinates contradict it.
    """
    if not isinstance(frame, gpd.GeoDataFrame):
        raise InputError("screen() takes a GeoDataFrame of points; build one with geopandas.points_from_xy.")
    if config.value not in frame.columns:
        numeric = [str(c) for c in frame.columns if c != frame.geometry.name and pd.api.types.is_numeric_dtype(frame[c].dtype)]
        raise InputError(
            f"{where} has no column {config.value!r}. Numeric columns present: {', '.join(numeric) or 'none'}. "
            "Choose one with --value COLUMN."
        )
    if config.id is not None and config.id not in frame.columns:
        raise InputError(
            f"{where} has no id column {config.id!r}. Columns present: "
            f"{', '.join(str(c) for c in frame.columns if c != frame.geometry.name)}. Choose one with --id COLUMN or leave it out."
        )
    n = len(frame)
    if n == 0:
        raise InputError(
            f"{where} has no rows (an empty layer, or a CSV with a header and no data). "
            "Choose the layer or file that holds the measurements."
        )
    notes: list[str] = []
    if config.id is not None:
        ids = frame[config.id].astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v)).to_numpy(dtype=object)
        blank = ids == ""
        ids[blank] = [f"row {r + 1}" for r in np.flatnonzero(blank)]
        duplicated = pd.Series(ids).duplicated(keep=False).to_numpy()
        if duplicated.any():
            notes.append(f"{int(duplicated.sum())} rows share an id with another row; messages also give row numbers.")
            ids[duplicated] = [f"{ids[r]} (row {r + 1})" for r in np.flatnonzero(duplicated)]
    else:
        ids = np.array([f"row {r + 1}" for r in range(n)], dtype=object)

    notes.extend(frame.attrs.get(READ_NOTES, ()))
    values, reasons = parse_values(frame[config.value], config.sentinels, thousands=config.thousands)
    geo_reasons = _read_location_reasons(frame)
    x, y = _point_coordinates(frame, geo_reasons)
    input_crs = _resolve_input_crs(frame, config.crs, where)
    if input_crs.is_geographic:
        _check_geographic(x, y, geo_reasons, ids, where)
    else:
        _check_projected(x, y, geo_reasons, input_crs)
    _check_area_of_use(x, y, geo_reasons, input_crs, where, notes)
    # location problems are stated first: a point without a place cannot be judged at all
    reasons = np.where(geo_reasons != "", geo_reasons, reasons)
    located = (geo_reasons == "") & np.isfinite(x)
    if not located.any():
        first = next((r for r in geo_reasons if r), "no location")
        raise InputError(
            f"No row of {where} has a usable location (first reason: {first}). "
            "Check the coordinate columns (--x, --y), the geometry and the CRS."
        )
    work_crs = _work_crs(input_crs, x[located], y[located], config, where, notes)

    xy = np.full((n, 2), np.nan)
    if work_crs.equals(input_crs):
        xy[located, 0], xy[located, 1] = x[located], y[located]
    else:
        transformer = Transformer.from_crs(input_crs, work_crs, always_xy=True)
        xw, yw = transformer.transform(x[located], y[located])
        xy[located, 0], xy[located, 1] = xw, yw
    unprojectable = located & ~np.isfinite(xy).all(axis=1)
    reasons[unprojectable] = "location cannot be projected to the work CRS; check the coordinates"
    located &= ~unprojectable

    usable = located & (reasons == "")
    xy[~usable] = np.nan
    values = np.where(usable, values, np.nan)
    coincident = np.full(n, -1, dtype=np.int64)
    coincident[usable] = coincident_groups(xy[usable], config.coincident_tolerance)
    # labels of the usable subset are local; keep them unique over all rows
    return Prepared(
        frame=frame,
        xy=xy,
        values=values,
        usable=usable,
        unscreened_reason=reasons,
        ids=ids,
        input_crs=input_crs,
        work_crs=work_crs,
        coincident=coincident,
        notes=tuple(notes),
    )
