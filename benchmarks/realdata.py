"""Load the real development data (the shared DWR Sacramento extract) as fall campaigns.

Reads ``<repo>/../shared/data/dwr-sacramento`` (or ``$POINTSIFT_SHARED_DATA``
/ ``dwr-sacramento``); never copied into the repository. One reading per well
per campaign: of the readings taken September to November of the year, the
one closest to 15 October (ties: the earlier one).
"""

from __future__ import annotations

import os
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

__all__ = ["data_dir", "fall_campaign", "PUMPING_CODES", "CAMPAIGN_YEARS"]

#: Publisher's quality codes for readings taken while pumping or just after.
PUMPING_CODES = ("Pumping", "Pumped recently", "Nearby pump operating")
#: Codes that mark a flowing well (level at or above land surface is expected).
FLOWING_CODES = ("Flowing", "Nearby flowing", "Flowing artesian well", "Recently flowing")
CAMPAIGN_YEARS = tuple(range(2012, 2020))


def data_dir() -> Path | None:
    """The shared data folder, or None when it is absent."""
    env = os.environ.get("POINTSIFT_SHARED_DATA")
    candidates = []
    if env:
        candidates += [Path(env) / "dwr-sacramento", Path(env)]
    candidates.append(Path(__file__).resolve().parents[1] / ".." / "shared" / "data" / "dwr-sacramento")
    # a worktree under /work/wt/NAME sits two levels below /work
    candidates.append(Path(__file__).resolve().parents[3] / "shared" / "data" / "dwr-sacramento")
    for path in candidates:
        if (path / "measurements.csv.gz").is_file() and (path / "stations.csv").is_file():
            return path.resolve()
    return None


_CACHE: dict = {}


def _tables(folder: Path):
    if folder not in _CACHE:
        m = pd.read_csv(folder / "measurements.csv.gz", low_memory=False)
        s = pd.read_csv(folder / "stations.csv")
        m["date"] = pd.to_datetime(m["MSMT_DATE"], utc=True)
        _CACHE[folder] = (m, s)
    return _CACHE[folder]


def fall_campaign(year: int, folder: Path | None = None) -> gpd.GeoDataFrame:
    """One fall campaign as a point layer (EPSG:4269, feet NAVD88).

    Columns: ``STN_ID``, ``SITE_CODE``, ``site`` (the site code without its
    completion suffix), ``WSE`` (level), ``WLM_GSE`` (ground), ``GSE_WSE``
    (depth to water), ``WELL_DEPTH``, ``WELL_TYPE``, ``WLM_QA_DESC``,
    ``pumping`` (bool), ``uncoded`` (bool), ``flowing`` (bool).
    """
    folder = folder or data_dir()
    if folder is None:
        raise FileNotFoundError("the shared DWR data is absent")
    m, s = _tables(folder)
    f = m[(m["date"].dt.year == year) & m["date"].dt.month.isin([9, 10, 11])].copy()
    target = pd.Timestamp(f"{year}-10-15", tz="UTC")
    f["gap"] = (f["date"] - target).abs()
    f = f.sort_values(["STN_ID", "gap", "date"]).drop_duplicates("STN_ID")
    f = f.merge(s[["STN_ID", "LATITUDE", "LONGITUDE", "WELL_DEPTH", "WELL_TYPE"]], on="STN_ID", how="left")
    f["site"] = f["SITE_CODE"].str[:-3]
    qa = f["WLM_QA_DESC"]
    f["pumping"] = qa.isin(PUMPING_CODES)
    f["uncoded"] = qa.isna()
    f["flowing"] = qa.isin(FLOWING_CODES)
    f = f.sort_values("STN_ID").reset_index(drop=True)
    keep = ["STN_ID", "SITE_CODE", "site", "MSMT_DATE", "WSE", "WLM_GSE", "GSE_WSE", "WELL_DEPTH", "WELL_TYPE",
            "WLM_QA_DESC", "pumping", "uncoded", "flowing"]
    out = f[keep].copy()
    out["STN_ID"] = out["STN_ID"].astype(str)
    return gpd.GeoDataFrame(out, geometry=gpd.points_from_xy(f["LONGITUDE"], f["LATITUDE"]), crs="EPSG:4269")
