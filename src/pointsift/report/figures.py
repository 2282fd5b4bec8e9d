"""Figures of the screening report: status map, residual map, neighbour-mean scatter.

Every function takes arrays (work-CRS metres, values, statuses) and returns a
:class:`matplotlib.figure.Figure`; matplotlib is imported inside the
functions, with the Agg backend, so importing this module stays cheap.
:func:`figure_data_uri` turns a figure into an inline PNG for the HTML page.

The palette is ours, taken from the Okabe-Ito colour-blind-safe set (Okabe,
M. and Ito, K. (2008), *Color Universal Design*), and each status also has its
own marker shape, so the map reads in grey print and for colour-blind readers.
"""

from __future__ import annotations

import base64
import io
import math

import numpy as np

__all__ = [
    "STATUS_STYLE",
    "STATUS_ORDER",
    "figure_data_uri",
    "figure_png_bytes",
    "marker_svg",
    "nice_length",
    "grid_north_offset",
    "new_figure",
    "plot_status_map",
    "plot_residual_map",
    "plot_neighbour_scatter",
]

#: Drawing order (bottom to top) of the statuses on maps.
STATUS_ORDER = ("ok", "unscreened", "review", "suspect")

#: Colour, matplotlib marker, marker area (points^2) and edge colour per status.
STATUS_STYLE = {
    "suspect": {"colour": "#D55E00", "marker": "D", "size": 48.0, "edge": "#1a1a1a", "word": "suspect"},
    "review": {"colour": "#E69F00", "marker": "^", "size": 40.0, "edge": "#1a1a1a", "word": "review"},
    "ok": {"colour": "#0072B2", "marker": "o", "size": 9.0, "edge": "none", "word": "ok"},
    "unscreened": {"colour": "#7f7f7f", "marker": "x", "size": 22.0, "edge": "#7f7f7f", "word": "unscreened"},
}

#: Resolution of the inline PNGs (dots per inch).
DPI = 150
#: Width of every report figure (inches). With 9-10 point text, a figure shrunk to a 390 px phone keeps
#: its letters about 9-10 CSS pixels high; wider figures would shrink them below reading size.
WIDTH = 5.2


