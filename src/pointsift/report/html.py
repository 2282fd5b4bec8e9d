"""The report page: one HTML file, styles, figures and a small script inline.

:func:`render` turns the summary document and the figures of
:func:`pointsift.report.contents.collect` into the page. It reads numbers
only from the summary, so the page shows the numbers of the JSON. The page
makes no network request: figures are PNG data URIs, markers inline SVG, and
a Content-Security-Policy forbids anything else.
"""

from __future__ import annotations

import math
from html import escape

from .figures import marker_svg

__all__ = ["render", "format_number"]

STATUS_WORDS = ("suspect", "review", "ok", "unscreened")

_STATUS_MEANING = {
    "suspect": "very likely a wrong value or location",
    "review": "worth a field check; may be a real local feature",
    "ok": "consistent with the neighbours",
    "unscreened": "could not be judged (no value, no location or too few neighbours)",
}

_CSS = """
:root { --ink:#1d2228; --muted:#5b6470; --line:#d9dde2; --soft:#f4f6f8; --accent:#0072B2; --warn:#8a4b00; }
* { box-sizing: border-box; }
html { font-size: 15px; }
body { margin:0; color:var(--ink); background:#fff; font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; line-height:1.45; }
main { max-width: 1180px; margin: 0 auto; padding: 0 22px 40px; }
header.top { background:#17324d; color:#fff; padding:18px 22px 14px; }
header.top .inner { max-width:1180px; margin:0 auto; }
header.top h1 { margin:0 0 4px; font-size:1.55rem; font-weight:650; letter-spacing:.01em; overflow-wrap:anywhere; }
header.top p { margin:0; color:#cfdceb; font-size:.92rem; }
nav { position: sticky; top:0; z-index:5; background:#ffffffee; border-bottom:1px solid var(--line); }
nav ul { list-style:none; margin:0 auto; padding:6px 22px; display:flex; flex-wrap:wrap; gap:4px 18px; max-width:1180px; font-size:.92rem; }
nav a { color:var(--accent); text-decoration:none; }
nav a:hover { text-decoration:underline; }
.caution { margin:16px 0 8px; padding:10px 14px; border-left:5px solid #E69F00; background:#fff8ea; color:#3d2c00; }
.caution strong { color:#000; }
section { margin-top:26px; }
h2 { font-size:1.25rem; margin:0 0 10px; padding-bottom:4px; border-bottom:2px solid var(--soft); }
h3 { font-size:1.05rem; margin:18px 0 8px; }
p.lead { margin:4px 0 12px; color:var(--muted); }
.cards { display:grid; grid-template-columns: repeat(auto-fit, minmax(190px, 1fr)); gap:10px; margin:10px 0 14px; }
.card { border:1px solid var(--line); border-radius:8px; padding:10px 12px; background:#fff; }
.card .count { font-size:1.7rem; font-weight:700; display:flex; align-items:center; gap:8px; }
.card .word { font-weight:600; }
.card .meaning { color:var(--muted); font-size:.85rem; }
.card.suspect { border-top:4px solid #D55E00; } .card.review { border-top:4px solid #E69F00; }
.card.ok { border-top:4px solid #0072B2; } .card.unscreened { border-top:4px solid #7f7f7f; }
table { border-collapse:collapse; font-size:.9rem; }
table.kv { width:100%; }
table.kv th { text-align:left; font-weight:600; width:12em; vertical-align:top; padding:4px 10px 4px 0; color:#333; }
table.kv td { padding:4px 0; overflow-wrap:anywhere; }
table.kv tr + tr > * { border-top:1px solid var(--soft); }
table.data { width:100%; }
table.data th, table.data td { padding:5px 8px; border-bottom:1px solid var(--line); text-align:left; vertical-align:top; }
table.data td.num, table.data th.num { text-align:right; font-variant-numeric: tabular-nums; white-space:nowrap; }
table.data thead th { background:var(--soft); position:sticky; top:0; z-index:1; }
table.data tr.flag-row td { background:#fff3e0; }
.scroll { max-height: 620px; overflow:auto; border:1px solid var(--line); border-radius:6px; }
figure { margin:8px 0 18px; }
figure img { max-width:100%; height:auto; border:1px solid var(--line); border-radius:6px; background:#fff; }
figcaption { color:var(--muted); font-size:.88rem; margin-top:4px; }
.two { display:grid; grid-template-columns: minmax(0, 1.15fr) minmax(0, 1fr); gap:20px; align-items:start; }
.two.facts { grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap:28px; }
@media (max-width: 900px) { .two, .two.facts { grid-template-columns: 1fr; } }
pre.stem { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size:.8rem; line-height:1.25; background:var(--soft); padding:10px; border-radius:6px; overflow:auto; max-height:520px; margin:0; }
.unavailable { padding:10px 14px; background:var(--soft); border:1px dashed #aab2bc; border-radius:6px; color:#333; }
.controls { display:flex; flex-wrap:wrap; gap:10px 18px; align-items:center; margin:6px 0 10px; }
.controls input[type=search] { font:inherit; padding:5px 8px; border:1px solid #aab2bc; border-radius:5px; min-width:18em; }
.controls select { font:inherit; padding:4px 6px; border:1px solid #aab2bc; border-radius:5px; }
.controls .shown { color:var(--muted); font-size:.9rem; }
th button.sort { all:unset; cursor:pointer; font-weight:650; display:inline-flex; gap:4px; align-items:center; }
th button.sort:focus-visible { outline:2px solid var(--accent); outline-offset:2px; }
th button.sort::after { content:"\\2195"; color:#9aa3ad; font-size:.8em; }
th[aria-sort=ascending] button.sort::after { content:"\\25B2"; color:var(--ink); }
th[aria-sort=descending] button.sort::after { content:"\\25BC"; color:var(--ink); }
.status { display:inline-flex; gap:5px; align-items:center; white-space:nowrap; font-weight:600; }
svg.marker { vertical-align:middle; flex:none; }
td.reasons { min-width:26em; font-size:.86rem; }
td.id { white-space:nowrap; font-weight:600; }
#quadrant-table th { white-space:nowrap; }
details { margin:8px 0; }
details > summary { cursor:pointer; color:var(--accent); }
footer { margin-top:36px; padding-top:10px; border-top:1px solid var(--line); color:var(--muted); font-size:.85rem; }
.muted { color:var(--muted); }
@media print { nav { display:none; } .scroll { max-height:none; overflow:visible; } header.top { background:#fff; color:#000; } header.top p { color:#333; } }
"""

