"""The ``wells`` and ``changes`` layers of a repeated-campaign screen (input CRS), from its per-row results."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd

from .methods.history import theil_sen
from .vocabulary import STATUSES

__all__ = ["wells_layer", "changes_layer"]


def wells_layer(frame, result_cols, well_codes, well_names, ref_row, matrix, campaigns_info, days, moved_rows, shift, status):
    """One point per well (input CRS): readings, campaigns, counts per status, latest status, Theil-Sen trend."""
    n_wells = well_names.size
    rows_all = pd.Series(np.arange(len(frame)))[well_codes >= 0]
    per_well = rows_all.groupby(well_codes[well_codes >= 0])
    readings = np.zeros(n_wells, dtype=np.int64)
    readings[per_well.size().index.to_numpy()] = per_well.size().to_numpy()
    records = []
    for w in range(n_wells):
        codes = np.flatnonzero(matrix[w] >= 0)
        rows = matrix[w, codes]
        t = days[rows] / 365.2425 + 1970.0
        if not np.isfinite(t).all():
            t = campaigns_info.decimal_year[codes]
        slope, _ = theil_sen(t, result_cols["value"][rows]) if rows.size >= 2 else (np.nan, np.nan)
        records.append({
            "campaigns": int(codes.size),
            "first_campaign": campaigns_info.labels[codes[0]] if codes.size else "",
            "last_campaign": campaigns_info.labels[codes[-1]] if codes.size else "",
            "latest_status": status[rows[-1]] if rows.size else "unscreened",
            "trend_per_year": round(float(slope), 6) if np.isfinite(slope) else np.nan,
            "readings_away_from_usual_location": int(np.isin(rows, moved_rows).sum()),
            "largest_location_shift_m": round(float(np.nanmax(shift[rows])), 2) if rows.size and np.isfinite(shift[rows]).any() else np.nan,
        })
    table = pd.DataFrame(records)
    table.insert(0, "readings", readings)
    table.insert(0, "well_id", well_names)
    counts = pd.crosstab(well_codes[well_codes >= 0], status[well_codes >= 0]).reindex(index=range(n_wells), columns=list(STATUSES), fill_value=0)
    for s in STATUSES:
        table[f"readings_{s}"] = counts[s].to_numpy()
    geometry = frame.geometry.array[np.maximum(ref_row, 0)]
    geometry = np.where(ref_row >= 0, geometry, None)
    return gpd.GeoDataFrame(table, geometry=list(geometry), crs=frame.crs)


def changes_layer(frame, records, well_names, well_codes, labels):
    """One point per well and campaign pair screened (input CRS)."""
    parts = []
    for kind, a, b, rows, out in records:
        o = out.loc[:, ["change", "expected_change", "neighbour_median_change", "neighbour_change_sd", "change_z",
                        "change_coherent", "change_neighbour_count", "change_moran_quadrant"]].reset_index(drop=True)
        o.insert(0, "to_campaign", labels[b])
        o.insert(0, "from_campaign", labels[a])
        o.insert(0, "pair", kind)
        o.insert(0, "well_id", well_names[well_codes[rows]])
        o["reading_row"] = rows + 1
        parts.append((o, rows))
    if not parts:
        empty = pd.DataFrame(columns=["well_id", "pair", "from_campaign", "to_campaign", "change", "expected_change", "change_z"])
        return gpd.GeoDataFrame(empty, geometry=gpd.GeoSeries([], crs=frame.crs), crs=frame.crs)
    table = pd.concat([p for p, _ in parts], ignore_index=True)
    rows = np.concatenate([r for _, r in parts])
    table = table.rename(columns={"change_coherent": "neighbours_changed_alike", "change_neighbour_count": "neighbour_count",
                                  "change_moran_quadrant": "local_moran_quadrant"})
    return gpd.GeoDataFrame(table, geometry=frame.geometry.array[rows], crs=frame.crs)
