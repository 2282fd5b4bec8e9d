"""The batch index: one row per unit, as ``batch-index.csv`` and ``batch-index.gpkg``."""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

from ..io import atomic_write, write_geopackage
from ..vocabulary import STATUSES
from .outcomes import UnitOutcome

__all__ = ["INDEX_COLUMNS", "INDEX_STEM", "INDEX_LAYER", "index_frame", "write_index"]

#: Columns of the batch index, in order (the GeoPackage layer adds ``geometry``).
INDEX_COLUMNS = (
    "unit",
    "input",
    "layer",
    "group_by",
    "group",
    "outcome",
    "message",
    "points",
    *STATUSES,
    "seconds",
    "output",
    "report",
    "input_sha256",
    "fingerprint",
    "input_crs",
)

INDEX_STEM = "batch-index"
INDEX_LAYER = "batch_index"


def index_frame(outcomes: Sequence[UnitOutcome]):
    """The batch index as a GeoDataFrame (extent polygons in EPSG:4326).

    Parameters
    ----------
    outcomes : sequence of UnitOutcome

    Returns
    -------
    geopandas.GeoDataFrame
        Columns :data:`INDEX_COLUMNS` plus ``geometry``: each unit's extent
        as a polygon in longitude/latitude (empty when unknown, e.g. failed).
    """
    import geopandas as gpd
    import pandas as pd
    from shapely.geometry import box

    rows = []
    geometries = []
    for item in outcomes:
        unit = item.unit
        rows.append(
            {
                "unit": unit.name,
                "input": unit.display,
                "layer": unit.layer or "",
                "group_by": unit.by or "",
                "group": (unit.group if unit.group is not None else ("(missing)" if unit.by else "")),
                "outcome": item.outcome,
                "message": item.message,
                "points": item.points,
                **{status: item.counts.get(status) if item.counts else None for status in STATUSES},
                "seconds": round(item.seconds, 3),
                "output": item.output,
                "report": item.report,
                "input_sha256": item.input_sha256,
                "fingerprint": item.fingerprint,
                "input_crs": item.input_crs,
            }
        )
        geometries.append(box(*item.extent_lonlat) if item.extent_lonlat else None)
    frame = pd.DataFrame(rows, columns=list(INDEX_COLUMNS))
    for column in ("points", *STATUSES):
        frame[column] = frame[column].astype("Int64")
    return gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(geometries, crs="EPSG:4326"))


def write_index(outcomes: Sequence[UnitOutcome], out_dir: str | os.PathLike) -> tuple[Path, Path]:
    """Write ``batch-index.csv`` and ``batch-index.gpkg`` (layer ``batch_index``) atomically.

    Parameters
    ----------
    outcomes : sequence of UnitOutcome
    out_dir : path

    Returns
    -------
    (Path, Path)
        The CSV and the GeoPackage.
    """
    out = Path(out_dir)
    frame = index_frame(outcomes)
    csv_path = out / f"{INDEX_STEM}.csv"
    gpkg_path = out / f"{INDEX_STEM}.gpkg"
    with atomic_write(csv_path) as part:
        frame.drop(columns=frame.geometry.name).to_csv(part, index=False, lineterminator="\n")
    from ..pipeline import CAUTION

    # the caution travels with the index (gpkg_contents.description)
    write_geopackage(gpkg_path, {INDEX_LAYER: frame}, overwrite=True, descriptions={INDEX_LAYER: CAUTION})
    return csv_path, gpkg_path