# Sorting and filtering of the tables marked data-sortable. Cells carry the
# sort key in data-sort (numbers as plain text, empty for missing values).
_JS = r"""
(function () {
  "use strict";
  function keyOf(cell, numeric) {
    var raw = cell.getAttribute("data-sort");
    if (raw === null) { raw = cell.textContent; }
    if (numeric) {
      var f = parseFloat(raw);
      return isNaN(f) ? null : f;
    }
    return raw.toLowerCase();
  }
  function sortBy(table, index, numeric, header) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    var current = header.getAttribute("aria-sort");
    var descending = current === "ascending" || (current !== "descending" && numeric);
    var ths = table.tHead.rows[0].cells;
    for (var i = 0; i < ths.length; i++) { ths[i].removeAttribute("aria-sort"); }
    header.setAttribute("aria-sort", descending ? "descending" : "ascending");
    var decorated = rows.map(function (row, position) {
      return { row: row, key: keyOf(row.cells[index], numeric), position: position };
    });
    decorated.sort(function (a, b) {
      if (a.key === b.key) { return a.position - b.position; }
      if (a.key === null) { return 1; }
      if (b.key === null) { return -1; }
      var order = a.key < b.key ? -1 : 1;
      return descending ? -order : order;
    });
    var fragment = document.createDocumentFragment();
    decorated.forEach(function (d) { fragment.appendChild(d.row); });
    body.appendChild(fragment);
  }
  function applyFilter(table, text, status, counter) {
    var needle = text.trim().toLowerCase();
    var rows = table.tBodies[0].rows;
    var shown = 0;
    for (var i = 0; i < rows.length; i++) {
      var row = rows[i];
      var okStatus = !status || row.getAttribute("data-status") === status;
      var okText = !needle || row.textContent.toLowerCase().indexOf(needle) !== -1;
      var visible = okStatus && okText;
      row.hidden = !visible;
      if (visible) { shown++; }
    }
    if (counter) { counter.textContent = shown + " of " + rows.length + " rows shown"; }
  }
  var tables = document.querySelectorAll("table[data-sortable]");
  Array.prototype.forEach.call(tables, function (table) {
    var headers = table.tHead.rows[0].cells;
    Array.prototype.forEach.call(headers, function (th, index) {
      var button = th.querySelector("button.sort");
      if (!button) { return; }
      var numeric = th.getAttribute("data-type") === "number";
      button.addEventListener("click", function () { sortBy(table, index, numeric, th); });
    });
    var box = document.getElementById(table.id + "-filter");
    var select = document.getElementById(table.id + "-status");
    var counter = document.getElementById(table.id + "-shown");
    function update() { applyFilter(table, box ? box.value : "", select ? select.value : "", counter); }
    if (box) { box.addEventListener("input", update); }
    if (select) { select.addEventListener("change", update); }
    update();
  });
})();
"""


