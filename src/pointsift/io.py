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
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import pandas as pd

from .config import spell
from .errors import InputError, OutputError, plain_library_text
from .lifetime import process_alive
from .tables import LOCATION_REASONS, READ_NOTES, free_name, points_from_columns, read_csv

__all__ = [
    "SourceInfo",
    "read_points",
    "list_layers",
    "file_sha256",
    "input_files",
    "check_output_paths",
    "write_geopackage",
    "remove_stale_partials",
    "atomic_write",
    "write_text",
    "run_info_table",
    "SCREENED_LAYER",
    "PARTIAL_SUFFIX",
    "LOCATION_REASONS",
    "READ_NOTES",
]

log = logging.getLogger(__name__)

#: Index name marking GeoPackage feature ids read from the input.
_FEATURE_ID = "__pointsift_feature_id__"

#: Name of the screened point layer in output GeoPackages.
SCREENED_LAYER = "screened"

_VECTOR_SUFFIXES = {".gpkg": "GeoPackage", ".shp": "ESRI Shapefile", ".geojson": "GeoJSON", ".json": "GeoJSON", ".fgb": "FlatGeobuf"}
_CSV_SUFFIXES = {".csv", ".txt", ".tsv"}
_PARQUET_SUFFIXES = {".parquet", ".geoparquet", ".pq"}

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


_SHAPEFILE_PARTS = {".shp", ".shx", ".dbf", ".prj", ".cpg"}


def input_files(path: str | os.PathLike, *, hashed_only: bool = False) -> list[Path]:
    """Every file that belongs to an input: a shapefile's side files, a
    GeoPackage's journal files; these are never written.

    Parameters
    ----------
    path : path-like
        The input as named.
    hashed_only : bool
        Only the files :func:`file_sha256` hashes (those that exist).

    Returns
    -------
    list of pathlib.Path
    """
    path = Path(path)
    if path.suffix.lower() == ".shp":
        files = sorted(p for p in path.parent.glob(glob_escape(path.stem) + ".*") if p.suffix.lower() in _SHAPEFILE_PARTS)
        if hashed_only:
            return files
        # also the side files a shapefile may have but does not now (a new .prj would change the layer)
        wanted = {str(p) for p in files} | {str(path.with_suffix(s)) for s in _SHAPEFILE_PARTS | {s.upper() for s in _SHAPEFILE_PARTS}}
        return sorted(Path(p) for p in wanted)
    if hashed_only:
        return [path]
    return [path] + [Path(f"{path}{tail}") for tail in ("-journal", "-wal", "-shm")]


def glob_escape(text: str) -> str:
    """``text`` with glob's special characters escaped."""
    import glob

    return glob.escape(text)


def _same_file(a: Path, b: Path) -> bool:
    if os.path.abspath(a) == os.path.abspath(b) or a.resolve() == b.resolve():
        return True
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)  # hard links
    except OSError:
        return False


