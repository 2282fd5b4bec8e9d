"""The report page: one HTML file, styles, figures and a small script inline.

:func:`render` turns the summary document and the figures of
:func:`pointsift.report.contents.collect` into the page. It reads numbers
only from the summary, so the page shows the numbers of the JSON. The page
makes no network request: figures are PNG data URIs, markers and
neighbourhood views inline SVG, and a Content-Security-Policy forbids
anything else.

Layout: the counts, then the points to check (a neighbourhood view beside
the reasons of each, then the sortable table of all of them), the map, the
distribution and the local evidence; the long method sections (strips, lag
pairs) are collapsed below, then how the run was made.
"""

from __future__ import annotations

from html import escape

from ..vocabulary import STATUSES
from .assets import CSS, JS
from .figures import marker_svg
from .hood import neighbourhood_svg
from .numbers import format_length, format_number, people_text, plural
from .sections import (distribution_section, figure_html, lag_pairs_section, local_section, num_cell, strips_section,
                       text, unavailable, variogram_section)

__all__ = ["render", "page", "format_number", "header", "counts_section", "key_values"]

STATUS_WORDS = STATUSES
_NUM = ' class="num"'

_STATUS_MEANING = {
    "suspect": "very likely a wrong value or location",
    "review": "worth a field check; may be a real local feature",
    "ok": "consistent with the neighbours",
    "unscreened": "could not be judged (no value, no location or too few neighbours)",
}


def _status_badge(word: str) -> str:
    return f'<span class="status">{marker_svg(word, 14)}{escape(word)}</span>'


def _header(summary: dict) -> str:
    created = summary.get("created") or ""
    made = f"Made by pointsift {escape(summary['pointsift_version'])} ({escape(summary['command'])})"
    if created:
        made += f" on {escape(created.replace('T', ' '))}"
    return (f'<header class="top"><div class="inner"><h1>{escape(summary["title"])}</h1>'
            f"<p>{made}. Works offline: everything it shows is inside this file.</p></div></header>")


def _nav(summary: dict, extra=()) -> str:
    links = [*((anchor, title) for anchor, title, _ in extra), ("counts", "Counts"), ("flagged", "Points to check"), ("map", "Map"), ("distribution", "Distribution"),
             ("local", "Local evidence"), ("variogram", "Variogram"), ("strips", "Strips"), ("lag_pairs", "Lag pairs"),
             ("run", "About the run")]
    items = "".join(f'<li><a href="#{k}">{escape(t)}</a></li>' for k, t in links)
    return f'<nav aria-label="Sections"><ul>{items}</ul></nav>'


def _counts_section(summary: dict) -> str:
    counts = summary.get("counts")
    if counts is None:  # the points-to-check section says why there are none
        return '<section id="counts"></section>'
    total = sum(counts.values())
    cards = []
    for word in STATUS_WORDS:
        share = f"{100.0 * counts[word] / total:.1f} % of {plural(total, 'row')}" if total else ""
        cards.append(
            f'<div class="card {word}" data-status="{word}"><div class="count">{marker_svg(word, 20)}'
            f'<span class="value" data-count="{counts[word]}">{counts[word]:,}</span></div>'
            f'<div class="word">{word}</div><div class="meaning">{escape(_STATUS_MEANING[word])}; {share}</div></div>'
        )
    t = summary.get("thresholds") or {}
    rule = ""
    if t:
        rule = (f'<p class="muted">suspect from |z| &ge; {format_number(t["suspect_z"])}, review from '
                f'{format_number(t["review_z"])} robust standard deviations from what the neighbours predict '
                "(or other evidence; see the reasons).</p>")
    return f'<section id="counts"><div class="cards">{"".join(cards)}</div>{rule}</section>'


