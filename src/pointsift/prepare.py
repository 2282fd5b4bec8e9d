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
from pyproj import CRS, Transformer
from pyproj.exceptions import CRSError as PyprojCRSError

from .config import ScreenConfig
from .errors import CRSError, InputError
from .graph import coincident_groups

__all__ = ["Prepared", "prepare", "choose_work_crs", "parse_values"]

log = logging.getLogger(__name__)


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


def _drop_thousands_commas(text: str) -> str:
    return text.replace(",", "") if _THOUSANDS.fullmatch(text) else text


def parse_values(column: pd.Series, sentinels: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray]:
    """Parse a value column into floats and a reason for each unusable row.

    Parameters
    ----------
    column : pandas.Series
        The raw column (numbers, text, or a mix).
    sentinels : tuple of float
        No-data codes.

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
    if pd.api.types.is_numeric_dtype(column.dtype):
        values = column.to_numpy(dtype=float, na_value=np.nan)
    else:
        text = column.astype("object")
        # commas are dropped only where they group thousands ("1,234.5"); a
        # decimal comma ("213,17") must not silently become 21317
        stripped = text.map(lambda v: _drop_thousands_commas(v.strip()) if isinstance(v, str) else v)
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
    # a float32 column (GeoPackage FLOAT) holds -99.99 as -99.98999786: compare the
    # codes at the column's own precision too
    stored = np.dtype(getattr(column.dtype, "numpy_dtype", column.dtype)) if pd.api.types.is_float_dtype(column.dtype) else None
    for code in sentinels:
        hit = values == code
        if stored is not None and stored.itemsize < 8:
            hit |= values == float(np.array(code, dtype=stored))
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
            raise CRSError(f"--crs {crs_option!r} is not a CRS pyproj knows ({exc}). Use a code such as EPSG:4326 or EPSG:32633.") from exc
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
    # 0 point, 4 multipoint; everything else is a layer the screen does not take
    other = ~np.isin(kinds, (-1, 0, 4))
    if other.any():
        names = pd.Series(shapely.get_type_id(geometry[other])).map(
            {1: "LineString", 2: "LinearRing", 3: "Polygon", 5: "MultiLineString", 6: "MultiPolygon", 7: "GeometryCollection"}
        )
        counts = ", ".join(f"{count} {name}" for name, count in names.value_counts().items())
        raise InputError(
            f"The layer holds geometries that are not points ({counts}). pointsift screens point "
            "measurements: convert the features to points first (for example their centroids) or choose a point layer."
        )
    n = len(frame)
    x = np.full(n, np.nan)
    y = np.full(n, np.nan)
    missing = kinds == -1
    empty = ~missing & shapely.is_empty(geometry)
    reasons[missing] = "no location (no geometry)"
    reasons[empty] = "no location (empty geometry)"
    parts = shapely.get_num_geometries(geometry)
    multi = (kinds == 4) & ~empty & (parts > 1)
    for row in np.flatnonzero(multi):
        reasons[row] = f"location has {parts[row]} points (multi-part); split it into single points"
    single = ~missing & ~empty & ~multi
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

    values, reasons = parse_values(frame[config.value], config.sentinels)
    geo_reasons = np.full(n, "", dtype=object)
    x, y = _point_coordinates(frame, geo_reasons)
    input_crs = _resolve_input_crs(frame, config.crs, where)
    if input_crs.is_geographic:
        _check_geographic(x, y, geo_reasons, ids, where)
    # location problems are stated first: a point without a place cannot be judged at all
    reasons = np.where(geo_reasons != "", geo_reasons, reasons)
    located = (geo_reasons == "") & np.isfinite(x)

    if config.work_crs is not None:
        try:
            work_crs = CRS.from_user_input(config.work_crs)
        except PyprojCRSError as exc:
            raise CRSError(f"--work-crs {config.work_crs!r} is not a CRS pyproj knows ({exc}).") from exc
        if not work_crs.is_projected or work_crs.axis_info[0].unit_name not in ("metre", "meter"):
            raise CRSError(f"--work-crs {config.work_crs!r} must be a projected CRS in metres (for example a UTM zone).")
    elif input_crs.is_projected and input_crs.axis_info and input_crs.axis_info[0].unit_name in ("metre", "meter"):
        work_crs = input_crs
    else:
        to_lonlat = Transformer.from_crs(input_crs, CRS.from_epsg(4326), always_xy=True)
        lon, lat = to_lonlat.transform(x[located], y[located])
        finite = np.isfinite(lon) & np.isfinite(lat)
        if not finite.any():
            raise CRSError(f"No point of {where} could be placed on the globe with {input_crs.to_string()}. Check --crs.")
        work_crs = choose_work_crs(np.asarray(lon)[finite], np.asarray(lat)[finite])
        notes.append(f"Distances computed in {work_crs.name} ({work_crs.to_string()}), chosen for these points.")

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
