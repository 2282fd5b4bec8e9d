"""Points from tables: CSV files and coordinate columns (part of reading).

A comma means one thing in a whole column (:func:`comma_convention`), for
values and coordinates alike. Cells that cannot be read as coordinates keep
their row, with the reason, for :func:`pointsift.prepare.prepare`.
"""

from __future__ import annotations

import logging
import re
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from .config import spell
from .errors import InputError, plain_library_text

__all__ = ["LOCATION_REASONS", "READ_NOTES", "comma_convention", "numbers_from_text", "read_csv", "points_from_columns", "free_name"]

log = logging.getLogger(__name__)

#: ``frame.attrs`` key of per-row location reasons found while reading (a pandas
#: Series aligned with the rows, "" where the location was read).
LOCATION_REASONS = "pointsift_location_reasons"
#: ``frame.attrs`` key of notes made while reading (tuple of str).
READ_NOTES = "pointsift_read_notes"

# Pairs of coordinate column names recognised in tables, in order of preference
# (compared case-insensitively). Common practice in exported well databases.
_COORDINATE_PAIRS = (
    ("x", "y"),
    ("lon", "lat"),
    ("long", "lat"),
    ("lng", "lat"),
    ("longitude", "latitude"),
    ("easting", "northing"),
    ("east", "north"),
    ("x_coord", "y_coord"),
    ("xcoord", "ycoord"),
    ("coord_x", "coord_y"),
    ("point_x", "point_y"),
)


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


def numbers_from_text(text: pd.Series, convention: str) -> pd.Series:
    if convention == "decimal":
        return text.map(lambda v: v.strip().replace(",", ".") if isinstance(v, str) else v)
    if convention == "thousands":
        # commas are dropped only where they group thousands ("1,234.5")
        return text.map(lambda v: (v.strip().replace(",", "") if _THOUSANDS.fullmatch(v.strip()) else v.strip()) if isinstance(v, str) else v)
    return text.map(lambda v: v.strip() if isinstance(v, str) else v)


def _leading_comment_lines(path: Path, encoding: str) -> int:
    """Number of lines at the top of a text file that start with '#' (comments)."""
    count = 0
    with open(path, encoding=encoding, errors="replace", newline="") as handle:
        for line in handle:
            if not line.lstrip("\ufeff").startswith("#"):
                break
            count += 1
    return count


def _header_names(path: Path, sep, encoding: str, skip: int) -> list[str]:
    """The header row exactly as written (pandas renames repeated names to 'name.1')."""
    header = pd.read_csv(path, sep=sep, engine="python", encoding=encoding, skiprows=skip, header=None, nrows=1,
                         skipinitialspace=True, dtype=str, keep_default_na=False)
    return [str(v) for v in header.iloc[0].tolist()] if len(header) else []


def _read_csv_as(path: Path, sep, encoding: str) -> pd.DataFrame:
    skip = _leading_comment_lines(path, encoding)
    names = _header_names(path, sep, encoding, skip)
    repeated = sorted({name for name in names if names.count(name) > 1})
    if repeated:
        raise InputError(
            f"{str(path)!r} has {len(repeated)} column name(s) used more than once: "
            f"{', '.join(repr(n) for n in repeated)}. Rename the repeated columns in the file's header so each name is unique."
        )
    # let pandas infer types; bad values are prepare's job (unscreened rows), never a crash
    frame = pd.read_csv(path, sep=sep, engine="python" if sep is None else "c", skipinitialspace=True,
                        encoding=encoding, skiprows=skip)
    if skip:
        frame.attrs[READ_NOTES] = (f"Skipped {skip} comment line{'s' if skip > 1 else ''} starting with '#' at the top of {path.name}.",)
    return frame


def read_csv(path: Path) -> pd.DataFrame:
    sep = "\t" if path.suffix.lower() == ".tsv" else None
    try:
        # utf-8-sig: spreadsheet "CSV UTF-8" exports start with a byte-order mark,
        # which would otherwise stick to the first column's name
        return _read_csv_as(path, sep, "utf-8-sig")
    except UnicodeDecodeError:
        pass  # not UTF-8: an older spreadsheet export, read as Latin-1 below
    except InputError:
        raise
    except Exception as exc:
        raise InputError(f"Cannot read {str(path)!r} as CSV ({plain_library_text(exc)}). Check the delimiter and quoting.") from exc
    try:
        return _read_csv_as(path, sep, "latin-1")
    except InputError:
        raise
    except Exception as exc:
        raise InputError(
            f"Cannot read {str(path)!r} as CSV (not UTF-8, tried Latin-1: {plain_library_text(exc)}). "
            "Check the delimiter and quoting, or save the file as UTF-8."
        ) from exc


