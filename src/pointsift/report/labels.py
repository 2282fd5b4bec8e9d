"""Map labels that do not overlap: a greedy placement in screen space.

Labels are placed strongest first. Each tries positions around its point
(right, upper right, above, ... then the same ring farther out, joined to the
point by a thin leader line) and takes the first whose box overlaps no label
already placed, no flagged marker and stays inside the map frame; when every
position collides the label is left out (``skip_crowded``, the default; the
record counts it) or, if asked, takes the position that overlaps least. A
point may also carry a short fallback text (its number in a key table): when
the long label finds no free place, or beyond ``limit``, the fallback is tried,
and it is placed even where it must overlap, so no such point is left out.
This is the usual point-feature label placement by candidate positions
(common practice in cartography).
"""

from __future__ import annotations

import numpy as np

__all__ = ["place_labels"]

# unit directions, in the order cartographers prefer: right, upper right, above, upper left, left, ...
_DIRECTIONS = np.array([(1, 0.35), (0.8, 1), (0, 1.2), (-0.8, 1), (-1, 0.35), (-1, -0.7), (0, -1.3), (0.8, -1)],
                       dtype=float)


def _overlap(box, boxes: np.ndarray) -> float:
    if boxes.size == 0:
        return 0.0
    w = np.clip(np.minimum(box[2], boxes[:, 2]) - np.maximum(box[0], boxes[:, 0]), 0, None)
    h = np.clip(np.minimum(box[3], boxes[:, 3]) - np.maximum(box[1], boxes[:, 1]), 0, None)
    return float((w * h).sum())


def place_labels(ax, points_xy, texts, *, obstacles_xy=(), fontsize: float = 8.0, colour: str = "#7a2a00",
                 marker_px: float = 7.0, skip_crowded: bool = True, limit: int | None = None,
                 reserved=(), fallbacks=None) -> dict:
    """Annotate ``texts`` at ``points_xy`` (data units) without overlaps where possible.

    Parameters
    ----------
    ax : matplotlib Axes
        With its final limits set; the figure is drawn once to fix the layout.
    points_xy : ndarray, shape (n, 2)
        Label anchors in data units, strongest first.
    texts : sequence of str
    obstacles_xy : ndarray, shape (m, 2)
        Other markers labels should not cover (data units).
    limit : int, optional
        Stop after this many labels are placed (points with a fallback then
        get their fallback).
    reserved : sequence of (x0, y0, x1, y1)
        Parts of the map (axes fractions) kept free of labels: scale bar,
        north arrow, notes.
    fallbacks : sequence of str, optional
        A short text per point (e.g. its number in a key table), used when
        its label has no free place or is beyond ``limit``; always placed.

    Returns
    -------
    dict
        ``labelled``, ``with_leader`` (placed away from the point, with a
        leader line), ``overlapping`` (placed although no free position was
        found), ``left_out`` (no free position; not labelled), and with
        ``fallbacks``: ``by_fallback`` (points shown by their fallback) and
        ``kinds`` (per point: ``"label"``, ``"fallback"`` or ``""``).
    """
    from matplotlib import patheffects

    fig = ax.figure
    fig.canvas.draw()  # fix the constrained layout, so data -> pixel is final
    to_px = ax.transData.transform
    frame = ax.get_window_extent()
    scale = fig.dpi / 72.0
    char_w, line_h = 0.58 * fontsize * scale, 1.25 * fontsize * scale
    pts = to_px(np.asarray(points_xy, dtype=float).reshape(-1, 2)) if len(texts) else np.empty((0, 2))
    obstacles = np.asarray(obstacles_xy, dtype=float).reshape(-1, 2)
    obs = to_px(obstacles) if obstacles.size else np.empty((0, 2))
    r = marker_px * scale / 2
    placed = [np.column_stack([obs - r, obs + r])] if obs.size else []
    for x0, y0, x1, y1 in reserved:
        (a, b), (c, d) = ax.transAxes.transform([(x0, y0), (x1, y1)])
        placed.append(np.array([[a, b, c, d]]))
    halo = [patheffects.withStroke(linewidth=2.5, foreground="white")]
    record = {"labelled": 0, "with_leader": 0, "overlapping": 0, "left_out": 0}
    if fallbacks is not None:
        record.update(by_fallback=0, kinds=[""] * len(texts))
    anchors = np.asarray(points_xy, dtype=float).reshape(-1, 2)
    for number, ((px, py), text, anchor) in enumerate(zip(pts, texts, anchors)):
        full = limit is not None and record["labelled"] >= limit
        if full and fallbacks is None:
            break
        options = [] if full else [text]
        if fallbacks is not None:
            options.append(fallbacks[number])
        chosen = None
        for attempt, shown in enumerate(options):
            box, ring, cost = _best_position(px, py, char_w * len(shown) + 4, line_h, r, frame, placed)
            last = attempt == len(options) - 1
            if cost == 0 or (last and (fallbacks is not None or not skip_crowded)):
                chosen = (shown, box, ring, cost, fallbacks is not None and (full or attempt == 1))
                break
        if chosen is None:
            record["left_out"] += 1
            continue
        shown, box, ring, cost, is_fallback = chosen
        centre = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
        offset = (centre[0] - px) / scale, (centre[1] - py) / scale
        arrow = {"arrowstyle": "-", "color": colour, "lw": 0.6, "shrinkA": 0, "shrinkB": 2} if ring > 1 else None
        ann = ax.annotate(shown, (float(anchor[0]), float(anchor[1])),
                          xytext=offset, textcoords="offset points", ha="center", va="center", fontsize=fontsize,
                          color=colour, path_effects=halo, zorder=8, arrowprops=arrow, annotation_clip=False)
        ann.set_in_layout(False)
        placed.append(box[None, :])
        if is_fallback:
            record["by_fallback"] += 1
            record["kinds"][number] = "fallback"
        else:
            record["labelled"] += 1
            if fallbacks is not None:
                record["kinds"][number] = "label"
        record["with_leader"] += int(ring > 1)
        record["overlapping"] += int(cost > 0)
    return record


def _best_position(px: float, py: float, w: float, h: float, r: float, frame, placed: list):
    """The candidate box around a point (pixels) that overlaps least: (box, ring, overlap cost)."""
    boxes = np.concatenate(placed) if placed else np.empty((0, 4))
    best, best_cost = None, np.inf
    for ring in (1.0, 2.4, 4.0):
        for dx, dy in _DIRECTIONS:
            ox, oy = dx * (r + 3) * ring, dy * (r + 3) * ring
            x0 = px + ox if dx > 0 else (px + ox - w if dx < 0 else px - w / 2)
            y0 = py + oy if dy > 0 else py + oy - h
            box = np.array([x0, y0, x0 + w, y0 + h])
            inside = box[0] >= frame.x0 and box[2] <= frame.x1 and box[1] >= frame.y0 and box[3] <= frame.y1
            cost = _overlap(box, boxes) + (0.0 if inside else w * h * 4)
            if cost < best_cost:
                best, best_cost = (box, ring), cost
            if cost == 0:
                return box, ring, 0.0
    return best[0], best[1], best_cost
