"""Reading point layers and writing screened GeoPackages.

This is the only module that touches files. Reading never modifies the input;
writing goes to a temporary file beside the output, which is renamed into
place only when everything has been written, so a failed run leaves nothing
behind.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from .errors import InputError, OutputError

__all__ = [
    "SourceInfo",
    "read_points",
    "list_layers",
    "file_sha256",
    "write_geopackage",
    "SCREENED_LAYER",
]

log = logging.getLogger(__name__)

#: Index name marking GeoPackage feature ids read from the input.
_FEATURE_ID = "__pointsift_feature_id__"

#: Name of the screened point layer in output GeoPackages.
SCREENED_LAYER = "screened"

_VECTOR_SUFFIXES = {".gpkg": "GeoPackage", ".shp": "ESRI Shapefile", ".geojson": "GeoJSON", ".json": "GeoJSON", ".fgb": "FlatGeobuf"}
_CSV_SUFFIXES = {".csv", ".txt", ".tsv"}
_PARQUET_SUFFIXES = {".parquet", ".geoparquet", ".pq"}

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


@dataclass(frozen=True)
class SourceInfo:
    """Where a layer came from, for the run record and messages.

    Attributes
    ----------
    path : str
        The input file as given.
    layer : str or None
        Layer read (GeoPackage, or None for single-layer formats).
    driver : str
        File format.
    sha256 : str
        SHA-256 of the input file's bytes (shapefiles: of all side files).
    coordinate_columns : tuple of str or None
        Columns the points were built from, for tables.
    """

    path: str
    layer: str | None
    driver: str
    sha256: str
    coordinate_columns: tuple[str, str] | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)


def file_sha256(path: str | os.PathLike) -> str:
    """SHA-256 of a file, or of a shapefile and its side files together.

    Parameters
    ----------
    path : path-like
        File to hash.

    Returns
    -------
    str
        Hexadecimal digest.
    """
    path = Path(path)
    digest = hashlib.sha256()
    files = [path]
    if path.suffix.lower() == ".shp":
        files = sorted(p for p in path.parent.glob(path.stem + ".*") if p.suffix.lower() in {".shp", ".shx", ".dbf", ".prj", ".cpg"})
    for item in files:
        with open(item, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    return digest.hexdigest()


def list_layers(path: str | os.PathLike) -> list[str]:
    """Names of the layers in a vector file (one name for single-layer formats)."""
    import pyogrio

    path = _existing(path)
    try:
        return [str(name) for name in pyogrio.list_layers(path)[:, 0]]
    except Exception as exc:  # pyogrio raises its own DataSourceError types
        raise InputError(f"Cannot open {str(path)!r} as a vector file: {exc}. Check that the file is complete and of a supported format (GeoPackage, shapefile, CSV, GeoParquet).") from exc


def _existing(path: str | os.PathLike) -> Path:
    path = Path(path)
    if not path.exists():
        raise InputError(f"Input {str(path)!r} does not exist. Check the path and spelling.")
    if path.is_dir():
        raise InputError(f"Input {str(path)!r} is a folder. Name a file (GeoPackage, shapefile, CSV or GeoParquet).")
    return path


def read_points(
    path: str | os.PathLike,
    *,
    layer: str | None = None,
    x: str | None = None,
    y: str | None = None,
    crs: str | None = None,
) -> tuple[gpd.GeoDataFrame, SourceInfo]:
    """Read a point layer from a GeoPackage, shapefile, CSV or GeoParquet file.

    Parameters
    ----------
    path : path-like
        Input file.
    layer : str, optional
        Layer to read from a multi-layer file. Required when there are several.
    x, y : str, optional
        Coordinate columns of a table (CSV, or a GeoPackage table without
        geometry). Detected from common names (x/y, lon/lat,
        longitude/latitude, easting/northing, ...) when not given.
    crs : str, optional
        Only used for tables: the CRS of the coordinate columns. Layers keep
        their own CRS here; :func:`pointsift.prepare.prepare` checks it.

    Returns
    -------
    geopandas.GeoDataFrame
        The rows exactly as stored, in file order, with a point geometry.
    SourceInfo
        Provenance for the run record.

    Raises
    ------
    InputError
        The file is missing, unreadable, has several layers and none was
        chosen, or holds no usable coordinates.
    """
    path = _existing(path)
    suffix = path.suffix.lower()
    sha = file_sha256(path)
    if suffix in _CSV_SUFFIXES:
        frame = _read_csv(path)
        gdf, columns = _points_from_columns(frame, x, y, crs, str(path))
        return gdf, SourceInfo(str(path), None, "CSV", sha, columns)
    if suffix in _PARQUET_SUFFIXES:
        try:
            gdf = gpd.read_parquet(path)
        except Exception as exc:
            raise InputError(f"Cannot read {str(path)!r} as GeoParquet: {exc}. Check that the file is complete.") from exc
        return gdf, SourceInfo(str(path), None, "GeoParquet", sha)

    import pyogrio

    layers = list_layers(path)
    if layer is None:
        if len(layers) > 1:
            raise InputError(
                f"{str(path)!r} holds {len(layers)} layers: {', '.join(layers)}. "
                "Choose one with --layer NAME."
            )
        layer = layers[0] if layers else None
    elif layer not in layers:
        raise InputError(f"{str(path)!r} has no layer {layer!r}. Layers present: {', '.join(layers) or 'none'}.")
    try:
        # keep GeoPackage feature ids (a layer edited in a GIS has gaps): the
        # output writes them back, so the flag layer joins to the input by fid
        frame = pyogrio.read_dataframe(path, layer=layer, use_arrow=False, fid_as_index=suffix == ".gpkg")
        if suffix == ".gpkg":
            frame.index.name = _FEATURE_ID
    except Exception as exc:
        raise InputError(f"Cannot read layer {layer!r} of {str(path)!r}: {exc}.") from exc
    driver = _VECTOR_SUFFIXES.get(suffix, "vector")
    if not isinstance(frame, gpd.GeoDataFrame) or frame.geometry.name not in frame.columns or _all_missing_geometry(frame):
        # an attribute table: build points from coordinate columns
        plain = pd.DataFrame(frame.drop(columns=[frame.geometry.name]) if isinstance(frame, gpd.GeoDataFrame) and "geometry" in frame.columns else frame)
        gdf, columns = _points_from_columns(plain, x, y, crs, f"{path}:{layer}")
        return gdf, SourceInfo(str(path), layer, driver, sha, columns)
    return frame, SourceInfo(str(path), layer, driver, sha)


def _all_missing_geometry(frame) -> bool:
    return isinstance(frame, gpd.GeoDataFrame) and len(frame) > 0 and frame.geometry.isna().all() and frame.crs is None


def _read_csv(path: Path) -> pd.DataFrame:
    sep = "\t" if path.suffix.lower() == ".tsv" else None
    try:
        # keep every column as text first would lose types; let pandas infer,
        # but never let a bad value crash reading (value parsing is prepare's job)
        # utf-8-sig: spreadsheet "CSV UTF-8" exports start with a byte-order mark,
        # which would otherwise stick to the first column's name
        return pd.read_csv(path, sep=sep, engine="python" if sep is None else "c", skipinitialspace=True, encoding="utf-8-sig")
    except UnicodeDecodeError:
        pass  # not UTF-8: an older spreadsheet export, read as Latin-1 below
    except Exception as exc:
        raise InputError(f"Cannot read {str(path)!r} as CSV: {exc}. Check the delimiter and quoting.") from exc
    try:
        return pd.read_csv(path, sep=sep, engine="python", encoding="latin-1", skipinitialspace=True)
    except Exception as exc:
        raise InputError(
            f"Cannot read {str(path)!r} as CSV (not UTF-8, tried Latin-1): {exc}. "
            "Check the delimiter and quoting, or save the file as UTF-8."
        ) from exc


def _find_coordinate_columns(columns, x: str | None, y: str | None, where: str) -> tuple[str, str]:
    if (x is None) != (y is None):
        raise InputError("Give both --x and --y (the coordinate columns), or neither to detect them.")
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
        f"longitude/latitude, easting/northing). Name them with --x COLUMN --y COLUMN. "
        f"Columns present: {', '.join(map(str, columns))}."
    )


def _points_from_columns(frame: pd.DataFrame, x, y, crs, where: str):
    cx, cy = _find_coordinate_columns(list(frame.columns), x, y, where)
    xs = pd.to_numeric(frame[cx], errors="coerce").to_numpy(dtype=float)
    ys = pd.to_numeric(frame[cy], errors="coerce").to_numpy(dtype=float)
    import shapely

    ok = np.isfinite(xs) & np.isfinite(ys)
    geometry = np.full(len(frame), None, dtype=object)
    geometry[ok] = shapely.points(xs[ok], ys[ok])
    # a table may already have a "geometry" column (WKT text, say): keep it as it is
    name = _free_name("geometry", frame.columns)
    table = pd.DataFrame(frame).copy()
    table[name] = gpd.GeoSeries(geometry, index=frame.index)
    gdf = gpd.GeoDataFrame(table, geometry=name, crs=crs)
    return gdf, (str(cx), str(cy))


def _atomic_target(out_path: Path, overwrite: bool, protect: tuple[str, ...]) -> Path:
    out_path = Path(out_path)
    if out_path.suffix.lower() != ".gpkg":
        raise OutputError(f"Output {str(out_path)!r} must be a GeoPackage file ending in .gpkg.")
    resolved = out_path.resolve()
    for item in protect:
        if item and Path(item).resolve() == resolved:
            raise OutputError(f"Output {str(out_path)!r} is the input file; pointsift never writes to its input. Choose another --out path.")
    if out_path.exists() and not overwrite:
        raise OutputError(f"Output {str(out_path)!r} exists. Pass --overwrite to replace it, or choose another path.")
    if not out_path.parent.exists():
        raise OutputError(f"Folder {str(out_path.parent)!r} does not exist. Create it first or choose another --out path.")
    return out_path


def _free_name(base: str, columns) -> str:
    """``base``, or ``base_1``, ``base_2``... : a name no column has (case-insensitively,
    as SQLite compares names)."""
    taken = {str(c).lower() for c in columns}
    name, number = base, 0
    while name.lower() in taken:
        number += 1
        name = f"{base}_{number}"
    return name


def write_geopackage(
    out_path: str | os.PathLike,
    layers: dict[str, pd.DataFrame],
    *,
    overwrite: bool = False,
    protect: tuple[str, ...] = (),
) -> Path:
    """Write layers and tables to one GeoPackage, atomically.

    Parameters
    ----------
    out_path : path-like
        Target ``.gpkg`` file.
    layers : dict of str to DataFrame
        Layer name to data, written in order. A GeoDataFrame becomes a
        spatial layer; a plain DataFrame becomes a non-spatial table.
    overwrite : bool
        Replace an existing file.
    protect : tuple of str
        Paths that must never be written (the inputs).

    Returns
    -------
    pathlib.Path
        The written file.
    """
    import pyogrio

    out_path = _atomic_target(Path(out_path), overwrite, protect)
    handle, temporary = tempfile.mkstemp(prefix=f".{out_path.stem}.", suffix=".partial.gpkg", dir=out_path.parent)
    os.close(handle)
    os.unlink(temporary)
    try:
        for name, frame in layers.items():
            if isinstance(frame, gpd.GeoDataFrame):
                attributes = [c for c in frame.columns if c != frame.geometry.name]
                # the GeoPackage's own key and geometry columns must not take an input
                # column's name: GDAL would swallow a "FID" column as the feature id
                options = {"FID": _free_name("fid", attributes), "GEOMETRY_NAME": _free_name("geom", attributes)}
                if frame.index.name == _FEATURE_ID:
                    # the input's own feature ids, kept as the output's
                    frame = frame.rename_axis(options["FID"]).reset_index()
                pyogrio.write_dataframe(
                    frame, temporary, layer=name, driver="GPKG", append=os.path.exists(temporary),
                    promote_to_multi=False, layer_options=options, use_arrow=True,  # pyarrow is a dependency; about twice as fast
                )
            else:
                table = pd.DataFrame(frame).reset_index(drop=True)
                pyogrio.write_dataframe(
                    table, temporary, layer=name, driver="GPKG", append=os.path.exists(temporary),
                    layer_options={"FID": _free_name("fid", table.columns)},
                )
        os.replace(temporary, out_path)
    except BaseException:
        for leftover in (temporary, temporary + "-journal", temporary + "-wal", temporary + "-shm"):
            if os.path.exists(leftover):
                os.unlink(leftover)
        raise
    return out_path


def run_info_table(record: dict) -> pd.DataFrame:
    """Turn a nested run record into a two-column key/value table."""
    rows = []
    for key, value in record.items():
        text = value if isinstance(value, str) else json.dumps(value, default=str, sort_keys=True)
        rows.append((key, text))
    return pd.DataFrame(rows, columns=["key", "value"])