def _find_coordinate_columns(columns, x: str | None, y: str | None, where: str) -> tuple[str, str]:
    if (x is None) != (y is None):
        raise InputError(f"Give both {spell('x')} and {spell('y')} (the coordinate columns), or neither to detect them.")
    if x is not None:
        missing = [c for c in (x, y) if c not in columns]
        if missing:
            raise InputError(f"{where} has no column {missing[0]!r}. Columns present: {', '.join(map(str, columns))}.")
        return x, y
    lower = {str(c).lower(): c for c in columns}
    for cx, cy in _COORDINATE_PAIRS:
        if cx in lower and cy in lower:
            return lower[cx], lower[cy]
    raise InputError(
        f"{where} has no recognisable coordinate columns (looked for pairs such as x/y, lon/lat, "
        f"longitude/latitude, easting/northing). Name them with {spell('x', 'COLUMN')} {spell('y', 'COLUMN')}. "
        f"Columns present: {', '.join(map(str, columns))}."
    )


def _coordinate_column(column: pd.Series, thousands: str | None) -> tuple[np.ndarray, np.ndarray]:
    """Numbers of a coordinate column and, per cell, why it is not one ("" when it is)."""
    n = len(column)
    why = np.full(n, "", dtype=object)
    if pd.api.types.is_numeric_dtype(column.dtype) and not pd.api.types.is_bool_dtype(column.dtype):
        return column.to_numpy(dtype=float, na_value=np.nan), why
    text = column.astype("object")
    # a comma means the same thing in every cell of the column (as for values)
    numbers = pd.to_numeric(numbers_from_text(text, comma_convention(text, thousands)), errors="coerce")
    numbers = numbers.to_numpy(dtype=float, na_value=np.nan)
    filled = text.map(lambda v: not (v is None or (isinstance(v, float) and np.isnan(v)) or (isinstance(v, str) and not v.strip()))).to_numpy(dtype=bool)
    for row in np.flatnonzero(np.isnan(numbers) & filled):
        why[row] = f"coordinate {str(text.iloc[row])[:40]!r} is not a number"
    return numbers, why


def _swapped_names_note(cx, cy) -> str | None:
    lat_like = {"lat", "latitude", "y", "northing", "north", "y_coord", "ycoord", "coord_y", "point_y"}
    lon_like = {"lon", "long", "lng", "longitude", "x", "easting", "east", "x_coord", "xcoord", "coord_x", "point_x"}
    if str(cx).lower() in lat_like and str(cy).lower() in lon_like:
        return (
            f"{spell('x')} names column {str(cx)!r} and {spell('y')} column {str(cy)!r}: x is the longitude or easting and y the "
            f"latitude or northing, so the columns look swapped. Check {spell('x')} and {spell('y')}."
        )
    return None


def points_from_columns(frame: pd.DataFrame, x, y, crs, where: str, thousands: str | None = None):
    cx, cy = _find_coordinate_columns(list(frame.columns), x, y, where)
    xs, why_x = _coordinate_column(frame[cx], thousands)
    ys, why_y = _coordinate_column(frame[cy], thousands)
    import shapely

    ok = np.isfinite(xs) & np.isfinite(ys)
    geometry = np.full(len(frame), None, dtype=object)
    geometry[ok] = shapely.points(xs[ok], ys[ok])
    # a table may already have a "geometry" column (WKT text, say): keep it as it is
    name = free_name("geometry", frame.columns)
    table = pd.DataFrame(frame).copy()
    table[name] = gpd.GeoSeries(geometry, index=frame.index)
    gdf = gpd.GeoDataFrame(table, geometry=name, crs=crs)
    reasons = np.where(why_x != "", why_x, why_y)
    partial = ~ok & (reasons == "") & (np.isfinite(xs) | np.isfinite(ys))
    reasons[partial] = "no location (one coordinate is blank)"
    reasons[~ok & (reasons == "")] = "no location (blank coordinates)"
    gdf.attrs[LOCATION_REASONS] = pd.Series(reasons, index=frame.index, dtype=object)
    notes = tuple(frame.attrs.get(READ_NOTES, ()))
    swapped = _swapped_names_note(cx, cy) if x is not None else None
    if swapped:
        log.warning(swapped)
        notes += (swapped,)
    if notes:
        gdf.attrs[READ_NOTES] = notes
    return gdf, (str(cx), str(cy))


def free_name(base: str, columns) -> str:
    """``base``, or ``base_1``, ``base_2``... : a name no column has (case-insensitively,
    as SQLite compares names)."""
    taken = {str(c).lower() for c in columns}
    name, number = base, 0
    while name.lower() in taken:
        number += 1
        name = f"{base}_{number}"
    return name