def _hood_card(row: dict) -> str:
    scale = row.get("residual_scale")
    facts = [("value", format_number(row["value"], 5)), ("expected", format_number(row["expected_value"], 5)),
             ("scale", f"{format_number(scale, 3)} (robust sd)" if scale is not None else "n/a"),
             ("off by", f"{format_number(row.get('local_residual_z'), 3)} sd" if row.get("local_residual_z") is not None
              else "n/a"),
             ("score", format_number(row["score"], 3))]
    dl = "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in facts)
    near = row.get("neighbours") or []
    listing = "".join(f"<li>{escape(n['id'])}: {format_number(n['value'], 5)} at {escape(format_length(n['distance_m']))}</li>"
                      for n in near)
    more = f"<details><summary>{plural(len(near), 'neighbour')}</summary><ul>{listing}</ul></details>" if near else ""
    return (f'<article class="hood-card {row["status"]}" data-row="{row["row"]}">'
            f'<h3>{escape(row["id"])} {_status_badge(row["status"])}</h3>{neighbourhood_svg(row)}'
            f'<div class="facts"><dl>{dl}</dl>'
            f'<p class="why">{escape(people_text(row["reasons"]))}</p>{more}</div></article>')


def _flagged_section(summary: dict) -> str:
    out = ['<section id="flagged"><h2>Points to check</h2>']
    flagged = summary.get("flagged")
    if flagged is None:
        return "".join(out) + unavailable(summary, "flagged") + "</section>"
    rows = flagged["rows"]
    if not rows:
        return "".join(out) + '<p class="unavailable">No point was flagged suspect or review.</p></section>'
    views = int(summary.get("flagged_views") or 0)
    if views:
        shown = "every one" if views == len(rows) else f"the strongest {views:,} (all {len(rows):,} are in the table below)"
        out.append(f'<p class="lead">Strongest first: {shown}. Each map shows the point in the middle, its neighbours at '
                   "their true bearing (distance on a square-root scale, the ring at the farthest one) with their "
                   "values.</p>")
        out.append('<div class="hoods">' + "".join(_hood_card(r) for r in rows[:views]) + "</div>")
    elif not flagged.get("neighbourhoods"):
        out.append('<p class="muted">This layer was screened before; neighbourhood views are made by the screen itself '
                   "(run 'pointsift screen --report' on the original input).</p>")
    out.append(f"<h3>All {plural(len(rows), 'point')} to check</h3>")
    out.append(
        '<div class="controls"><label>Filter <input type="search" id="flagged-table-filter" placeholder="id, reason, number..."></label>'
        '<label>Status <select id="flagged-table-status"><option value="">suspect and review</option>'
        '<option value="suspect">suspect only</option><option value="review">review only</option></select></label>'
        f'<span class="shown" id="flagged-table-shown">{len(rows):,} of {len(rows):,} rows shown</span></div>'
    )
    head = [("rank", "number", "Rank"), ("id", "text", "Id"), ("status", "text", "Status"), ("value", "number", "Value"),
            ("expected", "number", "Expected"), ("score", "number", "Score"), ("reasons", "text", "Reasons")]
    ths = "".join(f'<th scope="col" data-key="{k}" data-type="{t}"{_NUM if t == "number" else ""}>'
                  f'<button type="button" class="sort">{label}</button></th>' for k, t, label in head)
    body = []
    for rank, r in enumerate(rows, start=1):
        body.append(
            f'<tr data-status="{r["status"]}" data-row="{r["row"]}">'
            f'<td class="num" data-sort="{rank}">{rank}</td>'
            f'<td class="id" data-sort="{escape(r["id"], quote=True)}">{escape(r["id"])}</td>'
            f'<td data-sort="{0 if r["status"] == "suspect" else 1}">{_status_badge(r["status"])}</td>'
            + num_cell(r["value"], 6, "col-value") + num_cell(r["expected_value"], 6, "col-expected")
            + num_cell(r["score"], 4, "col-score")
            + f'<td class="reasons">{escape(r["reasons"])}</td></tr>'
        )
    out.append(f'<div class="scroll"><table class="data" id="flagged-table" data-sortable>'
               f'<thead><tr>{ths}</tr></thead><tbody>{"".join(body)}</tbody></table></div>')
    out.append('<p class="muted">Input row numbers (from 0) and every digit are in the JSON summary '
               "(<code>flagged.rows</code>); hover a number to see all its digits.</p></section>")
    return "".join(out)