def new_figure(width: float, height: float):
    """A matplotlib figure (Agg, constrained layout) of ``width`` x ``height`` inches."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)  # a real canvas: label placement measures text as drawn
    return fig




def figure_png_bytes(fig, dpi: int = DPI) -> bytes:
    """The figure as a 256-colour PNG (white background, ``dpi`` dots per inch).

    Charts use few colours, so a palette image keeps every line and letter
    while taking a third to a fifth of the bytes of a full-colour one (the
    report stays small enough to mail).
    """
    from PIL import Image

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, facecolor="white")
    image = Image.open(io.BytesIO(buffer.getvalue())).convert("RGB")
    small = image.quantize(colors=256, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE)
    out = io.BytesIO()
    small.save(out, format="PNG", optimize=True, dpi=(dpi, dpi))
    return out.getvalue()


def figure_data_uri(fig, dpi: int = DPI) -> str:
    """The figure as a ``data:image/png;base64,...`` URI for an inline ``<img>``."""
    return "data:image/png;base64," + base64.b64encode(figure_png_bytes(fig, dpi)).decode("ascii")


def marker_svg(status: str, size: int = 16) -> str:
    """A small inline SVG of the map marker of ``status`` (for legends and tables)."""
    style = STATUS_STYLE[status]
    c, e = style["colour"], style["edge"] if style["edge"] != "none" else style["colour"]
    h = size / 2.0
    r = size * 0.36
    if style["marker"] == "D":
        shape = f'<polygon points="{h},{h - r * 1.2} {h + r},{h} {h},{h + r * 1.2} {h - r},{h}" fill="{c}" stroke="{e}" stroke-width="1"/>'
    elif style["marker"] == "^":
        shape = (f'<polygon points="{h},{h - r * 1.1} {h + r * 1.1},{h + r * 0.85} {h - r * 1.1},{h + r * 0.85}" '
                 f'fill="{c}" stroke="{e}" stroke-width="1"/>')
    elif style["marker"] == "o":
        shape = f'<circle cx="{h}" cy="{h}" r="{r * 0.8}" fill="{c}"/>'
    else:
        d = r * 0.8
        shape = (f'<path d="M{h - d},{h - d} L{h + d},{h + d} M{h - d},{h + d} L{h + d},{h - d}" '
                 f'stroke="{c}" stroke-width="2" fill="none"/>')
    return (f'<svg class="marker" width="{size}" height="{size}" '
            f'viewBox="0 0 {size} {size}" role="img" aria-label="{style["word"]} marker">{shape}</svg>')


def nice_length(span: float, fraction: float = 0.2) -> float:
    """A round length (1, 2 or 5 times a power of ten) near ``fraction`` of ``span``.

    >>> nice_length(7300.0)
    1000.0
    """
    target = span * fraction
    if not (math.isfinite(target) and target > 0):
        return 1.0
    power = 10.0 ** math.floor(math.log10(target))
    for step in (5.0, 2.0, 1.0):
        if step * power <= target:
            return step * power
    return power


def _length_words(metres: float) -> str:
    from .numbers import format_length

    return format_length(metres)


def grid_north_offset(work_crs, x: float, y: float) -> float | None:
    """Angle (degrees) between grid north of ``work_crs`` and true north at ``(x, y)``.

    The meridian convergence from :meth:`pyproj.Proj.get_factors`; None when
    the CRS or the point does not allow it.
    """
    try:
        from pyproj import CRS, Proj, Transformer

        crs = CRS.from_user_input(work_crs)
        lon, lat = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True).transform(x, y)
        factors = Proj(crs).get_factors(lon, lat)
        value = float(factors.meridian_convergence)
        return value if math.isfinite(value) else None
    except Exception:  # a CRS PROJ cannot give factors for: say nothing rather than fail the report
        return None


def _map_size(xy_km: np.ndarray, width: float, extra: float) -> tuple[float, float]:
    """Figure size whose height follows the extent of the points (less white space around the map)."""
    finite = xy_km[np.isfinite(xy_km).all(axis=1)]
    if finite.shape[0] < 2:
        return width, width * 0.8
    span = finite.max(axis=0) - finite.min(axis=0)
    ratio = float(span[1] / span[0]) if span[0] > 0 else 1.0
    plot_width = width - extra
    return width, float(np.clip(plot_width * min(max(ratio, 0.3), 2.0) * 1.08 + 1.3, 4.0, 11.0))


def _decorate_map(ax, xy_km: np.ndarray, crs_label: str, north_note: str) -> None:
    from matplotlib.patches import Rectangle

    ax.set_aspect("equal", adjustable="box")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.set_xlabel(f"easting (km), {crs_label}")
    ax.set_ylabel(f"northing (km), {crs_label}")
    ax.grid(True, color="#e6e6e6", lw=0.6, zorder=0)
    ax.set_facecolor("#fbfbf8")
    finite = xy_km[np.isfinite(xy_km).all(axis=1)]
    if finite.size == 0:
        return
    lo, hi = finite.min(axis=0), finite.max(axis=0)
    span = max(float(hi[0] - lo[0]), float(hi[1] - lo[1]), 1e-3)
    pad = 0.06 * span
    ax.set_xlim(lo[0] - pad, hi[0] + pad)
    ax.set_ylim(lo[1] - pad * 2.2, hi[1] + pad)
    # scale bar: two-tone bar in data units, placed at the lower left
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    bar_km = nice_length((x1 - x0) * 1000.0, 0.22) / 1000.0
    bx, by = x0 + 0.04 * (x1 - x0), y0 + 0.045 * (y1 - y0)
    height = 0.012 * (y1 - y0)
    for i in range(4):
        ax.add_patch(Rectangle((bx + i * bar_km / 4, by), bar_km / 4, height, facecolor="#1a1a1a" if i % 2 == 0 else "white",
                               edgecolor="#1a1a1a", lw=0.8, zorder=6))
    ax.text(bx, by + 1.8 * height, "0", ha="center", va="bottom", fontsize=8, zorder=6)
    ax.text(bx + bar_km, by + 1.8 * height, _length_words(bar_km * 1000.0), ha="center", va="bottom", fontsize=8, zorder=6)
    # north arrow (grid north of the work CRS) at the upper right
    ax.annotate("", xy=(0.95, 0.96), xytext=(0.95, 0.84), xycoords="axes fraction",
                arrowprops={"arrowstyle": "-|>,head_width=0.45,head_length=0.9", "color": "#1a1a1a", "lw": 1.6}, zorder=7)
    ax.text(0.95, 0.82, "N", transform=ax.transAxes, ha="center", va="top", fontsize=11, fontweight="bold", zorder=7)
    if north_note:
        ax.text(0.99, 0.005, north_note, transform=ax.transAxes, ha="right", va="bottom", fontsize=8, color="#444444")


def _north_note(north_offset: float | None) -> str:
    if north_offset is None:
        return "arrow: grid north"
    return f"arrow: grid north; true north differs by {abs(north_offset):.2f}\N{DEGREE SIGN} here"


#: Parts of a map (axes fractions) that hold the scale bar, the north note and the north arrow.
_MAP_FURNITURE = ((0.0, 0.0, 0.36, 0.11), (0.4, 0.0, 1.0, 0.05), (0.9, 0.78, 1.0, 1.0))

_SHADE = ("#f6f6ef", "#d9e2cf", "#a9c1a1", "#6f9477", "#3f6650")
#: Points the value shading is interpolated between, at most (seeded sample beyond).
SHADE_POINTS = 20_000


def _shade_values(ax, fig, km: np.ndarray, values: np.ndarray, status, value_label: str, seed: int = 0) -> dict:
    """Values as light filled contours behind the markers (linear between points), with a colour bar.

    Suspect values are left out (they are probably wrong) and the colour
    range spans the 2nd to 98th percentile, so one wild value cannot wash
    the map out. Triangles much longer than the usual spacing (across a gap
    in the network) are not shaded.
    """
    from matplotlib.colors import LinearSegmentedColormap
    from matplotlib.tri import Triangulation

    keep = np.isfinite(values) & np.isfinite(km).all(axis=1)
    if status is not None:
        keep &= np.isin(status, ("ok", "review"))
    rows = np.flatnonzero(keep)
    record = {"shading": False, "shading_points": int(rows.size), "shading_sample_seed": None}
    if rows.size > SHADE_POINTS:
        rows = np.sort(np.random.default_rng(seed).choice(rows, SHADE_POINTS, replace=False))
        record["shading_sample_seed"] = int(seed)
    distinct = np.unique(km[rows], axis=0, return_index=True)[1]
    rows = rows[np.sort(distinct)]
    if rows.size < 4:
        return record
    try:
        tri = Triangulation(km[rows, 0], km[rows, 1])
    except (RuntimeError, ValueError):  # collinear points: no surface to shade
        return record
    edges = np.hypot(*(km[rows][tri.triangles] - km[rows][np.roll(tri.triangles, 1, axis=1)]).transpose(2, 0, 1))
    longest = edges.max(axis=1)
    tri.set_mask(longest > 3.0 * np.median(longest))
    lo, hi = np.percentile(values[rows], [2, 98])
    if not hi > lo:
        return record
    levels = np.linspace(lo, hi, 9)
    cmap = LinearSegmentedColormap.from_list("levels", _SHADE)
    art = ax.tricontourf(tri, np.clip(values[rows], lo, hi), levels=levels, cmap=cmap, zorder=1, extend="neither")
    bar = fig.colorbar(art, ax=ax, shrink=0.75, pad=0.01, aspect=30)
    bar.set_label(f"{value_label} (units of the data), shading", fontsize=9)
    bar.ax.tick_params(labelsize=8)
    from .numbers import format_number

    bar.set_ticks(levels[::2], labels=[format_number(float(v)) for v in levels[::2]])
    record.update(shading=True, shading_range=[float(lo), float(hi)])
    return record


def plot_status_map(map_data, *, crs_label: str, value_label: str = "value", north_offset: float | None = None,
                    max_points: int = 50_000, max_labels: int = 80, seed: int = 0):
    """Map of the values (light shading) with the points on top by status, suspects labelled by id.

    Parameters
    ----------
    map_data : pointsift.findings.MapData
        Work-CRS coordinates in metres, values, ids, and (after a screen)
        status and score; without a status every usable point is a dot.
    crs_label : str
        Name of the work CRS for the axis labels.
    value_label : str
        The value column (colour bar title).
    north_offset : float, optional
        Meridian convergence at the centre (degrees), stated under the map.
    max_points : int
        ``ok`` and ``unscreened`` points beyond this many are shown as
        density shading (hexagonal bins) instead of single markers; flagged
        points are always drawn one by one.
    max_labels : int
        Most suspects labelled by id (strongest first); labels never overlap
        each other where a free place exists (:func:`pointsift.report.labels.place_labels`).
        Every other suspect (up to :data:`MAP_NUMBERED`) carries its number,
        listed in the record's ``key``.

    Returns
    -------
    (matplotlib.figure.Figure, dict)
        The figure and a record of what was drawn: ``drawn`` per status,
        ``shaded`` (rows shown as density), ``labelled`` (by id),
        ``numbered`` and ``key`` (suspects shown by number), the shading.
    """
    xy = np.asarray(map_data.xy, dtype=float)
    n = xy.shape[0]
    values = np.asarray(map_data.values, dtype=float)
    screened = map_data.status is not None
    status = (np.asarray(map_data.status, dtype=object) if screened
              else np.where(np.isfinite(values), "ok", "unscreened").astype(object))
    score = np.asarray(map_data.score, dtype=float) if map_data.score is not None else np.full(n, np.nan)
    words = None if screened else {"ok": "has a value", "unscreened": "no usable value"}
    ids = np.asarray(map_data.ids, dtype=object)
    km = xy / 1000.0
    located = np.isfinite(km).all(axis=1)
    fig = new_figure(*_map_size(km, WIDTH, 1.1))
    ax = fig.add_subplot()
    record = {"drawn": {}, "shaded": {}, "labelled": 0, "max_points": int(max_points), "unlocated": int((~located).sum())}
    record.update(_shade_values(ax, fig, km, values, map_data.status, value_label, seed))
    # many flagged points: smaller markers, so the map is not one carpet of diamonds
    flagged_n = int(np.isin(status, ("suspect", "review")).sum())
    shrink = float(np.clip(np.sqrt(150.0 / flagged_n), 0.3, 1.0)) if flagged_n else 1.0
    for name in STATUS_ORDER:
        style = STATUS_STYLE[name]
        rows = np.flatnonzero((status == name) & located)
        record["drawn"][name] = 0
        if rows.size == 0:
            continue
        count_label = f"{(words or {}).get(name, style['word'])} ({rows.size:,})"
        if name in ("ok", "unscreened") and rows.size > max_points:
            from matplotlib.colors import LinearSegmentedColormap

            light = LinearSegmentedColormap.from_list(name, ["#f2f6fa", style["colour"]])
            cells = int(np.clip(np.sqrt(rows.size / 12.0), 30, 90))
            ax.hexbin(km[rows, 0], km[rows, 1], gridsize=cells, mincnt=1, cmap=light, linewidths=0, alpha=0.45, zorder=2)
            ax.scatter([], [], marker="h", c=style["colour"], alpha=0.45, s=60, label=f"{count_label}, as density")
            record["shaded"][name] = int(rows.size)
            continue
        edge = style["edge"]
        kwargs = ({"edgecolors": edge, "linewidths": 0.6} if edge != "none" and style["marker"] != "x"
                  else {"linewidths": 1.0 if style["marker"] == "x" else 0})
        ax.scatter(km[rows, 0], km[rows, 1], marker=style["marker"], c=style["colour"],
                   s=style["size"] * (0.6 if name == "ok" else shrink if name in ("suspect", "review") else 1.0),
                   alpha=0.7 if name == "ok" else 1.0, label=count_label,
                   zorder={"ok": 3, "unscreened": 4, "review": 5, "suspect": 6}[name], **kwargs)
        record["drawn"][name] = int(rows.size)
    _decorate_map(ax, km, crs_label, _north_note(north_offset))
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.005), ncols=2 if screened else 2, fontsize=9,
                  frameon=False, borderaxespad=0.2, handletextpad=0.3, columnspacing=1.2)
    fig.suptitle("Values shaded, points by screening status" if screened else "Values shaded (described, not screened)",
                 fontsize=11)
    suspects = np.flatnonzero((status == "suspect") & located)
    if suspects.size and screened:
        record.update(_label_suspects(ax, km, status, score, ids, suspects, shrink, max_labels))
    return fig, record


#: Most suspects numbered on the map (each number in the key below it); beyond, placing labels
#: costs more than the map gains (at 390 px the numbers would be one carpet anyway).
MAP_NUMBERED = 1000


def _label_suspects(ax, km, status, score, ids, suspects, shrink: float, max_labels: int) -> dict:
    """Label suspects, strongest first: by id where it fits (up to ``max_labels``), else by their number.

    Numbers index the key the report prints under the map (``key``: number,
    row, id), so every suspect is identifiable up to :data:`MAP_NUMBERED`.
    """
    from .labels import place_labels

    order = suspects[np.lexsort((suspects, -np.nan_to_num(score[suspects], nan=-np.inf)))]
    numbered = order[:MAP_NUMBERED]
    review = np.flatnonzero((status == "review") & np.isfinite(km).all(axis=1))
    placed = place_labels(ax, km[numbered], [str(ids[r]) for r in numbered],
                          obstacles_xy=km[np.concatenate([suspects, review])], marker_px=7.0 * math.sqrt(shrink),
                          limit=max_labels, reserved=_MAP_FURNITURE,
                          fallbacks=[str(i + 1) for i in range(numbered.size)])
    key = [{"number": i + 1, "row": int(row), "id": str(ids[row])}
           for i, (row, kind) in enumerate(zip(numbered, placed["kinds"])) if kind == "fallback"]
    return {"labelled": placed["labelled"], "numbered": placed["by_fallback"], "labels_with_leader": placed["with_leader"],
            "labels_overlapping": placed["overlapping"], "labels_left_out": placed["left_out"],
            "not_numbered": int(order.size - numbered.size), "key": key}


def plot_residual_map(
    xy,
    residual_z,
    status,
    *,
    crs_label: str,
    limit: float = 4.0,
    north_offset: float | None = None,
    max_points: int = 50_000,
    seed: int = 0,
):
    """Map of the standardized local residuals (diverging, colour-blind-safe PuOr).

    Points beyond ``max_points`` are drawn from a seeded sample that always
    keeps the flagged points; the record says how many were drawn.

    Returns
    -------
    (matplotlib.figure.Figure, dict)
    """
    from matplotlib.colors import TwoSlopeNorm

    xy = np.asarray(xy, dtype=float)
    z = np.asarray(residual_z, dtype=float)
    status = np.asarray(status, dtype=object)
    km = xy / 1000.0
    judged = np.isfinite(z) & np.isfinite(km).all(axis=1)
    rows = np.flatnonzero(judged)
    record = {"points": int(rows.size), "drawn": int(rows.size), "sample_seed": None}
    if rows.size > max_points:
        flagged = rows[np.isin(status[rows], ("suspect", "review"))]
        others = rows[~np.isin(status[rows], ("suspect", "review"))]
        keep = max(max_points - flagged.size, 0)
        picked = np.random.default_rng(seed).choice(others, size=min(keep, others.size), replace=False)
        rows = np.sort(np.concatenate([flagged, picked]))
        record.update(drawn=int(rows.size), sample_seed=int(seed))
    order = rows[np.argsort(np.abs(z[rows]), kind="stable")]  # strongest drawn last, on top
    fig = new_figure(*_map_size(km, WIDTH, 1.3))
    ax = fig.add_subplot()
    lim = max(float(limit), 1.0)
    size = 6.0 + 10.0 * np.clip(np.abs(z[order]), 0, lim)
    art = ax.scatter(km[order, 0], km[order, 1], c=np.clip(z[order], -lim, lim), cmap="PuOr_r",
                     norm=TwoSlopeNorm(vcenter=0.0, vmin=-lim, vmax=lim), s=size, edgecolors="#333333",
                     linewidths=0.15, zorder=3)
    bar = fig.colorbar(art, ax=ax, shrink=0.8, extend="both")
    bar.set_label("local residual (robust sd)", fontsize=9)
    unjudged = np.flatnonzero(~np.isfinite(z) & np.isfinite(km).all(axis=1))
    if unjudged.size:
        shown = unjudged if unjudged.size <= max_points else np.sort(
            np.random.default_rng(seed).choice(unjudged, size=max_points, replace=False))
        ax.scatter(km[shown, 0], km[shown, 1], marker="x", c="#7f7f7f", s=14, linewidths=0.8, zorder=2,
                   label=f"not judged ({unjudged.size:,})")
        ax.legend(loc="upper left", fontsize=8)
    _decorate_map(ax, km, crs_label, _north_note(north_offset))
    title = "Local residuals: orange above,\npurple below the neighbours' prediction"
    if record["sample_seed"] is not None:
        title += f"\n{record['drawn']:,} of {record['points']:,} points drawn (seeded sample, every flagged point kept)"
    ax.set_title(title, fontsize=10)
    return fig, record


def plot_neighbour_scatter(z, lag, status, *, quadrant_counts: dict, slope: float, max_points: int = 50_000, seed: int = 0):
    """Scatter of each standardized value against the mean of its neighbours, with quadrant counts.

    Returns
    -------
    (matplotlib.figure.Figure, dict)
    """
    z = np.asarray(z, dtype=float)
    lag = np.asarray(lag, dtype=float)
    status = np.asarray(status, dtype=object)
    rows = np.flatnonzero(np.isfinite(z) & np.isfinite(lag))
    record = {"points": int(rows.size), "drawn": int(rows.size), "sample_seed": None}
    if rows.size > max_points:
        flagged = rows[np.isin(status[rows], ("suspect", "review"))]
        others = rows[~np.isin(status[rows], ("suspect", "review"))]
        picked = np.random.default_rng(seed).choice(others, size=max(0, min(max_points - flagged.size, others.size)), replace=False)
        rows = np.sort(np.concatenate([flagged, picked]))
        record.update(drawn=int(rows.size), sample_seed=int(seed))
    fig = new_figure(WIDTH, 5.8)
    ax = fig.add_subplot()
    ax.axhline(0, color="#555555", lw=0.8, zorder=1)
    ax.axvline(0, color="#555555", lw=0.8, zorder=1)
    # A few wild values inflate the sd and would squeeze every other point into
    # a line: the frame spans the bulk (99.5 % of |z| and of |lag|, with a
    # margin) and points beyond it are drawn hollow on its edge, and counted.
    zx, zy = z[rows], lag[rows]
    limit_x = limit_y = 1.0
    if rows.size:
        qx, qy = float(np.quantile(np.abs(zx), 0.995)), float(np.quantile(np.abs(zy), 0.995))
        limit_x = qx * 1.25 if qx > 0 else 1.0
        limit_y = qy * 1.25 if qy > 0 else 1.0
    beyond = (np.abs(zx) > limit_x) | (np.abs(zy) > limit_y)
    px, py = np.clip(zx, -limit_x, limit_x), np.clip(zy, -limit_y, limit_y)
    record["beyond_frame"] = int(beyond.sum())
    for name in STATUS_ORDER:
        style = STATUS_STYLE[name]
        part = status[rows] == name
        if not part.any():
            continue
        kwargs = {"edgecolors": style["edge"], "linewidths": 0.6} if style["edge"] != "none" and style["marker"] != "x" else {"linewidths": 0}
        inside = part & ~beyond
        ax.scatter(px[inside], py[inside], marker=style["marker"], c=style["colour"], s=max(style["size"] * 0.8, 8),
                   alpha=0.6 if name == "ok" else 1.0, label=f"{style['word']} ({int(part.sum()):,})", zorder=3, **kwargs)
        outside = part & beyond
        if outside.any():
            ax.scatter(px[outside], py[outside], marker=style["marker"], facecolors="none",
                       edgecolors=style["colour"], s=max(style["size"] * 1.2, 24), linewidths=1.4, zorder=4)
    if record["beyond_frame"]:
        ax.scatter([], [], marker="o", facecolors="none", edgecolors="#444444", s=24,
                   label=f"beyond the frame, drawn on its edge ({record['beyond_frame']:,})")
    if math.isfinite(slope):
        span = np.array([-limit_x, limit_x])
        ax.plot(span, np.clip(slope * span, -limit_y, limit_y), color="#1a1a1a", lw=1.0, ls="--",
                label=f"slope {slope:.3f}", zorder=4)
    ax.set_xlim(-limit_x * 1.04, limit_x * 1.04)
    ax.set_ylim(-limit_y * 1.04, limit_y * 1.04)
    corners = {
        "high among high": (0.98, 0.98, "right", "top"),
        "low among high": (0.02, 0.98, "left", "top"),
        "low among low": (0.02, 0.02, "left", "bottom"),
        "high among low": (0.98, 0.02, "right", "bottom"),
    }
    for word, (x, y, ha, va) in corners.items():
        ax.text(x, y, f"{word}\n{quadrant_counts.get(word, 0):,} points", transform=ax.transAxes, ha=ha, va=va,
                fontsize=8.5, bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": "#bbbbbb", "alpha": 0.9}, zorder=5)
    ax.set_xlabel("value, standardized (sd from the mean; regional trend removed)")
    ax.set_ylabel("mean of the neighbours' standardized values (sd)")
    title = "Each value against the mean of its neighbours"
    if record["sample_seed"] is not None:
        title += f"\n{record['drawn']:,} of {record['points']:,} points drawn (seeded sample, every flagged point kept)"
    ax.set_title(title, fontsize=10)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncols=2, fontsize=8, framealpha=0.9)
    ax.grid(True, color="#eeeeee", lw=0.6, zorder=0)
    return fig, record