def check_output_paths(outputs, inputs, *, overwrite: bool | None = None) -> None:
    """Refuse, before any work, an output that is a file of an input or another output.

    Parameters
    ----------
    outputs : iterable of (str, path-like)
        ``(option, path)`` of every file the run will write, e.g.
        ``("--out", "a.gpkg")``, ``("--report", "a.html")``.
    inputs : iterable of path-like
        The inputs read (each with its side files, :func:`input_files`).
    overwrite : bool, optional
        When given, also refuse an existing output without ``overwrite``
        and an output whose folder does not exist (every output alike).

    Raises
    ------
    OutputError
        An output is an input's file, two outputs name the same file, or
        (with ``overwrite`` given) an output exists or has no folder.
    """
    protected = [(Path(i), f) for i in inputs if i for f in input_files(i)]
    seen: list[tuple[str, Path]] = []
    for option, path in outputs:
        if path is None:
            continue
        target = Path(path)
        for source, part in protected:
            if _same_file(target, part):
                what = "the input" if part == source else f"a file of the input {str(source)!r}"
                raise OutputError(
                    f"{option} {str(target)!r} is {what}; pointsift never writes over its input. "
                    f"Choose another {option} path."
                )
        for other_option, other in seen:
            if _same_file(target, other):
                raise OutputError(
                    f"{option} and {other_option} name the same file {str(target)!r}; each output needs its own path. "
                    f"Choose another {option} path."
                )
        seen.append((option, target))
        if overwrite is None:
            continue
        if target.exists() and not overwrite:
            raise OutputError(f"{option} {str(target)!r} exists. Pass --overwrite to replace it, or choose another path.")
        folder = target.parent if str(target.parent) else Path(".")
        if not folder.is_dir():
            raise OutputError(f"Folder {str(folder)!r} of {option} {str(target)!r} does not exist. Create it first or choose another path.")


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
    digest = hashlib.sha256()
    for item in input_files(path, hashed_only=True):
        with open(item, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    return digest.hexdigest()


_DAMAGED = ("malformed", "not a database", "file is encrypted", "corrupt", "invalid page", "checksum", "truncated", "unexpected end")


def _read_problem(path, what: str, exc: BaseException) -> InputError:
    plain = plain_library_text(exc, path)
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
        frame = read_csv(path)
        gdf, columns = points_from_columns(frame, x, y, crs, str(path), thousands)
        return gdf, SourceInfo(str(path), None, "CSV", sha, columns)
    if suffix in _PARQUET_SUFFIXES:
        return _read_parquet(path, x, y, crs, sha, thousands)

    import pyogrio

    layers = list_layers(path)
    if layer is None:
        if len(layers) > 1:
            raise InputError(
                f"{str(path)!r} holds {len(layers)} layers: {', '.join(layers)}. "
                f"Choose one with {spell('layer', 'NAME')}."
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
        gdf, columns = points_from_columns(plain, x, y, crs, f"{path}:{layer}", thousands)
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
        gdf, columns = points_from_columns(plain, x, y, crs, str(path), thousands)
        return gdf, SourceInfo(str(path), None, "Parquet", sha, columns)
    except Exception as exc:
        raise _read_problem(path, "the GeoParquet table", exc) from exc
    return gdf, SourceInfo(str(path), None, "GeoParquet", sha)


def _all_missing_geometry(frame) -> bool:
    return isinstance(frame, gpd.GeoDataFrame) and len(frame) > 0 and frame.geometry.isna().all() and frame.crs is None


def _atomic_target(out_path: Path, overwrite: bool, protect: tuple[str, ...]) -> Path:
    out_path = Path(out_path)
    if out_path.suffix.lower() != ".gpkg":
        raise OutputError(f"Output {str(out_path)!r} must be a GeoPackage file ending in .gpkg.")
    check_output_paths([("Output", out_path)], protect)
    if out_path.exists() and not overwrite:
        raise OutputError(f"Output {str(out_path)!r} exists. Pass {spell('overwrite', True)} to replace it, or choose another path.")
    if not out_path.parent.exists():
        raise OutputError(f"Folder {str(out_path.parent)!r} does not exist. Create it first or choose another output path.")
    return out_path


#: Suffix of the temporary files written beside an output: no input format has it,
#: so no folder scan or glob of inputs ever takes one.
PARTIAL_SUFFIX = ".pointsift-partial"
#: Files SQLite (GeoPackage) may leave beside a database being written.
_SIDE_FILES = ("-journal", "-wal", "-shm")

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
        if process_alive(pid):
            continue
        try:
            item.unlink()
            removed.append(name)
        except OSError:
            pass
    return removed




def _temporary_beside(out_path: Path) -> str:
    handle, temporary = tempfile.mkstemp(prefix=f".{out_path.name}.{os.getpid()}.", suffix=PARTIAL_SUFFIX, dir=out_path.parent)
    os.close(handle)
    os.unlink(temporary)
    return temporary


def _write_problem(out_path: Path, exc: BaseException) -> OutputError | None:
    """The output-problem error for a full disk, an I/O error or a refused write, else None."""
    text = str(exc)
    if isinstance(exc, OSError) and not isinstance(exc, OutputError):
        why = exc.strerror or plain_library_text(exc)
    elif any(word in text.lower() for word in _WRITE_PROBLEMS):
        why = plain_library_text(exc)
    else:
        return None
    return OutputError(
        f"Cannot write {str(out_path)!r} ({why}). Free disk space or choose another output folder, "
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
        raise OutputError(f"Output {str(out_path)!r} exists. Pass {spell('overwrite', True)} to replace it, or choose another path.") from None
    except OSError:
        # no hard links on this file system: claim the name exclusively, then replace it
        try:
            claim = os.open(out_path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            raise OutputError(f"Output {str(out_path)!r} exists. Pass {spell('overwrite', True)} to replace it, or choose another path.") from None
        os.close(claim)
        os.replace(temporary, out_path)
        return
    os.unlink(temporary)


@contextmanager
def atomic_write(path: str | os.PathLike, *, overwrite: bool = True) -> Iterator[Path]:
    """Write a file all at once: yield a temporary path beside ``path``, then move it into place.

    Every file pointsift writes goes through here. The temporary file
    (``.<name>.<pid>.<random>.pointsift-partial``) does not exist yet when the
    block starts (writers such as GDAL create it); partial files that killed
    runs left in the folder are removed first. When the block finishes, the
    file is moved into place (:func:`os.replace`; without ``overwrite`` the
    move is exclusive, so of two runs creating the same new file the second
    fails). When the block raises (also on Ctrl-C), the temporary file and any
    SQLite side files are removed and ``path`` is left as it was; a full disk
    or a refused write becomes an :class:`~pointsift.errors.OutputError`.

    Parameters
    ----------
    path : path-like
        The file to write. Its folder must exist.
    overwrite : bool
        Replace an existing ``path``.

    Yields
    ------
    pathlib.Path
        The temporary file to write.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "note.txt"
    >>> with atomic_write(target) as part:
    ...     _ = part.write_text("whole or absent")
    >>> target.read_text()
    'whole or absent'
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    remove_stale_partials(folder)
    temporary = _temporary_beside(target)
    try:
        yield Path(temporary)
        _move_into_place(temporary, target, overwrite)
    except BaseException as exc:
        for leftover in (temporary, *(temporary + side for side in _SIDE_FILES)):
            if os.path.exists(leftover):
                os.unlink(leftover)
        problem = _write_problem(target, exc) if isinstance(exc, Exception) else None
        if problem is not None:
            raise problem from exc
        raise


def write_text(path: str | os.PathLike, text: str, *, overwrite: bool = True) -> Path:
    """Write text (UTF-8, ``\\n`` line ends) to ``path`` atomically (:func:`atomic_write`); return the path."""
    target = Path(path)
    with atomic_write(target, overwrite=overwrite) as part:
        with open(part, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
    return target


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
    descriptions = descriptions or {}
    with atomic_write(out_path, overwrite=overwrite) as temporary:
        with warnings.catch_warnings():
            # the temporary file's suffix is not .gpkg on purpose (see PARTIAL_SUFFIX)
            warnings.filterwarnings("ignore", message=".*(extension should be|non conformant file extension).*", category=RuntimeWarning)
            # measured points: GDAL records the M hint itself (the M values are written)
            warnings.filterwarnings("ignore", message=".*does contain geometries with M.*", category=RuntimeWarning)
            for name, frame in layers.items():
                _write_layer(pyogrio, str(temporary), name, frame, descriptions.get(name))
    return out_path


def _write_layer(pyogrio, temporary: str, name: str, frame: pd.DataFrame, description: str | None) -> None:
    append = os.path.exists(temporary)
    if isinstance(frame, gpd.GeoDataFrame):
        attributes = [c for c in frame.columns if c != frame.geometry.name]
        # the GeoPackage's own key and geometry columns must not take an input
        # column's name: GDAL would swallow a "FID" column as the feature id
        options = {"FID": free_name("fid", attributes), "GEOMETRY_NAME": free_name("geom", attributes)}
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
        options = {"FID": free_name("fid", table.columns)}
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