def _map_section(summary: dict, figures: dict) -> str:
    m = summary["map"]
    parts = []
    if m.get("screened"):
        parts.append("Suspects are diamonds, review points triangles, ok points small dots and unscreened points "
                     "crosses (Okabe-Ito colours).")
        n_suspect = (summary.get("counts") or {}).get("suspect", 0)
        if n_suspect:
            parts.append(_label_sentence(m, n_suspect))
    else:
        parts.append("The layer was described, not screened: points with a usable value are dots, points without one "
                     "crosses.")
    if m.get("shading"):
        lo, hi = m["shading_range"]
        parts.append(f"The shading shows the values between {format_number(lo)} and {format_number(hi)} (2nd to 98th "
                     "percentile), interpolated linearly between neighbouring points"
                     + (" other than suspects" if m.get("screened") else "")
                     + (f" (a seeded sample of {plural(20000, 'point')})" if m.get("shading_sample_seed") is not None else "")
                     + "; not shaded across wide gaps.")
    for word, count in (m.get("shaded") or {}).items():
        parts.append(f"{count:,} {word} points are shown as density (hexagons, darker = more points) because there are "
                     f"more than {m.get('max_points', 0):,}.")
    if m.get("unlocated"):
        parts.append(f"{plural(m['unlocated'], 'row')} without a usable value or location "
                     f"{'is' if m['unlocated'] == 1 else 'are'} not on the map.")
    parts.append(f"Coordinates in {escape(str(summary['crs']['work_name']))}; no background map (this file works offline).")
    return ('<section id="map"><h2>Map</h2>' + figure_html(figures, "status_map", " ".join(parts)) + _map_key(m)
            + "</section>")


def _label_sentence(m: dict, n_suspect: int) -> str:
    """How the map names its suspects: by id where a label fits, else by a number in the key."""
    labelled, numbered, beyond = m.get("labelled", 0), m.get("numbered", 0), m.get("not_numbered", 0)
    if labelled >= n_suspect:
        return "Every suspect is labelled with its id."
    text = (f"{labelled:,} of the {n_suspect:,} suspects are labelled with their id (the strongest that have room "
            "for it)")
    if numbered:
        text += f"; {'the other ' if not beyond else ''}{numbered:,} carry a number, listed with their ids under the map"
    text += "."
    if beyond:
        text += f" The {beyond:,} weakest are not numbered: the table of points to check lists every one."
    return text


def _map_key(m: dict) -> str:
    """The key of the numbers on the map (number, id), in a few columns that wrap on a phone."""
    key = m.get("key") or []
    if not key:
        return ""
    items = "".join(f'<li><b>{k["number"]}</b> {escape(k["id"])}</li>' for k in key)
    return (f'<details class="map-key"{" open" if len(key) <= 40 else ""}><summary>Numbers on the map '
            f'({len(key):,} suspects)</summary><ol class="key">{items}</ol></details>')


def _param(value):
    if isinstance(value, list):
        return ", ".join(format_number(v) if isinstance(v, (int, float)) else str(v) for v in value) or "none"
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return format_number(value, 6)
    return "default (chosen from the data)" if value is None else value


def _kv(rows) -> str:
    body = "".join(f'<tr><th scope="row">{escape(k)}</th><td>{v}</td></tr>' for k, v in rows)
    return f'<table class="kv">{body}</table>'


