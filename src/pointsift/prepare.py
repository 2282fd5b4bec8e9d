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

from .config import ScreenConfig, spell
from .errors import InputError
from .graph import coincident_groups
from .tables import LOCATION_REASONS, READ_NOTES, comma_convention, numbers_from_text
from .workcrs import (
    SCALE_TOLERANCE,
    check_area_of_use,
    check_geographic,
    check_projected,
    choose_work_crs,
    resolve_input_crs,
    scale_error,
    work_crs_for,
)

__all__ = ["Prepared", "prepare", "choose_work_crs", "parse_values", "comma_convention", "scale_error", "SCALE_TOLERANCE", "LOCATION_REASONS", "READ_NOTES"]

log = logging.getLogger(__name__)

_DECIMAL_COMMA = re.compile(r"[+-]?\d+,\d+")

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
        stripped = numbers_from_text(text, convention)
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


def _read_location_reasons(frame: gpd.GeoDataFrame) -> np.ndarray:
    """Per-row reasons found while reading coordinate columns ("" elsewhere)."""
    reasons = np.full(len(frame), "", dtype=object)
    found = frame.attrs.get(LOCATION_REASONS)
    if isinstance(found, pd.Series) and found.index.is_unique:
        aligned = found.reindex(frame.index)
        reasons[:] = aligned.where(aligned.notna(), "").to_numpy(dtype=object)
    return reasons


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
            f"Choose one with {spell('value', 'COLUMN')}."
        )
    if config.id is not None and config.id not in frame.columns:
        raise InputError(
            f"{where} has no id column {config.id!r}. Columns present: "
            f"{', '.join(str(c) for c in frame.columns if c != frame.geometry.name)}. Choose one with {spell('id', 'COLUMN')} or leave it out."
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
    input_crs = resolve_input_crs(frame, config.crs, where)
    if input_crs.is_geographic:
        check_geographic(x, y, geo_reasons, ids, where)
    else:
        check_projected(x, y, geo_reasons, input_crs)
    check_area_of_use(x, y, geo_reasons, input_crs, where, notes)
    # location problems are stated first: a point without a place cannot be judged at all
    reasons = np.where(geo_reasons != "", geo_reasons, reasons)
    located = (geo_reasons == "") & np.isfinite(x)
    if not located.any():
        first = next((r for r in geo_reasons if r), "no location")
        raise InputError(
            f"No row of {where} has a usable location (first reason: {first}). "
            f"Check the coordinate columns ({spell('x')}, {spell('y')}), the geometry and the CRS."
        )
    work_crs = work_crs_for(input_crs, x[located], y[located], config, where, notes)

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
