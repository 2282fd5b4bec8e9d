"""The run record: what every command writes about how its output was made.

One builder (:func:`run_record`) gives the common part of ``run_info`` for
``screen``, ``describe`` and each batch unit: when, which input (path, layer,
format, SHA-256), which columns and CRSs, the options, the library versions
and the caution. Each command adds its own sections (graph, trend, variogram,
counts, timings) to the dict it returns.
"""

from __future__ import annotations

import functools
import platform
from datetime import datetime, timezone

from ._version import __version__

__all__ = ["CAUTION", "library_versions", "run_record", "created_now"]

#: The caution carried by every output (README, report, run_info).
CAUTION = (
    "Screening flags are aids for checking data, not determinations that a value is wrong or right. "
    "Check field records and the well's history before correcting or discarding anything, and follow "
    "local regulations and licensed professional practice for decisions about water supply."
)

_LIBRARIES = ("numpy", "scipy", "pandas", "geopandas", "shapely", "pyproj", "pyogrio", "pyarrow")


def library_versions() -> dict:
    """Versions of pointsift, Python, the libraries it stands on and GDAL.

    Read from installed metadata once per process, without importing the
    libraries.

    Returns
    -------
    dict of str to str
        A fresh copy; ``"not installed"`` for a library that is absent.
    """
    return dict(_installed_versions())


@functools.lru_cache(maxsize=1)
def _installed_versions() -> dict:
    from importlib.metadata import PackageNotFoundError, version

    import pyogrio

    versions = {"pointsift": __version__, "python": platform.python_version()}
    for name in _LIBRARIES:
        try:
            versions[name] = version(name)
        except PackageNotFoundError:
            versions[name] = "not installed"
    versions["gdal"] = pyogrio.__gdal_version_string__
    return versions


def created_now() -> str:
    """The current UTC time as an ISO 8601 string to the second."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def run_record(command: str, *, config, prepared, source=None, output_path=None, parameters: dict | None = None,
               **sections) -> dict:
    """The common run record of one command on one input.

    Parameters
    ----------
    command : str
        ``"screen"``, ``"describe"``, ``"campaigns"`` (a batch unit is a ``"screen"``).
    config : ScreenConfig
        The options used (value and id columns; the parameters unless ``parameters`` is given).
    prepared : Prepared
        The prepared layer (row count, CRSs, notes).
    source : SourceInfo, optional
        Where the layer was read from (None for a frame passed in Python).
    output_path : str, optional
        The output written, when known.
    parameters : dict, optional
        The options as recorded, when the command has more than a screen's
        (``campaigns``: :meth:`pointsift.campaigns.CampaignConfig.as_record`).
    **sections
        Command-specific entries (``graph=``, ``trend=``, ``variogram=``...),
        placed after the input description and before the parameters.

    Returns
    -------
    dict
        Plain values (JSON-serialisable), in a fixed key order.
    """
    record = {
        "created": created_now(),
        "command": command,
        "input_path": source.path if source else None,
        "input_layer": source.layer if source else None,
        "input_format": source.driver if source else None,
        "input_sha256": source.sha256 if source else None,
        "output_path": None if output_path is None else str(output_path),
        "rows": int(prepared.n),
        "value_column": config.value,
        "id_column": config.id,
        "input_crs": prepared.input_crs.to_string(),
        "work_crs": prepared.work_crs.to_string(),
        "work_crs_name": prepared.work_crs.name,
    }
    record.update(sections)
    record["parameters"] = config.as_record() if parameters is None else parameters
    record["notes"] = list(prepared.notes)
    record["versions"] = library_versions()
    record["caution"] = CAUTION
    return record