def _run_section(summary: dict) -> str:
    inp, crs = summary["input"], summary["crs"]
    north = crs.get("grid_north_offset_deg")
    rows = [
        ("Input", text(inp.get("path"))), ("Layer", text(inp.get("layer"))), ("Format", text(inp.get("format"))),
        ("SHA-256 of the input", f'<code>{text(inp.get("sha256"))}</code>'), ("Rows", format_number(inp.get("rows"))),
        ("Value column", f"<code>{text(inp.get('value_column'))}</code>"),
        ("Id column", f"<code>{text(inp.get('id_column'))}</code>" if inp.get("id_column") else "none (rows are named by number)"),
        ("Output GeoPackage", text(inp.get("output_path")) if inp.get("output_path") else "none written"),
        ("CRS of the input", f"<code>{text(crs.get('input'))}</code>"),
        ("CRS used for distances", f"{text(crs.get('work_name'))} (<code>{text(crs.get('work'))}</code>)"
         + (f"; grid north differs from true north by {abs(north):.2f}&deg; at the centre" if north is not None else "")),
        ("Date (UTC)", text(summary.get("created"))),
    ]
    settings = summary.get("settings", {})
    graph = settings.get("graph")
    if graph:
        nb = f"{graph.get('k')} nearest" if graph.get("kind") == "knn" else f"all within {format_length(graph.get('within_m'))}"
        rows.append(("Neighbours", f"{nb}, none farther than {format_length(graph.get('max_distance_m'))}"
                     f"{' (from the spacing)' if graph.get('max_distance_automatic') else ''}; at least "
                     f"{graph.get('min_neighbours')} needed to judge a point"))
    lac = settings.get("local_autocorrelation")
    if lac:
        rows.append(("Local Moran's I / Gi*", f"{format_number(lac.get('permutations'))} conditional permutations, "
                     f"{text(lac.get('p_adjustment'))} at a false discovery rate of {format_number(lac.get('fdr'))}"))
    out = ['<section id="run"><h2>About the run</h2><div class="two">', f"<div>{_kv(rows[:6])}</div>",
           f"<div>{_kv(rows[6:])}</div></div>"]
    params = summary.get("parameters") or {}
    if params:
        prow = "".join(f'<tr><th scope="row"><code>{escape(k)}</code></th><td>{text(_param(v))}</td></tr>'
                       for k, v in params.items())
        out.append(f'<details><summary>All parameters ({len(params)})</summary><table class="kv">{prow}</table></details>')
    versions = summary.get("versions") or {}
    out.append("<details><summary>pointsift and library versions</summary><p>"
               + ", ".join(f"{escape(k)} {escape(str(v))}" for k, v in versions.items()) + "</p></details>")
    notes = summary.get("notes") or []
    if notes:
        out.append("<h3>Notes from preparation</h3><ul>" + "".join(f"<li>{escape(people_text(n))}</li>" for n in notes) + "</ul>")
    out.append("</section>")
    return "".join(out)


def render(summary: dict, figures: dict, extra=()) -> str:
    """The report page as one HTML string.

    Parameters
    ----------
    summary : dict
        The summary document of :func:`pointsift.report.contents.collect`.
    figures : dict
        ``{name: {"uri": data URI, "alt": text}}``.
    extra : sequence of (anchor, title, html)
        Sections placed first, after the caution, and listed first in the
        navigation (the campaign report's: readings per status, change map,
        flagged wells' series).

    Returns
    -------
    str
    """
    caution = escape(summary["caution"])
    body = [
        _header(summary),
        _nav(summary, extra),
        "<main>",
        f'<div class="caution" role="note" id="caution"><strong>Read this first.</strong> {caution}</div>',
        *(html for _, _, html in extra),
        _counts_section(summary),
        _flagged_section(summary),
        _map_section(summary, figures),
        distribution_section(summary, figures),
        local_section(summary, figures),
        variogram_section(summary, figures),
        strips_section(summary, figures),
        lag_pairs_section(summary, figures),
        _run_section(summary),
        f'<footer><p>{caution}</p><p>The same numbers, machine-readable, are in the JSON summary written with '
        "<code>--summary-json</code>; the statuses, scores and reasons of every row are in the output GeoPackage.</p></footer>",
        "</main>",
    ]
    return page(summary["title"], body)


def page(title: str, body: list) -> str:
    """The page around its sections: styles, the small script and a Content-Security-Policy that forbids
    any request (the screen report and the campaign report share it, and with it the phone-width rules)."""
    csp = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'; "
           "font-src 'none'; connect-src 'none'; form-action 'none'; base-uri 'none'")
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        f'<meta http-equiv="Content-Security-Policy" content="{csp}">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        '<link rel="icon" href="data:,">'
        f"<title>{escape(title)}</title><style>{CSS}</style></head><body>"
        + "".join(body)
        + f"<script>{JS}</script></body></html>\n"
    )


# the parts the campaign report shares (report/campaigns.py)
header = _header
counts_section = _counts_section
key_values = _kv
