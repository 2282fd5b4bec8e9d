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
from .prepare import LOCATION_REASONS, READ_NOTES, _numbers_from_text, comma_convention

__all__ = [
    "SourceInfo",
    "read_points",
    "list_layers",
    "file_sha256",
    "write_geopackage",
    "remove_stale_partials",
    "SCREENED_LAYER",
    "PARTIAL_SUFFIX",
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


_DAMAGED = ("malformed", "not a database", "file is encrypted", "corrupt", "invalid page", "checksum", "truncated", "unexpected end")


def _plain(exc: BaseException, path=None) -> str:
    """A library's error text without what means nothing to the user: SQL statements,
    advice about the library's own API, driver prefixes, the path again; one line."""
    text = " ".join(str(exc).split())
    if path is not None:
        for form in (f"'{path}'", f'"{path}"', str(path)):
            text = text.replace(form, "the file")
    if " failed: " in text:  # "sqlite3_prepare_v2(SELECT ...) failed: why": keep only why
        text = text.rsplit(" failed: ", 1)[1]
    parts = [p.strip() for p in text.split(";")]
    text = "; ".join(dict.fromkeys(p for p in parts if p))  # "why; why" once
    for marker in (" Use pandas.", " Use ", "It might help to specify", "prefix the file path", " SQL:", "SELECT ", "INSERT ", "CREATE ", "PRAGMA "):
        cut = text.find(marker)
        if cut > 0:
            text = text[:cut]
    text = text.rstrip(" .:;,")
    return (text[:200] + "...") if len(text) > 200 else (text or type(exc).__name__)


def _read_problem(path, what: str, exc: BaseException) -> InputError:
    plain = _plain(exc, path)
    if any(word in plain.lower() for word in _DAMAGED):
        return InputError(
            f"Cannot open {str(path)!r}: it looks damaged ({plain}), so {what} cannot be read. "
            "Restore the file from a backup or export the layer again."
        )
    return InputError(
        f"Cannot open {str(path)!r} to read {what} ({plain}). Check that the file is complete and of a supported "
        "format (GeoPackage, shapefile, CSV, GeoParquet)."
    )


def list_layers(path: str | os.PathLike) -> list[str]:
    """Names of the layers in a vector file (one name for single-layer formats)."""
    import pyogrio

    path = _existing(path)
    import warnings

    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*Measured \\(M\\) geometry.*")  # read_points keeps M
            return [str(name) for name in pyogrio.list_layers(path)[:, 0]]
    except Exception as exc:  # pyogrio raises its own DataSourceError types
        raise _read_problem(path, "the list of layers", exc) from exc


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
    thousands: str | None = None,
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
    thousands : str, optional
        ``","`` when commas in text coordinate columns group thousands
        (see :func:`pointsift.prepare.comma_convention`).

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
        gdf, columns = _points_from_columns(frame, x, y, crs, str(path), thousands)
        return gdf, SourceInfo(str(path), None, "CSV", sha, columns)
    if suffix in _PARQUET_SUFFIXES:
        return _read_parquet(path, x, y, crs, sha, thousands)

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
        frame = _read_layer(pyogrio, path, layer, suffix == ".gpkg")
        if suffix == ".gpkg":
            frame.index.name = _FEATURE_ID
    except Exception as exc:
        raise _read_problem(path, f"layer {layer!r}", exc) from exc
    driver = _VECTOR_SUFFIXES.get(suffix, "vector")
    if not isinstance(frame, gpd.GeoDataFrame) or frame.geometry.name not in frame.columns or _all_missing_geometry(frame):
        # an attribute table: build points from coordinate columns
        plain = pd.DataFrame(frame.drop(columns=[frame.geometry.name]) if isinstance(frame, gpd.GeoDataFrame) and "geometry" in frame.columns else frame)
        gdf, columns = _points_from_columns(plain, x, y, crs, f"{path}:{layer}", thousands)
        return gdf, SourceInfo(str(path), layer, driver, sha, columns)
    return frame, SourceInfo(str(path), layer, driver, sha)


def _read_layer(pyogrio, path: Path, layer, fid_as_index: bool):
    """Read a layer; measured (M) geometries are read through Arrow, which keeps the M values."""
    import warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        frame = pyogrio.read_dataframe(path, layer=layer, use_arrow=False, fid_as_index=fid_as_index)
    measured = [w for w in caught if "Measured (M) geometry" in str(w.message)]
    for other in caught:
        if other not in measured:
            warnings.warn_explicit(other.message, other.category, other.filename, other.lineno)
    if measured:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*Measured \\(M\\) geometry.*")
            frame = pyogrio.read_dataframe(path, layer=layer, use_arrow=True, fid_as_index=fid_as_index)
    return frame


def _read_parquet(path: Path, x, y, crs, sha: str, thousands):
    try:
        gdf = gpd.read_parquet(path)
    except ValueError as exc:
        if "geo metadata" not in str(exc).lower():
            raise _read_problem(path, "the GeoParquet table", exc) from exc
        # a plain Parquet table (no geometry metadata): points from coordinate columns
        try:
            plain = pd.read_parquet(path)
        except Exception as inner:
            raise _read_problem(path, "the Parquet table", inner) from inner
        gdf, columns = _points_from_columns(plain, x, y, crs, str(path), thousands)
        return gdf, SourceInfo(str(path), None, "Parquet", sha, columns)
    except Exception as exc:
        raise _read_problem(path, "the GeoParquet table", exc) from exc
    return gdf, SourceInfo(str(path), None, "GeoParquet", sha)


def _all_missing_geometry(frame) -> bool:
    return isinstance(frame, gpd.GeoDataFrame) and len(frame) > 0 and frame.geometry.isna().all() and frame.crs is None


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


def _read_csv(path: Path) -> pd.DataFrame:
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
        raise InputError(f"Cannot read {str(path)!r} as CSV ({_plain(exc)}). Check the delimiter and quoting.") from exc
    try:
        return _read_csv_as(path, sep, "latin-1")
    except InputError:
        raise
    except Exception as exc:
        raise InputError(
            f"Cannot read {str(path)!r} as CSV (not UTF-8, tried Latin-1: {_plain(exc)}). "
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


def _coordinate_column(column: pd.Series, thousands: str | None) -> tuple[np.ndarray, np.ndarray]:
    """Numbers of a coordinate column and, per cell, why it is not one ("" when it is)."""
    n = len(column)
    why = np.full(n, "", dtype=object)
    if pd.api.types.is_numeric_dtype(column.dtype) and not pd.api.types.is_bool_dtype(column.dtype):
        return column.to_numpy(dtype=float, na_value=np.nan), why
    text = column.astype("object")
    # a comma means the same thing in every cell of the column (as for values)
    numbers = pd.to_numeric(_numbers_from_text(text, comma_convention(text, thousands)), errors="coerce")
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
            f"--x names column {str(cx)!r} and --y column {str(cy)!r}: x is the longitude or easting and y the "
            "latitude or northing, so the columns look swapped. Check --x and --y."
        )
    return None


def _points_from_columns(frame: pd.DataFrame, x, y, crs, where: str, thousands: str | None = None):
    cx, cy = _find_coordinate_columns(list(frame.columns), x, y, where)
    xs, why_x = _coordinate_column(frame[cx], thousands)
    ys, why_y = _coordinate_column(frame[cy], thousands)
    import shapely

    ok = np.isfinite(xs) & np.isfinite(ys)
    geometry = np.full(len(frame), None, dtype=object)
    geometry[ok] = shapely.points(xs[ok], ys[ok])
    # a table may already have a "geometry" column (WKT text, say): keep it as it is
    name = _free_name("geometry", frame.columns)
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


#: Suffix of the temporary files written beside an output: no input format has it,
#: so no folder scan or glob of inputs ever takes one.
PARTIAL_SUFFIX = ".pointsift-partial"

_WRITE_PROBLEMS = ("disk", "full", "i/o", "no space", "read-only", "readonly", "permission", "unable to open",
                   "too large", "quota", "cannot open", "failed to create", "write error")


def remove_stale_partials(folder: str | os.PathLike) -> list[str]:
    """Remove temporary files a killed run left in ``folder`` (only those whose
    writing process is gone); returns their names."""
    removed = []
    try:
        entries = list(Path(folder).iterdir())
    except OSError:
        return removed
    for item in entries:
        name = item.name
        if not name.startswith(".") or PARTIAL_SUFFIX not in name:
            continue
        try:
            pid = int(name[: name.index(PARTIAL_SUFFIX)].rsplit(".", 2)[-2])
        except (ValueError, IndexError):
            continue
        if _process_alive(pid):
            continue
        try:
            item.unlink()
            removed.append(name)
        except OSError:
            pass
    return removed


def _process_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # someone else's live process
    return True


def _temporary_beside(out_path: Path) -> str:
    handle, temporary = tempfile.mkstemp(prefix=f".{out_path.name}.{os.getpid()}.", suffix=PARTIAL_SUFFIX, dir=out_path.parent)
    os.close(handle)
    os.unlink(temporary)
    return temporary


def _write_problem(out_path: Path, exc: BaseException) -> OutputError | None:
    """The output-problem error for a full disk, an I/O error or a refused write, else None."""
    text = str(exc)
    if isinstance(exc, OSError) and not isinstance(exc, OutputError):
        why = exc.strerror or _plain(exc)
    elif any(word in text.lower() for word in _WRITE_PROBLEMS):
        why = _plain(exc)
    else:
        return None
    return OutputError(
        f"Cannot write {str(out_path)!r} ({why}). Free disk space or choose another --out folder, "
        "and check that the folder is writable; nothing was written."
    )


def _move_into_place(temporary: str, out_path: Path, overwrite: bool) -> None:
    """Rename the finished file into place. Without ``overwrite`` the step is
    exclusive: a hard link fails when another run created the output meanwhile."""
    if overwrite:
        os.replace(temporary, out_path)
        return
    try:
        os.link(temporary, out_path)
    except FileExistsError:
        raise OutputError(f"Output {str(out_path)!r} exists. Pass --overwrite to replace it, or choose another path.") from None
    except OSError:
        # no hard links on this file system: claim the name exclusively, then replace it
        try:
            claim = os.open(out_path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            raise OutputError(f"Output {str(out_path)!r} exists. Pass --overwrite to replace it, or choose another path.") from None
        os.close(claim)
        os.replace(temporary, out_path)
        return
    os.unlink(temporary)


def write_geopackage(
    out_path: str | os.PathLike,
    layers: dict[str, pd.DataFrame],
    *,
    overwrite: bool = False,
    protect: tuple[str, ...] = (),
    descriptions: dict[str, str] | None = None,
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
        Replace an existing file. Without it the final step is exclusive: of
        two runs creating the same new file, the second fails.
    protect : tuple of str
        Paths that must never be written (the inputs).
    descriptions : dict of str to str, optional
        Layer name to the description stored in ``gpkg_contents.description``.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    OutputError
        The output exists (without ``overwrite``), is an input, its folder is
        missing, or the disk is full or refuses the write.
    """
    import warnings

    import pyogrio

    out_path = _atomic_target(Path(out_path), overwrite, protect)
    remove_stale_partials(out_path.parent)
    temporary = _temporary_beside(out_path)
    descriptions = descriptions or {}
    try:
        with warnings.catch_warnings():
            # the temporary file's suffix is not .gpkg on purpose (see PARTIAL_SUFFIX)
            warnings.filterwarnings("ignore", message=".*(extension should be|non conformant file extension).*", category=RuntimeWarning)
            # measured points: GDAL records the M hint itself (the M values are written)
            warnings.filterwarnings("ignore", message=".*does contain geometries with M.*", category=RuntimeWarning)
            for name, frame in layers.items():
                _write_layer(pyogrio, temporary, name, frame, descriptions.get(name))
        _move_into_place(temporary, out_path, overwrite)
    except BaseException as exc:
        for leftover in (temporary, temporary + "-journal", temporary + "-wal", temporary + "-shm"):
            if os.path.exists(leftover):
                os.unlink(leftover)
        problem = _write_problem(out_path, exc) if isinstance(exc, Exception) else None
        if problem is not None:
            raise problem from exc
        raise
    return out_path


def _write_layer(pyogrio, temporary: str, name: str, frame: pd.DataFrame, description: str | None) -> None:
    append = os.path.exists(temporary)
    if isinstance(frame, gpd.GeoDataFrame):
        attributes = [c for c in frame.columns if c != frame.geometry.name]
        # the GeoPackage's own key and geometry columns must not take an input
        # column's name: GDAL would swallow a "FID" column as the feature id
        options = {"FID": _free_name("fid", attributes), "GEOMETRY_NAME": _free_name("geom", attributes)}
        if description:
            options["DESCRIPTION"] = description
        if frame.index.name == _FEATURE_ID:
            # the input's own feature ids, kept as the output's
            frame = frame.rename_axis(options["FID"]).reset_index()
        pyogrio.write_dataframe(
            frame, temporary, layer=name, driver="GPKG", append=append,
            promote_to_multi=False, layer_options=options, use_arrow=True,  # pyarrow is a dependency; about twice as fast
        )
    else:
        table = pd.DataFrame(frame).reset_index(drop=True)
        options = {"FID": _free_name("fid", table.columns)}
        if description:
            options["DESCRIPTION"] = description
        pyogrio.write_dataframe(table, temporary, layer=name, driver="GPKG", append=append, layer_options=options)


def run_info_table(record: dict) -> pd.DataFrame:
    """Turn a nested run record into a two-column key/value table."""
    rows = []
    for key, value in record.items():
        text = value if isinstance(value, str) else json.dumps(value, default=str, sort_keys=True)
        rows.append((key, text))
    return pd.DataFrame(rows, columns=["key", "value"])
