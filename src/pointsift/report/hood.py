"""The neighbourhood view of a flagged point: a small inline SVG map of the point and its neighbours.

The point sits in the centre in its status marker; each neighbour is a dot
at its true bearing, its distance drawn on a square-root scale (so the
nearest ones do not pile up on the point), labelled with its value. A ring
marks the farthest neighbour's distance, stated in m or km. Text is SVG text,
so it stays sharp and readable at any zoom, and the view costs about a
kilobyte.
"""

from __future__ import annotations

import math
from html import escape

from .figures import STATUS_STYLE
from .numbers import format_length, format_number

__all__ = ["neighbourhood_svg"]

_WIDTH, _HEIGHT = 300, 240
_RADIUS = 86
_LINE = 13.0  # label spacing (px, 11 px text)


def _spread(items: list, low: float, high: float) -> None:
    """Move label ``y`` apart (in place) so labels on one side keep at least one line between them."""
    items.sort(key=lambda it: it["y"])
    for i in range(1, len(items)):
        items[i]["y"] = max(items[i]["y"], items[i - 1]["y"] + _LINE)
    overflow = items[-1]["y"] - high if items else 0
    if overflow > 0:
        for it in items:
            it["y"] -= overflow
        for i in range(len(items) - 2, -1, -1):
            items[i]["y"] = min(items[i]["y"], items[i + 1]["y"] - _LINE)
    for it in items:
        it["y"] = max(it["y"], low)


def _marker(status: str, x: float, y: float, r: float = 7.0) -> str:
    style = STATUS_STYLE[status]
    c = style["colour"]
    e = style["edge"] if style["edge"] != "none" else c
    if style["marker"] == "D":
        return (f'<polygon points="{x:.1f},{y - r * 1.25:.1f} {x + r:.1f},{y:.1f} {x:.1f},{y + r * 1.25:.1f} '
                f'{x - r:.1f},{y:.1f}" fill="{c}" stroke="{e}" stroke-width="1.2"/>')
    if style["marker"] == "^":
        return (f'<polygon points="{x:.1f},{y - r * 1.15:.1f} {x + r * 1.1:.1f},{y + r * 0.85:.1f} '
                f'{x - r * 1.1:.1f},{y + r * 0.85:.1f}" fill="{c}" stroke="{e}" stroke-width="1.2"/>')
    return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{r * 0.7:.1f}" fill="{c}"/>'


def neighbourhood_svg(row: dict, digits: int = 5) -> str:
    """Inline SVG of one flagged row of the findings (``row["neighbours"]`` with ``dx_m``, ``dy_m``)."""
    neighbours = row.get("neighbours") or []
    cx, cy = _WIDTH / 2, _HEIGHT / 2 + 6
    far = max((n["distance_m"] for n in neighbours if n["distance_m"] is not None), default=0.0) or 1.0
    parts = [f'<circle cx="{cx}" cy="{cy}" r="{_RADIUS}" fill="#fbfbf8" stroke="#c8ccd2" stroke-dasharray="3 3"/>',
             f'<text x="{cx}" y="{cy - _RADIUS - 5}" text-anchor="middle" class="ring">'
             f"ring {escape(format_length(far))}</text>"]
    sides = {"start": [], "end": []}
    for n in neighbours:
        d = n["distance_m"] or 0.0
        bearing = math.atan2(n["dy_m"] or 0.0, n["dx_m"] or 0.0)
        r = _RADIUS * math.sqrt(d / far)
        x, y = cx + r * math.cos(bearing), cy - r * math.sin(bearing)
        parts.append(f'<line x1="{cx}" y1="{cy}" x2="{x:.1f}" y2="{y:.1f}" stroke="#d4d8dd" stroke-width="1"/>')
        parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.6" fill="#0072B2"><title>{escape(n["id"])}: '
                     f'{escape(format_number(n["value"], digits))} at {escape(format_length(d))}</title></circle>')
        side = "start" if x >= cx else "end"
        sides[side].append({"x": x, "y0": y, "y": y + 4, "text": format_number(n["value"], digits)})
    for side, items in sides.items():
        _spread(items, 12.0, _HEIGHT - 4.0)
        for it in items:
            lx = max(it["x"], cx + _RADIUS + 8) if side == "start" else min(it["x"], cx - _RADIUS - 8)
            if abs(lx - it["x"]) > 1 or abs(it["y"] - 4 - it["y0"]) > 1:
                parts.append(f'<line x1="{it["x"]:.1f}" y1="{it["y0"]:.1f}" x2="{lx:.1f}" y2="{it["y"] - 4:.1f}" '
                             'stroke="#9aa3ad" stroke-width="0.7"/>')
            tx = lx + 4 if side == "start" else lx - 4
            parts.append(f'<text x="{tx:.1f}" y="{it["y"]:.1f}" text-anchor="{side}">{escape(it["text"])}</text>')
    parts.append(_marker(row["status"], cx, cy))
    parts.append(f'<text x="{cx}" y="{cy + 22}" text-anchor="middle" class="own">'
                 f'{escape(format_number(row["value"], digits))}</text>')
    parts.append('<text x="6" y="16" class="north">N \u2191</text>')
    label = (f"Neighbourhood of {row['id']}: value {format_number(row['value'], digits)}, "
             f"{len(neighbours)} neighbours within {format_length(far)}")
    return (f'<svg class="hood" viewBox="0 0 {_WIDTH} {_HEIGHT}" width="{_WIDTH}" height="{_HEIGHT}" role="img" '
            f'aria-label="{escape(label, quote=True)}">{"".join(parts)}</svg>')
