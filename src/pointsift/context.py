"""Hydrogeological context of each record: land surface, well depth, site, aquifer, flowing marker.

All columns are optional (see :class:`~pointsift.config.ScreenConfig`). A
context value that cannot be read is blank for that row, and the row keeps
a note that goes into its reasons; nothing here makes a row unscreened or
stops the screen, except a named column that is missing or a land-surface
raster that cannot be opened (a usage problem with a message naming the fix).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from pyproj import CRS, Transformer

from .config import ScreenConfig
from .errors import InputError

__all__ = ["Context", "read_context", "sample_raster", "surface_tolerance", "FLOWING_WORDS"]

#: Text in a flowing-marker column read as "this well flows" (case-insensitive).
FLOWING_WORDS = ("1", "true", "yes", "y", "t", "flowing", "artesian", "flowing artesian")

#: Default tolerance for a level above land surface, by units (value units).
_SURFACE_TOLERANCE = {"m": 0.5, "ft": 1.5}


@dataclass(frozen=True)
class Context:
    """Context per row (blank where not given).

    Attributes
    ----------
    ground : ndarray
        Land-surface elevation (NaN unknown).
    ground_source : ndarray of object
        ``"column"``, ``"raster"`` or ``""``.
    well_depth : ndarray
        Well depth below land surface (NaN unknown).
    site, aquifer : ndarray of object
        Site and unit names ("" unknown).
    flowing : ndarray of bool
        Marked as flowing.
    note : ndarray of object
        Per row: what could not be read ("" none), for the reasons.
    raster_ground : ndarray or None
        The land-surface raster at each well (NaN outside or no data), when
        a raster is given; compared with the ground elevation column.
    record : dict
        What was used, for ``run_info["context"]``.
    """

    ground: np.ndarray
    ground_source: np.ndarray
    well_depth: np.ndarray
    site: np.ndarray
    aquifer: np.ndarray
    flowing: np.ndarray
    note: np.ndarray
    record: dict = field(default_factory=dict)
    raster_ground: np.ndarray | None = None

    @property
    def has_ground(self) -> bool:
        """Some row has a land-surface elevation."""
        return bool(np.isfinite(self.ground).any())


def surface_tolerance(config: ScreenConfig) -> float:
    """How far a level may stand above land surface (value units) before it is implausible."""
    if config.surface_tolerance is not None:
        return float(config.surface_tolerance)
    return _SURFACE_TOLERANCE.get((config.units or "m").lower(), 0.5)


def _column(frame, name: str, option: str, where: str):
    if name not in frame.columns:
        present = ", ".join(str(c) for c in frame.columns if c != frame.geometry.name)
        raise InputError(f"{where} has no column {name!r} for {option}. Columns present: {present}. Fix the name or leave {option} out.")
    return frame[name]


def _numbers(column: pd.Series) -> np.ndarray:
    return pd.to_numeric(column, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _labels(column: pd.Series) -> np.ndarray:
    text = column.astype("object").map(lambda v: "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v).strip())
    return text.to_numpy(dtype=object)


def sample_raster(path: str, xy: np.ndarray, crs: CRS) -> tuple[np.ndarray, np.ndarray]:
    """Sample band 1 of a raster at points.

    Parameters
    ----------
    path : str
        A raster rasterio can open (GeoTIFF).
    xy : ndarray, shape (n, 2)
        Coordinates in ``crs`` (NaN rows are skipped).
    crs : pyproj.CRS
        CRS of ``xy``.

    Returns
    -------
    values : ndarray
        The cell value (NaN outside, on no-data, or unlocated).
    why : ndarray of object
        "" where sampled, else "outside the land-surface raster" or
        "no data in the land-surface raster here".
    """
    import rasterio

    n = xy.shape[0]
    values = np.full(n, np.nan)
    why = np.full(n, "", dtype=object)
    try:
        src = rasterio.open(path)
    except Exception as exc:  # rasterio raises its own error types
        raise InputError(f"Cannot open the land-surface raster {path!r} ({exc}). Give a GeoTIFF elevation model.") from exc
    with src:
        located = np.isfinite(xy).all(axis=1)
        if src.crs is None:
            raise InputError(f"The land-surface raster {path!r} has no CRS. Assign one (for example with gdal_edit.py -a_srs).")
        to_raster = Transformer.from_crs(crs, CRS.from_user_input(src.crs.to_wkt()), always_xy=True)
        rx, ry = to_raster.transform(xy[located, 0], xy[located, 1])
        rows, cols = rasterio.transform.rowcol(src.transform, np.asarray(rx), np.asarray(ry))
        rows, cols = np.asarray(rows), np.asarray(cols)
        inside = (rows >= 0) & (rows < src.height) & (cols >= 0) & (cols < src.width)
        band = src.read(1, masked=True)
        got = np.full(rows.size, np.nan)
        reason = np.full(rows.size, "outside the land-surface raster", dtype=object)
        cell = band[rows[inside], cols[inside]]
        masked = np.ma.getmaskarray(cell)
        got[inside] = np.where(masked, np.nan, np.ma.filled(cell.astype(float), np.nan))
        reason[inside] = np.where(masked | ~np.isfinite(got[inside]), "no data in the land-surface raster here", "")
        values[located] = got
        why[located] = reason
    return values, why


def read_context(frame, config: ScreenConfig, xy: np.ndarray, work_crs: CRS, *, where: str = "the layer") -> Context:
    """Read the context columns named in ``config``.

    Parameters
    ----------
    frame : geopandas.GeoDataFrame
        The input rows (not modified).
    config : ScreenConfig
        Names of the context columns and the raster.
    xy : ndarray, shape (n, 2)
        Work-CRS coordinates (for sampling the raster).
    work_crs : pyproj.CRS
        CRS of ``xy``.
    where : str
        How to name the layer in messages.

    Returns
    -------
    Context
    """
    n = len(frame)
    note = np.full(n, "", dtype=object)
    ground = np.full(n, np.nan)
    source = np.full(n, "", dtype=object)
    record: dict = {
        "quantity": config.quantity,
        "units": config.units or "not stated",
        "ground_elevation": config.ground_elevation,
        "land_surface": config.land_surface,
    }
    if config.ground_elevation is not None:
        ground = _numbers(_column(frame, config.ground_elevation, "--ground-elevation", where))
        source[np.isfinite(ground)] = "column"
    sampled = None
    if config.land_surface is not None:
        sampled, why = sample_raster(config.land_surface, xy, work_crs)
        fill = ~np.isfinite(ground)
        ground = np.where(fill & np.isfinite(sampled), sampled, ground)
        source[fill & np.isfinite(sampled)] = "raster"
        note[fill & (why != "")] = why[fill & (why != "")]
        record["raster_outside_or_no_data"] = int((fill & (why != "")).sum())
    depth = np.full(n, np.nan)
    if config.well_depth is not None:
        depth = _numbers(_column(frame, config.well_depth, "--well-depth", where))
        depth = np.where(depth > 0, depth, np.nan)
    site = _labels(_column(frame, config.site, "--site", where)) if config.site else np.full(n, "", dtype=object)
    aquifer = _labels(_column(frame, config.aquifer, "--aquifer", where)) if config.aquifer else np.full(n, "", dtype=object)
    flowing = np.zeros(n, dtype=bool)
    if config.flowing is not None:
        marker = _column(frame, config.flowing, "--flowing", where)
        flowing = marker.astype("object").map(
            lambda v: (isinstance(v, (bool, np.bool_)) and bool(v))
            or (isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool) and np.isfinite(v) and v != 0)
            or (isinstance(v, str) and v.strip().lower() in FLOWING_WORDS)
        ).to_numpy(dtype=bool)
    record.update(
        {
            "well_depth": config.well_depth,
            "site": config.site,
            "aquifer": config.aquifer,
            "flowing": config.flowing,
            "rows_with_ground_elevation": int(np.isfinite(ground).sum()),
            "rows_with_well_depth": int(np.isfinite(depth).sum()),
            "surface_tolerance": surface_tolerance(config),
            "depth_tolerance_share": config.depth_tolerance,
        }
    )
    if config.aquifer:
        record["rows_without_unit"] = int((aquifer == "").sum())
        record["wells_without_unit"] = "compared with the nearest wells of any unit; neighbours of none"
    return Context(ground, source, depth, site, aquifer, flowing, note, record, sampled)
