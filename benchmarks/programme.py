"""An invented monitoring programme: wells measured in repeated campaigns (seeded, not a real survey).

Each well's level is a regional surface (a plane plus a smooth undulation),
a well offset, a seasonal swing (spring above fall, the size varying from
well to well), a basin-wide signal shared by every well (dry and wet years,
a slow decline), a slow local random walk, and reading noise. Readings are
rounded to 0.01 m. Dates fall in March-April (spring) and September-October
(fall). Nothing here is real data.

``make_programme(wells, campaigns, seed)`` returns a long-form GeoDataFrame
(``well_id``, ``date``, ``level_m``, point geometry in UTM 33N) in campaign
order.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd

__all__ = ["make_programme", "ORIGIN", "CRS"]

CRS = "EPSG:32633"
ORIGIN = (500_000.0, 5_300_000.0)


def make_programme(wells: int = 300, campaigns: int = 20, *, seed: int = 0, extent: float | None = None,
                   first_year: int = 2000, missing: float = 0.03) -> gpd.GeoDataFrame:
    """Long-form readings of an invented programme (see the module docstring).

    Parameters
    ----------
    wells, campaigns : int
        Size (two campaigns a year: spring then fall).
    seed : int
        Seed of every draw.
    extent : float, optional
        Side of the square in metres (default: about 700 m between wells).
    first_year : int
        Year of the first spring campaign.
    missing : float
        Share of (well, campaign) readings not taken.

    Returns
    -------
    geopandas.GeoDataFrame
    """
    rng = np.random.default_rng(seed)
    extent = extent if extent is not None else 700.0 * np.sqrt(wells)
    x, y = rng.uniform(0, extent, (2, wells))
    surface = 100.0 + 0.004 * x - 0.002 * y + 3.0 * np.sin(x / 3000.0) * np.cos(y / 4000.0)
    offset = rng.normal(0, 0.5, wells)
    swing = np.abs(rng.normal(1.0, 0.4, wells))
    t = np.arange(campaigns)
    year = first_year + t // 2
    fall = t % 2 == 1
    basin = np.cumsum(rng.normal(0, 0.6, campaigns // 2 + 1))[t // 2] - 0.05 * t
    walk = np.cumsum(rng.normal(0, 0.15, (wells, campaigns)), axis=1)
    noise = rng.normal(0, 0.1, (wells, campaigns))
    level = surface[:, None] + offset[:, None] + basin[None, :] - np.where(fall, swing[:, None], 0.0) + walk + noise
    month = np.where(fall, rng.integers(9, 11, (wells, campaigns)), rng.integers(3, 5, (wells, campaigns)))
    day = rng.integers(1, 29, (wells, campaigns))
    taken = rng.random((wells, campaigns)) >= missing
    w_idx, c_idx = np.nonzero(taken.T)  # campaign-major order
    c_idx, w_idx = w_idx, c_idx
    dates = pd.to_datetime(pd.DataFrame({"year": year[c_idx], "month": month[w_idx, c_idx], "day": day[w_idx, c_idx]}))
    return gpd.GeoDataFrame(
        {
            "well_id": np.array([f"W{i:05d}" for i in range(wells)], dtype=object)[w_idx],
            "date": dates.dt.strftime("%Y-%m-%d").to_numpy(dtype=object),
            "level_m": np.round(level[w_idx, c_idx], 2),
        },
        geometry=gpd.points_from_xy(x[w_idx] + ORIGIN[0], y[w_idx] + ORIGIN[1]),
        crs=CRS,
    )
