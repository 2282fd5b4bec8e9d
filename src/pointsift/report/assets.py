"""Styles and the small sorting script of the report page (inline; the page fetches nothing).

The layout works from a 390 px phone up: the counts wrap two by two, the
neighbourhood views stack above their reasons, and the table of points to
check becomes one block per point whose reasons take the full width.
"""

__all__ = ["CSS", "JS"]

CSS = """
:root { --ink:#1d2228; --muted:#5b6470; --line:#d9dde2; --soft:#f4f6f8; --accent:#0072B2; }
* { box-sizing: border-box; }
html { font-size: 15px; -webkit-text-size-adjust: 100%; }
body { margin:0; color:var(--ink); background:#fff; font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; line-height:1.45; }
main { max-width: 1180px; margin: 0 auto; padding: 0 18px 40px; }
header.top { background:#17324d; color:#fff; padding:12px 18px 10px; }
header.top .inner { max-width:1180px; margin:0 auto; }
header.top h1 { margin:0 0 2px; font-size:1.4rem; font-weight:650; overflow-wrap:anywhere; }
header.top p { margin:0; color:#cfdceb; font-size:.85rem; }
nav { position: sticky; top:0; z-index:5; background:#ffffffee; border-bottom:1px solid var(--line); }
nav ul { list-style:none; margin:0 auto; padding:5px 18px; display:flex; flex-wrap:wrap; gap:2px 16px; max-width:1180px; font-size:.88rem; }
nav a { color:var(--accent); text-decoration:none; }
.caution { margin:10px 0 6px; padding:6px 12px; border-left:5px solid #E69F00; background:#fff8ea; color:#3d2c00; font-size:.88rem; }
section { margin-top:24px; }
h2 { font-size:1.2rem; margin:0 0 8px; padding-bottom:4px; border-bottom:2px solid var(--soft); }
h3 { font-size:1.02rem; margin:16px 0 6px; }
p.lead { margin:4px 0 10px; color:var(--muted); }
.cards { display:grid; grid-template-columns: repeat(4, minmax(0, 1fr)); gap:8px; margin:8px 0 4px; }
.card { border:1px solid var(--line); border-radius:8px; padding:6px 10px; background:#fff; min-width:0; }
.card .count { font-size:1.55rem; font-weight:700; display:flex; align-items:center; gap:8px; }
.card .word { font-weight:600; }
.card .meaning { color:var(--muted); font-size:.8rem; }
.card.suspect { border-top:4px solid #D55E00; } .card.review { border-top:4px solid #E69F00; }
.card.ok { border-top:4px solid #0072B2; } .card.unscreened { border-top:4px solid #7f7f7f; }
.hoods { display:grid; grid-template-columns: repeat(auto-fill, minmax(min(100%, 540px), 1fr)); gap:10px; }
.hood-card { display:grid; grid-template-columns: auto minmax(0, 1fr); grid-template-areas: 'map head' 'map facts'; align-items:start; align-content:start; gap:4px 14px; border:1px solid var(--line); border-radius:8px; padding:8px; min-width:0; }
.hood-card.suspect { border-left:5px solid #D55E00; } .hood-card.review { border-left:5px solid #E69F00; }
.hood-card .facts { grid-area:facts; min-width:0; font-size:.9rem; }
.hood-card > h3 { grid-area:head; margin:0; display:flex; gap:8px; align-items:center; flex-wrap:wrap; overflow-wrap:anywhere; }
.hood-card > svg.hood { grid-area:map; }
.hood-card .facts .why { margin:4px 0 0; overflow-wrap:anywhere; }
.hood-card dl { display:grid; grid-template-columns: auto 1fr; gap:0 10px; margin:0; }
.hood-card dt { color:var(--muted); } .hood-card dd { margin:0; font-variant-numeric: tabular-nums; }
svg.hood { flex:0 0 auto; width:300px; max-width:100%; height:auto; font-size:12px; font-family:inherit; }
svg.hood text { fill:#1d2228; paint-order:stroke; stroke:#fff; stroke-width:3px; }
svg.hood text.ring, svg.hood text.north { fill:var(--muted); }
svg.hood text.own { font-weight:700; }
table { border-collapse:collapse; font-size:.9rem; }
table.kv { width:100%; }
table.kv th { text-align:left; font-weight:600; width:30%; vertical-align:top; padding:4px 10px 4px 0; color:#333; }
table.kv td { padding:4px 0; overflow-wrap:anywhere; }
table.kv tr + tr > * { border-top:1px solid var(--soft); }
table.data { width:100%; }
table.data th, table.data td { padding:5px 8px; border-bottom:1px solid var(--line); text-align:left; vertical-align:top; }
table.data td.num, table.data th.num { text-align:right; font-variant-numeric: tabular-nums; white-space:nowrap; }
table.data thead th { background:var(--soft); position:sticky; top:0; z-index:1; }
table.data tr.flag-row td { background:#fff3e0; }
.table-wrap { overflow-x:auto; max-width:100%; }
.two > div { min-width:0; }
.scroll { max-height: 620px; overflow:auto; border:1px solid var(--line); border-radius:6px; max-width:100%; }
figure { margin:8px 0 16px; }
figure img { display:block; max-width:100%; width:auto; height:auto; border:1px solid var(--line); border-radius:6px; background:#fff; }
figcaption { color:var(--muted); font-size:.86rem; margin-top:4px; }
.two { display:grid; grid-template-columns: minmax(0, 1.1fr) minmax(0, 1fr); gap:20px; align-items:start; }
pre.stem { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size:.8rem; line-height:1.25; background:var(--soft); padding:10px; border-radius:6px; overflow:auto; max-height:520px; margin:0; }
.unavailable { padding:8px 12px; background:var(--soft); border:1px dashed #aab2bc; border-radius:6px; color:#333; }
.controls { display:flex; flex-wrap:wrap; gap:8px 16px; align-items:center; margin:6px 0 8px; }
.controls input[type=search] { font:inherit; padding:5px 8px; border:1px solid #aab2bc; border-radius:5px; width:18em; max-width:100%; }
.controls select { font:inherit; padding:4px 6px; border:1px solid #aab2bc; border-radius:5px; max-width:100%; }
.controls .shown { color:var(--muted); font-size:.9rem; }
th button.sort { all:unset; cursor:pointer; font-weight:650; display:inline-flex; gap:4px; align-items:center; }
th button.sort:focus-visible { outline:2px solid var(--accent); outline-offset:2px; }
th button.sort::after { content:"\\2195"; color:#9aa3ad; font-size:.8em; }
th[aria-sort=ascending] button.sort::after { content:"\\25B2"; color:var(--ink); }
th[aria-sort=descending] button.sort::after { content:"\\25BC"; color:var(--ink); }
.status { display:inline-flex; gap:5px; align-items:center; white-space:nowrap; font-weight:600; }
svg.marker { vertical-align:middle; flex:none; }
td.reasons { min-width:22em; font-size:.86rem; overflow-wrap:anywhere; }
td.id { font-weight:600; white-space:nowrap; }
details.method { margin:14px 0; border:1px solid var(--line); border-radius:8px; padding:6px 12px; }
details.method > summary { cursor:pointer; font-size:1.1rem; font-weight:650; padding:4px 0; }
details > summary { cursor:pointer; color:var(--accent); }
ol.key { list-style:none; padding:0; margin:6px 0; columns: 10em auto; column-gap:1.2em; font-size:0.9rem; }
ol.key li { break-inside:avoid; overflow-wrap:anywhere; } ol.key b { display:inline-block; min-width:2.2em; }
footer { margin-top:30px; padding-top:10px; border-top:1px solid var(--line); color:var(--muted); font-size:.85rem; }
.muted { color:var(--muted); }
code { overflow-wrap:anywhere; }
@media (max-width: 900px) { .two { grid-template-columns: 1fr; } }
@media (max-width: 640px) {
  main { padding: 0 10px 30px; } header.top { padding:10px; } nav ul { padding:4px 10px; gap:2px 12px; }
  .cards { grid-template-columns: repeat(2, minmax(0, 1fr)); }
  .card .meaning { display:none; }
  svg.hood { width:100%; max-width:340px; }
  .hood-card { grid-template-columns: minmax(0, 1fr); grid-template-areas: 'head' 'map' 'facts'; }
  #flagged-table thead { display:none; }
  #flagged-table, #flagged-table tbody { display:block; }
  #flagged-table tr { display:grid; grid-template-columns: auto minmax(0, 1fr) auto; border-bottom:1px solid var(--line); padding:4px 0; }
  #flagged-table td { border:0; padding:2px 6px; }
  #flagged-table td.id { white-space:normal; overflow-wrap:anywhere; }
  #flagged-table td.reasons { grid-column: 1 / -1; min-width:0; }
  #flagged-table td.col-expected, #flagged-table td.col-score, #flagged-table td.col-value { grid-column: auto; }
  table.kv th { width:40%; }
  table.data th { white-space:normal; }
  table.data { font-size:.8rem; } table.data th, table.data td { padding:4px 5px; }
}
@media print { nav { display:none; } .scroll { max-height:none; overflow:visible; } header.top { background:#fff; color:#000; } header.top p { color:#333; } details { display:block; } }
"""

# Sorting and filtering of the tables marked data-sortable. Cells carry the
# sort key in data-sort (numbers as plain text, empty for missing values).
JS = r"""
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