def format_number(value, digits: int = 6) -> str:
    """Number for display: ``n/a`` for None, thousands separators for integers, ``digits`` significant digits."""
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "n/a"
        if value == int(value) and abs(value) < 1e15:
            return f"{int(value):,}" if abs(value) >= 1e4 else f"{value:g}"
        if 10.0 ** digits <= abs(value) < 1e15:
            return f"{value:,.0f}"
        return f"{value:.{digits}g}"
    return escape(str(value))


def _sort_key(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return escape(str(value), quote=True)


def _num_cell(value, digits: int = 6) -> str:
    title = f' title="{repr(value)}"' if isinstance(value, float) else ""
    return f'<td class="num" data-sort="{_sort_key(value)}"{title}>{format_number(value, digits)}</td>'


def _text(value) -> str:
    return "n/a" if value is None or value == "" else escape(str(value))


_NUM_CLASS = ' class="num"'


def _kv(rows) -> str:
    body = "".join(f"<tr><th scope=\"row\">{escape(k)}</th><td>{v}</td></tr>" for k, v in rows)
    return f'<table class="kv">{body}</table>'


def _figure(figures: dict, key: str, caption: str) -> str:
    item = figures.get(key)
    if item is None:
        return f'<p class="unavailable">Figure not available: {escape(key)}.</p>'
    return (f'<figure><img src="{item["uri"]}" alt="{escape(item["alt"], quote=True)}" loading="eager">'
            f"<figcaption>{caption}</figcaption></figure>")


def _unavailable(summary: dict, key: str) -> str:
    for section in summary["sections"]:
        if section["id"] == key and not section["available"]:
            return f'<p class="unavailable">{escape(section["note"] or "Not available.")}</p>'
    return ""


def _status_badge(word: str) -> str:
    return f'<span class="status">{marker_svg(word, 14)}{escape(word)}</span>'


def _plural(n: int, word: str) -> str:
    return f"{n:,} {word}{'' if n == 1 else 's'}"


def _direction_name(direction: float) -> str:
    from ..methods.strips import direction_words

    return direction_words(float(direction))


def _header(summary: dict) -> str:
    created = summary.get("created") or ""
    made = f"Made by pointsift {escape(summary['pointsift_version'])} ({escape(summary['command'])})"
    if created:
        made += f" on {escape(created.replace('T', ' '))}"
    return (f'<header class="top"><div class="inner"><h1>{escape(summary["title"])}</h1>'
            f"<p>{made}. This file works offline: everything it shows is inside it.</p></div></header>")


def _nav(summary: dict) -> str:
    links = [("run", "Run summary"), ("map", "Map"), ("flagged", "Points to check"), ("distribution", "Distribution"),
             ("strips", "Strips"), ("local", "Local evidence"), ("lag_pairs", "Lag pairs"), ("variogram", "Variogram")]
    items = "".join(f'<li><a href="#{k}">{escape(t)}</a></li>' for k, t in links)
    return f'<nav aria-label="Sections"><ul>{items}</ul></nav>'


def _run_section(summary: dict) -> str:
    out = ['<section id="run"><h2>Run summary</h2>']
    counts = summary.get("counts")
    inp = summary["input"]
    if counts is not None:
        total = sum(counts.values())
        cards = []
        for word in STATUS_WORDS:
            share = f"{100.0 * counts[word] / total:.1f} % of rows" if total else ""
            cards.append(
                f'<div class="card {word}" data-status="{word}"><div class="count">{marker_svg(word, 20)}'
                f'<span class="value" data-count="{counts[word]}">{counts[word]:,}</span></div>'
                f'<div class="word">{word}</div><div class="meaning">{escape(_STATUS_MEANING[word])}; {share}</div></div>'
            )
        out.append(f'<div class="cards">{"".join(cards)}</div>')
    else:
        out.append('<p class="unavailable">This layer was described, not screened: no statuses. '
                   "Run 'pointsift screen' (or 'describe --with-screen') for suspects and review points.</p>")
    crs = summary["crs"]
    north = crs.get("grid_north_offset_deg")
    rows = [
        ("Input", _text(inp.get("path"))),
        ("Layer", _text(inp.get("layer"))),
        ("Format", _text(inp.get("format"))),
        ("SHA-256 of the input", f'<code>{_text(inp.get("sha256"))}</code>'),
        ("Rows", format_number(inp.get("rows"))),
        ("Value column", f"<code>{_text(inp.get('value_column'))}</code>"),
        ("Id column", f"<code>{_text(inp.get('id_column'))}</code>" if inp.get("id_column") else "none (rows are named by number)"),
        ("Output GeoPackage", _text(inp.get("output_path")) if inp.get("output_path") else "none written"),
        ("CRS of the input", f"<code>{_text(crs.get('input'))}</code>"),
        ("CRS used for distances", f"{_text(crs.get('work_name'))} (<code>{_text(crs.get('work'))}</code>)"
         + (f"; grid north differs from true north by {abs(north):.2f}&deg; at the centre" if north is not None else "")),
        ("Date (UTC)", _text(summary.get("created"))),
    ]
    settings = summary.get("settings", {})
    graph = settings.get("graph")
    if graph:
        nb = (f"{graph.get('k')} nearest" if graph.get("kind") == "knn" else f"all within {format_number(graph.get('within_m'))} m")
        rows.append(("Neighbours", f"{nb}, none farther than {format_number(graph.get('max_distance_m'))} m"
                     f"{' (from the spacing)' if graph.get('max_distance_automatic') else ''}; at least "
                     f"{graph.get('min_neighbours')} needed to judge a point"))
    trend = settings.get("trend")
    if trend:
        rows.append(("Regional trend", _text(trend.get("method")) + (
            f", explains {100 * trend['variance_explained']:.1f} % of the variance" if trend.get("variance_explained") is not None else "")))
    lac = settings.get("local_autocorrelation")
    if lac:
        rows.append(("Local Moran's I / Gi*", f"{format_number(lac.get('permutations'))} conditional permutations, "
                     f"{_text(lac.get('p_adjustment'))} at a false discovery rate of {format_number(lac.get('fdr'))}"))
    half = 8  # input facts on the left, how the screen worked on the right
    out.append(f'<div class="two facts"><div>{_kv(rows[:half])}</div><div>{_kv(rows[half:])}</div></div>')
    params = summary.get("parameters") or {}
    if params:
        prow = "".join(f"<tr><th scope=\"row\"><code>{escape(k)}</code></th><td>{_text(_param(v))}</td></tr>" for k, v in params.items())
        out.append(f'<details><summary>All parameters ({len(params)})</summary><table class="kv">{prow}</table></details>')
    versions = summary.get("versions") or {}
    vrow = ", ".join(f"{escape(k)} {escape(str(v))}" for k, v in versions.items())
    out.append(f'<details><summary>pointsift and library versions</summary><p>{vrow}</p></details>')
    notes = summary.get("notes") or []
    if notes:
        out.append("<h3>Notes from preparation</h3><ul>" + "".join(f"<li>{escape(str(n))}</li>" for n in notes) + "</ul>")
    out.append("</section>")
    return "".join(out)


def _param(value):
    if isinstance(value, list):
        return ", ".join(format_number(v) if isinstance(v, (int, float)) else str(v) for v in value) or "none"
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return format_number(value)
    return "default (chosen from the data)" if value is None else value


def _map_section(summary: dict, figures: dict) -> str:
    m = summary["map"]
    parts = []
    shaded = m.get("shaded", {})
    if not m.get("screened"):
        parts.append("The layer was described, not screened: points with a usable value are dots, "
                     "points without one crosses.")
    if m.get("screened"):
        parts.append("Suspects are diamonds, review points triangles, ok points small dots and unscreened points crosses; "
                     "colours from the Okabe-Ito colour-blind-safe set.")
        n_suspect = (summary.get("counts") or {}).get("suspect", 0)
        if n_suspect:
            labelled = m.get("labelled", 0)
            parts.append(f"{labelled:,} of {n_suspect:,} suspects are labelled with their id"
                         + (" (the strongest by score)." if labelled < n_suspect else "."))
    for word, count in shaded.items():
        parts.append(f"{count:,} {word} points are shown as density shading (hexagons, darker = more points) "
                     f"rather than one marker each, because there are more than {m.get('max_points', 0):,}.")
    if m.get("unlocated"):
        parts.append(f"{m['unlocated']:,} rows have no usable location and are not on the map.")
    parts.append(f"Coordinates in {escape(summary['crs']['work_name'])}; the scale bar is in ground metres of that CRS. "
                 "No background map: this file works offline.")
    return ('<section id="map"><h2>Map</h2>' + _figure(figures, "status_map", " ".join(parts)) + "</section>")


def _flagged_section(summary: dict) -> str:
    out = ['<section id="flagged"><h2>Points to check</h2>']
    flagged = summary.get("flagged")
    if flagged is None:
        out.append(_unavailable(summary, "flagged") + "</section>")
        return "".join(out)
    rows = flagged["rows"]
    out.append(f'<p class="lead">Every <b>suspect</b> and <b>review</b> point ({flagged["count"]:,} rows), strongest first: '
               "suspects before review points, then by score (larger = stronger evidence of an error). "
               "Click a column title to sort; type to filter.</p>")
    if not rows:
        out.append('<p class="unavailable">No point was flagged suspect or review.</p></section>')
        return "".join(out)
    out.append(
        '<div class="controls"><label>Filter <input type="search" id="flagged-table-filter" placeholder="id, reason, number..."></label>'
        '<label>Status <select id="flagged-table-status"><option value="">suspect and review</option>'
        '<option value="suspect">suspect only</option><option value="review">review only</option></select></label>'
        f'<span class="shown" id="flagged-table-shown">{len(rows):,} of {len(rows):,} rows shown</span></div>'
    )
    head = [("rank", "number", "Rank"), ("id", "text", "Id"), ("status", "text", "Status"), ("value", "number", "Value"),
            ("expected", "number", "Expected"), ("score", "number", "Score"), ("reasons", "text", "Reasons")]
    ths = "".join(
        f'<th scope="col" data-key="{k}" data-type="{t}"{_NUM_CLASS if t == "number" else ""}>'
        f'<button type="button" class="sort">{label}</button></th>'
        for k, t, label in head
    )
    body = []
    for rank, r in enumerate(rows, start=1):
        status_rank = 0 if r["status"] == "suspect" else 1
        body.append(
            f'<tr data-status="{r["status"]}" data-row="{r["row"]}">'
            f'<td class="num" data-sort="{rank}">{rank}</td>'
            f'<td class="id" data-sort="{escape(r["id"], quote=True)}">{escape(r["id"])}</td>'
            f'<td data-sort="{status_rank}">{_status_badge(r["status"])}</td>'
            + _num_cell(r["value"]) + _num_cell(r["expected_value"]) + _num_cell(r["score"])
            + f'<td class="reasons">{escape(r["reasons"])}</td></tr>'
        )
    out.append(f'<div class="scroll"><table class="data" id="flagged-table" data-sortable>'
               f'<thead><tr>{ths}</tr></thead><tbody>{"".join(body)}</tbody></table></div>')
    out.append('<p class="muted">Row numbers of the input are in the JSON summary (<code>flagged.rows[].row</code>, '
               "counted from 0); hover a number to see all its digits.</p></section>")
    return "".join(out)


_SUMMARY_LABELS = [
    ("n", "values used"), ("n_missing", "values left out (missing)"), ("mean", "mean"), ("median", "median"),
    ("sd", "standard deviation (n - 1)"), ("min", "minimum"), ("p05", "5th percentile"), ("p25", "25th percentile"),
    ("p75", "75th percentile"), ("p95", "95th percentile"), ("max", "maximum"), ("iqr", "interquartile range"),
    ("mad", "median absolute deviation"), ("robust_sd_iqr", "robust sd, IQR / 1.349"),
    ("robust_sd_mad", "robust sd, 1.4826 x MAD"), ("skewness", "skewness (adjusted G1)"),
    ("kurtosis", "excess kurtosis (adjusted G2)"),
]


def _distribution_section(summary: dict, figures: dict) -> str:
    d = summary["distribution"]
    value = escape(str(summary["input"].get("value_column")))
    everything, kept = d["all"], d.get("without_suspects")
    head = "<tr><th scope=\"col\">figure</th><th scope=\"col\" class=\"num\">all values</th>"
    if kept is not None:
        head += f"<th scope=\"col\" class=\"num\">without the {d['n_suspects']:,} suspects</th>"
    head += "</tr>"
    body = []
    for key, label in _SUMMARY_LABELS:
        cells = _num_cell(everything.get(key))
        if kept is not None:
            cells += _num_cell(kept.get(key))
        body.append(f"<tr><th scope=\"row\">{escape(label)}</th>{cells}</tr>")
    table = f'<table class="data" id="summary-table"><thead>{head}</thead><tbody>{"".join(body)}</tbody></table>'
    shift = d.get("shift")
    shift_text = ""
    if shift is not None and kept is not None:
        shift_text = (f"<p>Leaving out the suspects moves the mean by {format_number(shift['mean'])} "
                      f"({format_number(shift['mean_in_sd'], 3)} sd) and the standard deviation by {format_number(shift['sd'])} "
                      f"(ratio {format_number(shift['sd_ratio'], 4)}).</p>")
    hist = d["histogram"]
    caption = (f"Histogram of {value}, all values: {escape(hist.get('title', ''))}. Counts per bin are in the JSON summary.")
    second = ""
    if d.get("histogram_without_suspects"):
        second = _figure(figures, "histogram_without_suspects",
                         f"The same without the {d['n_suspects']:,} suspects: "
                         f"{escape(d['histogram_without_suspects'].get('title', ''))}.")
    unscreened = d.get("unscreened_reasons") or {}
    un = ""
    if unscreened:
        un = "<h3>Rows without a usable value or location</h3><ul>" + "".join(
            f"<li>{v:,} &times; {escape(k)}</li>" for k, v in unscreened.items()) + "</ul>"
    trend = d.get("trend") or {}
    trend_text = ""
    if trend:
        trend_text = f"<p>Regional trend: {_text(trend.get('method'))}"
        if trend.get("variance_explained") is not None:
            trend_text += f", explains {100 * trend['variance_explained']:.1f} % of the variance"
        if trend.get("robust_variance_explained") is not None:
            trend_text += f" (robust share {100 * trend['robust_variance_explained']:.1f} %)"
        if trend.get("note"):
            trend_text += f"; {escape(str(trend['note']))}"
        trend_text += ".</p>"
    return (
        '<section id="distribution"><h2>Distribution</h2>'
        f'<div class="two"><div>{_figure(figures, "histogram", caption)}{second}{shift_text}{trend_text}</div>'
        f"<div>{table}</div></div>"
        f'<h3>Stem-and-leaf display</h3><pre class="stem" id="stem-leaf">{escape(d["stem_leaf"]["text"])}</pre>{un}</section>'
    )


def _strips_section(summary: dict, figures: dict) -> str:
    s = summary["strips"]
    widths = "; ".join(f"{escape(_direction_name(float(k)))}: {format_number(v)} m wide" for k, v in s["widths_m"].items())
    lead = (f'<p class="lead">The area is cut into parallel strips ({widths}). In each strip the mean and the median '
            f"are compared: a single wild value pulls the mean away from the median. The difference, divided by a robust "
            f"spread, is calibrated for the strip's own number of points into <i>u</i>; a strip is flagged when |u| &gt; "
            f"{format_number(s['flag_u'])}. Strips with fewer than {s['min_n']} points are not judged. "
            f"{_plural(s['flagged'], 'strip')} flagged.</p>")
    caption = "Strip means (solid) and medians (dashed) across the area, 5-95 % range shaded; flagged strips ringed."
    cols = [("direction", "text", "Strips"), ("strip", "number", "Strip"), ("n", "number", "n"), ("mean", "number", "Mean"),
            ("median", "number", "Median"), ("iqr", "number", "IQR"), ("u", "number", "u"), ("flagged", "text", "Flagged"),
            ("extreme_id", "text", "Extreme point"), ("extreme_value", "number", "Extreme value"), ("note", "text", "Note")]
    ths = "".join(f'<th scope="col" data-type="{t}"{_NUM_CLASS if t == "number" else ""}>'
                  f'<button type="button" class="sort">{label}</button></th>' for _, t, label in cols)
    body = []
    for r in s["rows"]:
        cls = ' class="flag-row"' if r["flagged"] else ""
        body.append(
            f"<tr{cls}><td data-sort=\"{format_number(r['direction'])}\">{escape(_direction_name(float(r['direction'])).split(',')[0])}</td>"
            + _num_cell(r["strip"]) + _num_cell(r["n"]) + _num_cell(r["mean"]) + _num_cell(r["median"]) + _num_cell(r["iqr"])
            + _num_cell(r["u"], 3)
            + f"<td>{'yes' if r['flagged'] else ''}</td><td>{_text(r['extreme_id']) if r['n'] else ''}</td>"
            + _num_cell(r["extreme_value"]) + f"<td>{escape(r['note'])}</td></tr>"
        )
    table = (f'<div class="scroll"><table class="data" id="strips-table" data-sortable><thead><tr>{ths}</tr></thead>'
             f'<tbody>{"".join(body)}</tbody></table></div>')
    return f'<section id="strips"><h2>Strips</h2>{lead}{_figure(figures, "strips", caption)}{table}</section>'


def _local_section(summary: dict, figures: dict) -> str:
    local = summary.get("local_evidence") or {}
    if not local.get("available"):
        return f'<section id="local"><h2>Local evidence</h2>{_unavailable(summary, "local")}</section>'
    rz = local["residual_z"]
    params = summary.get("parameters", {})
    lead = (f'<p class="lead">Each value is predicted from its neighbours by a robust local plane; the difference, in robust '
            f"standard deviations, is the standardized local residual. {format_number(rz['judged'])} points judged, from "
            f"{format_number(rz['min'], 4)} to {format_number(rz['max'], 4)}; {format_number(rz['beyond_review_z'])} reach "
            f"{format_number(params.get('review_z'))} and {format_number(rz['beyond_suspect_z'])} reach "
            f"{format_number(params.get('suspect_z'))} (the review and suspect thresholds).</p>")
    rm = local["residual_map"]
    cap = "Standardized local residual of every judged point; larger markers are farther from the prediction."
    if rm.get("sample_seed") is not None:
        cap += f" {rm['drawn']:,} of {rm['points']:,} points drawn: a seeded sample (seed {rm['sample_seed']}) that keeps every flagged point."
    sc = local["neighbour_scatter"]
    qc = sc["quadrant_counts"]
    sig = sc["significant_counts"]
    rows = "".join(
        f"<tr><th scope=\"row\">{escape(w)}</th>{_num_cell(qc[w])}{_num_cell(sig[w])}</tr>" for w in qc
    )
    qtable = (f'<table class="data" id="quadrant-table"><thead><tr><th scope="col">quadrant</th>'
              f'<th scope="col" class="num">points</th><th scope="col" class="num">significant (Local Moran\'s I, '
              f"adjusted p &le; {format_number(sc['fdr'])})</th></tr></thead><tbody>{rows}</tbody></table>")
    cap2 = (f"Each standardized value ({escape(local['values'])}) against the mean of its neighbours' standardized values. "
            f"High among low and low among high are the spatial outliers. The dashed line has slope "
            f"{format_number(sc['slope'], 4)} (global Moran's I for these neighbour weights).")
    if sc.get("beyond_frame"):
        cap2 += (f" {sc['beyond_frame']:,} points lie beyond the frame (which spans 99.5 % of the points) and are drawn "
                 "hollow on its edge.")
    if sc.get("sample_seed") is not None:
        cap2 += f" {sc['drawn']:,} of {sc['points']:,} points drawn (seeded sample, every flagged point kept); counts are of all points."
    return (
        f'<section id="local"><h2>Local evidence</h2>{lead}'
        f'{_figure(figures, "residual_map", cap)}'
        f'<div class="two"><div>{_figure(figures, "neighbour_scatter", cap2)}</div><div><h3>Quadrant counts</h3>{qtable}</div></div>'
        "</section>"
    )


def _lag_pairs_section(summary: dict, figures: dict) -> str:
    lp = summary.get("lag_pairs") or {}
    if not lp.get("available"):
        return f'<section id="lag_pairs"><h2>Lag pairs</h2>{_unavailable(summary, "lag_pairs")}</section>'
    search = lp.get("pair_search", {})
    sampled = ""
    if search.get("sampled"):
        sampled = (f" The pairs in reach ({format_number(search.get('pairs_in_reach'))}) exceed the budget: a seeded sample "
                   f"(seed {search.get('seed')}) of {format_number(search.get('pairs_used'))} pairs is used.")
    lead = (f'<p class="lead">Pairs of points at about the same separation and in about the same direction should have '
            f"similar {escape(lp['values'])}. Each panel plots the value at one end against the other for one lag class; "
            f"a pair outside the dashed band ({format_number(lp.get('threshold'))} robust scales) is flagged. "
            f"Directions within &plusmn;{format_number(lp.get('angle_tolerance'))}&deg;; first lag "
            f"{format_number(lp.get('first_lag'))} m. {format_number(lp.get('pairs_screened'))} pairs screened, "
            f"{format_number(lp.get('pairs_flagged'))} flagged.{sampled}</p>")
    culprits = lp.get("culprit_ids") or []
    culprit_text = ("<p>Points that sit in most of the flagged pairs around them (the likely culprits): "
                    + (", ".join(escape(c) for c in culprits) if culprits else "none") + ".</p>")
    if lp.get("computed_for_report"):
        culprit_text += ('<p class="muted">The lag pairs were computed for this report with the default settings; '
                         "their evidence is not part of the statuses above.</p>")
    figs = "".join(
        _figure(figures, f["figure"], f"{escape(f['name'])} (azimuth {escape(f['direction'])}&deg;): value at the tail "
                f"against value at the head, one panel per lag class; 1:1 line solid, band dashed, flagged pairs in red.")
        for f in lp.get("figures", [])
    )
    pairs = lp.get("flagged_pairs") or []
    table = ""
    if pairs:
        cols = [("tail_id", "text", "Tail"), ("head_id", "text", "Head"), ("tail_value", "number", "Tail value"),
                ("head_value", "number", "Head value"), ("difference", "number", "Difference"),
                ("separation", "number", "Separation (m)"), ("direction", "text", "Direction"), ("lag", "number", "Lag"),
                ("pair_z", "number", "How far out"), ("culprit_id", "text", "Likely culprit")]
        ths = "".join(f'<th scope="col" data-type="{t}"{_NUM_CLASS if t == "number" else ""}>'
                      f'<button type="button" class="sort">{label}</button></th>' for _, t, label in cols)
        body = "".join(
            "<tr>" + "".join(_num_cell(p[k], 5) if t == "number" else f"<td>{_text(p[k])}</td>" for k, t, _ in cols) + "</tr>"
            for p in pairs
        )
        table = (f"<details><summary>Flagged pairs ({len(pairs):,})</summary><div class=\"scroll\">"
                 f'<table class="data" id="pairs-table" data-sortable><thead><tr>{ths}</tr></thead><tbody>{body}</tbody></table>'
                 "</div></details>")
    return f'<section id="lag_pairs"><h2>Lag pairs</h2>{lead}{culprit_text}{figs}{table}</section>'


def _variogram_section(summary: dict, figures: dict) -> str:
    v = summary.get("variogram") or {}
    if not v.get("available"):
        return f'<section id="variogram"><h2>Variogram</h2>{_unavailable(summary, "variogram")}</section>'
    model = v.get("model", {})
    rows = [
        ("Values", escape(v.get("values", ""))),
        ("Model", f"{_text(model.get('model'))}, fitted to the {escape(str(v.get('fit_estimator', '')).replace('_', '-'))} "
                  "estimates by weighted least squares"),
        ("Nugget", format_number(model.get("nugget"))),
        ("Partial sill", format_number(model.get("partial_sill"))),
        ("Sill", format_number(model.get("sill"))),
        ("Practical range (m)", format_number(model.get("practical_range"))),
        ("Pair-weighted R\u00b2", format_number(model.get("r_squared"), 4)),
        ("Trustworthy", "yes" if model.get("trustworthy") else "no"),
        ("Why", escape("; ".join(str(r) for r in model.get("reasons", [])))),
    ]
    aniso = (v.get("anisotropy") or {}).get("text")
    if aniso:
        rows.append(("Anisotropy", escape(aniso)))
    hood = (v.get("neighbourhood") or {}).get("reason")
    if hood:
        rows.append(("Neighbourhood", escape(hood)))
    search = v.get("pair_search", {})
    note = ""
    if search.get("sampled"):
        note = (f" {format_number(search.get('pairs_used'))} of about {format_number(search.get('pairs_in_reach'))} pairs in reach "
                f"used (seeded sample, seed {search.get('seed')}).")
    cap = ("Left: omnidirectional semivariogram (Matheron and Cressie-Hawkins estimates) with the fitted model; right: "
           f"directional estimates with the same model refitted per direction. Separation in metres; semivariance in "
           f"squared units of the value.{note}")
    extra = ""
    if v.get("computed_for_report"):
        extra = '<p class="muted">Computed for this report with the default lag classes.</p>'
    return (f'<section id="variogram"><h2>Variogram</h2><p class="lead">How fast the values change with distance.</p>'
            f'{_figure(figures, "variogram", cap)}{_kv(rows)}{extra}</section>')


def render(summary: dict, figures: dict) -> str:
    """The report page as one HTML string.

    Parameters
    ----------
    summary : dict
        The summary document of :func:`pointsift.report.contents.collect`.
    figures : dict
        ``{name: {"uri": data URI, "alt": text}}``.

    Returns
    -------
    str
    """
    caution = escape(summary["caution"])
    body = [
        _header(summary),
        _nav(summary),
        "<main>",
        f'<div class="caution" role="note" id="caution"><strong>Read this first.</strong> {caution}</div>',
        _run_section(summary),
        _map_section(summary, figures),
        _flagged_section(summary),
        _distribution_section(summary, figures),
        _strips_section(summary, figures),
        _local_section(summary, figures),
        _lag_pairs_section(summary, figures),
        _variogram_section(summary, figures),
        f'<footer><p>{caution}</p><p>The same numbers, machine-readable, are in the JSON summary written with '
        "<code>--summary-json</code>; the statuses, scores and reasons of every row are in the output GeoPackage.</p></footer>",
        "</main>",
    ]
    csp = ("default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'; "
           "font-src 'none'; connect-src 'none'; form-action 'none'; base-uri 'none'")
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        f'<meta http-equiv="Content-Security-Policy" content="{csp}">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        '<link rel="icon" href="data:,">'
        f"<title>{escape(summary['title'])}</title><style>{_CSS}</style></head><body>"
        + "".join(body)
        + f"<script>{_JS}</script></body></html>\n"
    )

