"""Lag-pair screen outputs for people: the ``lag_pairs`` line layer and the pair-cloud figure.

See :mod:`pointsift.methods.lagpairs` for the screen itself.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConfigError
from ..vocabulary import direction_words
from .pairsearch import _as_xy

if TYPE_CHECKING:
    from .lagpairs import LagPairScreen

__all__ = ["lag_pairs_layer", "plot_lag_pairs"]


def lag_pairs_layer(screen: LagPairScreen, xy, crs=None, flagged_only: bool = True):
    """The ``lag_pairs`` line layer: one segment tail -> head per pair.

    Parameters
    ----------
    screen : LagPairScreen
    xy : array_like, shape (n, 2)
        The work-CRS coordinates the screen was run on.
    crs : optional
        CRS of ``xy`` (the work CRS), passed to GeoPandas.
    flagged_only : bool
        Only flagged pairs (default), or every screened pair.

    Returns
    -------
    geopandas.GeoDataFrame
        :meth:`LagPairScreen.pair_table` columns plus LineString geometry.
    """
    import geopandas as gpd
    import shapely

    xy = _as_xy(xy)
    table = screen.pair_table(flagged_only=flagged_only)
    coords = np.stack([xy[table["tail_row"].to_numpy()], xy[table["head_row"].to_numpy()]], axis=1)
    geometry = shapely.linestrings(coords) if len(table) else np.empty(0, dtype=object)
    return gpd.GeoDataFrame(table, geometry=gpd.GeoSeries(geometry, crs=crs), crs=crs)


def plot_lag_pairs(screen: LagPairScreen, direction: float, *, max_points: int = 20_000, seed: int = 0):
    """Pair clouds (tail value vs head value) of one direction, a panel per lag class.

    The 1:1 line, the robust band and the flagged pairs (red) are drawn;
    flagged pairs are always shown, other pairs are subsampled to
    ``max_points`` per panel (seeded), which the title states.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    direction = float(direction) % 180.0
    if direction not in screen.directions:
        raise ConfigError(
            f"direction {direction:g} was not screened; choose one of "
            f"{', '.join(direction_words(d, 'label') for d in screen.directions)}."
        )
    j = screen.directions.index(direction)
    n_lags = screen.lag_edges.shape[0]
    fig = Figure(figsize=(3.6 * n_lags, 3.8), layout="constrained")
    axes = fig.subplots(1, n_lags, squeeze=False)[0]
    rng = np.random.default_rng(seed)
    tail_v = screen.values[screen.pairs.tail]
    head_v = screen.values[screen.pairs.head]
    classes = screen.classes.set_index(["direction", "lag"])
    name = direction_words(direction, "abbrev")
    for k, ax in enumerate(axes):
        sel = np.flatnonzero(screen.direction_member[:, j] & (screen.lag_index == k))
        with np.errstate(invalid="ignore"):
            out = np.abs(screen.pair_z[sel, j]) > screen.threshold
        inside = sel[~out]
        note = ""
        if inside.size > max_points:
            inside = np.sort(rng.choice(inside, size=max_points, replace=False))
            note = f" ({max_points} of {int((~out).sum())} shown)"
        finite = np.concatenate([tail_v[sel], head_v[sel]])
        finite = finite[np.isfinite(finite)]
        lo = hi = None
        if finite.size:
            # Axes on the bulk of the values (quartiles +/- 3 IQR, within the data), the
            # same on both axes; a wild value would otherwise squeeze the whole cloud
            # into a corner. Points beyond are drawn on the frame as triangles.
            q1, q3 = np.percentile(finite, [25, 75])
            q_lo = max(float(finite.min()), q1 - 3 * (q3 - q1))
            q_hi = min(float(finite.max()), q3 + 3 * (q3 - q1))
            pad = 0.05 * (q_hi - q_lo) if q_hi > q_lo else max(abs(q_hi), 1.0) * 0.05
            lo, hi = float(q_lo - pad), float(q_hi + pad)
        flagged_rows = sel[out]
        for rows_, size, colour in ((inside, 6, "0.45"), (flagged_rows, 18, "tab:red")):
            tx, hy = tail_v[rows_], head_v[rows_]
            if lo is not None:
                beyond = (tx < lo) | (tx > hi) | (hy < lo) | (hy > hi)
                ax.scatter(np.clip(tx[beyond], lo, hi), np.clip(hy[beyond], lo, hi), s=size + 10, c=colour,
                           marker="^", linewidths=0)
                tx, hy = tx[~beyond], hy[~beyond]
            ax.scatter(tx, hy, s=size, c=colour, alpha=0.6 if colour != "tab:red" else 1.0, linewidths=0)
        if lo is not None:
            n_beyond = int(np.sum((tail_v[sel] < lo) | (tail_v[sel] > hi) | (head_v[sel] < lo) | (head_v[sel] > hi)))
            if n_beyond:
                note += f"\n{n_beyond} beyond the axes (triangles on the frame)"
            line = np.array([lo, hi])
            ax.plot(line, line, color="k", lw=0.8)
            row = classes.loc[(direction_words(direction, "label"), k + 1)]
            if row["screened"]:
                for sign in (-1, 1):
                    offset = row["band_centre"] + sign * screen.threshold * row["band_scale"]
                    ax.plot(line, line + offset, color="tab:blue", lw=0.8, ls="--")
            ax.set_xlim(lo, hi)
            ax.set_ylim(lo, hi)
        lo_edge, hi_edge = screen.lag_edges[k]
        ax.set_title(f"lag {k + 1}: ({lo_edge:.4g}, {hi_edge:.4g}]\n{sel.size} pairs, {int(out.sum())} flagged{note}",
                     fontsize=8)
        ax.set_xlabel("value at tail")
        if k == 0:
            ax.set_ylabel("value at head")
    scaled = screen.settings.get("distance_scale", "none") != "none"
    fig.suptitle(f"Lag pairs, {name} (tail to head azimuth {direction:g} +/- {screen.angle_tolerance:g} deg)"
                 + ("; band drawn at each class's median separation" if scaled else ""), fontsize=10)
    return fig
