"""The method sections of the report page: distribution, local evidence, variogram, strips, lag pairs.

Each function renders one section from the summary document (numbers) and
the figures; the strips and lag pairs, long tables and a dozen panels each,
are collapsed (``<details>``) so the points to check stay on top.
"""

from __future__ import annotations

import math
from html import escape

from ..vocabulary import direction_words
from .numbers import format_length, format_number, people_text, plural

__all__ = ["distribution_section", "local_section", "variogram_section", "strips_section", "lag_pairs_section",
           "figure_html", "num_cell", "text", "unavailable"]

_NUM = ' class="num"'
_FLAG_ROW = ' class="flag-row"'


def _sort_key(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return escape(str(value), quote=True)


def num_cell(value, digits: int = 4, css: str = "") -> str:
    """A table cell with a number for people, every digit in its tooltip and sort key."""
    title = f' title="{repr(value)}"' if isinstance(value, float) else ""
    cls = f"num {css}".strip()
    return f'<td class="{cls}" data-sort="{_sort_key(value)}"{title}>{format_number(value, digits)}</td>'


def text(value) -> str:
    """Escaped text, ``n/a`` when empty."""
    return "n/a" if value is None or value == "" else escape(str(value))


def figure_html(figures: dict, key: str, caption: str) -> str:
    """An inline figure with its caption, or a note that it is not available."""
    item = figures.get(key)
    if item is None:
        return f'<p class="unavailable">Figure not available: {escape(key)}.</p>'
    return (f'<figure><img src="{item["uri"]}" alt="{escape(item["alt"], quote=True)}" loading="eager">'
            f"<figcaption>{caption}</figcaption></figure>")


def unavailable(summary: dict, key: str) -> str:
    """The section's own note when it could not be made."""
    for section in summary["sections"]:
        if section["id"] == key and not section["available"]:
            return f'<p class="unavailable">{escape(section["note"] or "Not available.")}</p>'
    return ""


def _sortable(table_id: str, cols, rows_html: str) -> str:
    ths = "".join(f'<th scope="col" data-type="{t}"{_NUM if t == "number" else ""}>'
                  f'<button type="button" class="sort">{label}</button></th>' for _, t, label in cols)
    return (f'<div class="scroll"><table class="data" id="{table_id}" data-sortable><thead><tr>{ths}</tr></thead>'
            f"<tbody>{rows_html}</tbody></table></div>")


_SUMMARY_LABELS = [
    ("n", "values used"), ("n_missing", "values left out (missing)"), ("mean", "mean"), ("median", "median"),
    ("sd", "standard deviation (n - 1)"), ("min", "minimum"), ("p05", "5th percentile"), ("p25", "25th percentile"),
    ("p75", "75th percentile"), ("p95", "95th percentile"), ("max", "maximum"), ("iqr", "interquartile range"),
    ("mad", "median absolute deviation"), ("robust_sd_iqr", "robust sd, IQR / 1.349"),
    ("robust_sd_mad", "robust sd, 1.4826 x MAD"), ("skewness", "skewness (adjusted G1)"),
    ("kurtosis", "excess kurtosis (adjusted G2)"),
]


def _far_text(d: dict) -> str:
    fences = d["far_fences"]
    parts = []
    for word, key, side in (("LO", "low", "below"), ("HI", "high", "above")):
        far = d["histogram"][key]
        if far["n"]:
            bound = fences[key]
            listed = ", ".join(format_number(v, 6) for v in far["values"])
            more = f" and {far['n'] - len(far['values']):,} more" if far["n"] > len(far["values"]) else ""
            parts.append(f"<li><b>{word}</b>: {plural(far['n'], 'value')} {side} {format_number(bound)}: {listed}{more}</li>")
    if not parts:
        return ""
    return (f"<p>Far values, set aside from the histogram and the stem-and-leaf display (beyond the quartiles by "
            f"{format_number(fences['iqr_multiple'])} interquartile ranges, Tukey's far fences):</p><ul>{''.join(parts)}</ul>")


def distribution_section(summary: dict, figures: dict) -> str:
    """Histogram with the far values apart, summary table with and without suspects, stem-and-leaf."""
    d = summary["distribution"]
    everything, kept = d["all"], d.get("without_suspects")
    head = '<tr><th scope="col">figure</th><th scope="col" class="num">all values</th>'
    if kept is not None:
        head += f'<th scope="col" class="num">without the {plural(d["n_suspects"], "suspect")}</th>'
    body = []
    for key, label in _SUMMARY_LABELS:
        cells = num_cell(everything.get(key), 5) + (num_cell(kept.get(key), 5) if kept is not None else "")
        body.append(f'<tr><th scope="row">{escape(label)}</th>{cells}</tr>')
    table = (f'<div class="table-wrap"><table class="data" id="summary-table"><thead>{head}</thead>'
             f'<tbody>{"".join(body)}</tbody></table></div>')
    shift = d.get("shift")
    shift_text = ""
    if shift is not None and kept is not None and d["n_suspects"]:
        shift_text = (f"<p>Leaving out the suspects moves the mean by {format_number(shift['mean'])} "
                      f"({format_number(shift['mean_in_sd'], 3)} sd) and the standard deviation by "
                      f"{format_number(shift['sd'])} (ratio {format_number(shift['sd_ratio'], 3)}).</p>")
    hist = d["histogram"]
    value = escape(str(summary["input"].get("value_column")))
    caption = (f"Histogram of {value}: {plural(sum(hist['counts']), 'value')} within the far fences, bin width "
               f"{format_number(hist['bin_width'])} ({escape(hist['rule'])}). Counts per bin are in the JSON summary.")
    unscreened = d.get("unscreened_reasons") or {}
    un = ""
    if unscreened:
        un = "<h3>Rows without a usable value or location</h3><ul>" + "".join(
            f"<li>{v:,} &times; {escape(k)}</li>" for k, v in unscreened.items()) + "</ul>"
    trend = d.get("trend") or {}
    trend_text = ""
    if trend:
        trend_text = f"<p>Regional trend: {text(trend.get('method'))}"
        if trend.get("variance_explained") is not None:
            trend_text += f", explains {100 * trend['variance_explained']:.1f} % of the variance"
        if trend.get("note"):
            trend_text += f"; {escape(people_text(trend['note']))}"
        trend_text += ".</p>"
    return (
        '<section id="distribution"><h2>Distribution</h2>'
        f'<div class="two"><div>{figure_html(figures, "histogram", caption)}{_far_text(d)}{shift_text}{trend_text}</div>'
        f"<div>{table}</div></div>"
        f'<h3>Stem-and-leaf display</h3><pre class="stem" id="stem-leaf">{escape(d["stem_leaf"]["text"])}</pre>{un}</section>'
    )


def local_section(summary: dict, figures: dict) -> str:
    """Residual map, neighbour-mean scatter and the quadrant counts."""
    local = summary.get("local_evidence") or {}
    if not local.get("available"):
        return f'<section id="local"><h2>Local evidence</h2>{unavailable(summary, "local")}</section>'
    rz = local["residual_z"]
    t = summary.get("thresholds") or {}
    lead = (f'<p class="lead">Each value is predicted from its neighbours by a robust local plane; the difference, in robust '
            f"standard deviations, is the standardized local residual. {plural(rz['judged'], 'point')} judged, from "
            f"{format_number(rz['min'], 3)} to {format_number(rz['max'], 3)} sd; {format_number(rz['beyond_review_z'])} reach "
            f"{format_number(t.get('review_z'))} and {format_number(rz['beyond_suspect_z'])} reach "
            f"{format_number(t.get('suspect_z'))} (the review and suspect thresholds).</p>")
    rm = local["residual_map"]
    cap = "Standardized local residual of every judged point; larger markers are farther from the prediction."
    if rm.get("sample_seed") is not None:
        cap += f" {rm['drawn']:,} of {rm['points']:,} points drawn: a seeded sample (seed {rm['sample_seed']}) that keeps every flagged point."
    sc = local["neighbour_scatter"]
    qc, sig = sc["quadrant_counts"], sc["significant_counts"]
    rows = "".join(f'<tr><th scope="row">{escape(w)}</th>{num_cell(qc[w])}{num_cell(sig[w])}</tr>' for w in qc)
    qtable = (f'<table class="data" id="quadrant-table"><thead><tr><th scope="col">quadrant</th>'
              f'<th scope="col" class="num">points</th><th scope="col" class="num">significant (adjusted p &le; '
              f"{format_number(sc['fdr'])})</th></tr></thead><tbody>{rows}</tbody></table>")
    qtable = f'<div class="table-wrap">{qtable}</div>'
    cap2 = (f"Each standardized value ({escape(local['values'])}) against the mean of its neighbours' standardized values. "
            f"High among low and low among high are the spatial outliers. The dashed line has slope "
            f"{format_number(sc['slope'], 3)} (global Moran's I for these neighbour weights).")
    if sc.get("beyond_frame"):
        cap2 += f" {plural(sc['beyond_frame'], 'point')} beyond the frame (which spans 99.5 % of the points) are drawn hollow on its edge."
    if sc.get("sample_seed") is not None:
        cap2 += f" {sc['drawn']:,} of {sc['points']:,} points drawn (seeded sample, every flagged point kept); counts are of all points."
    return (f'<section id="local"><h2>Local evidence</h2>{lead}{figure_html(figures, "residual_map", cap)}'
            f'<div class="two"><div>{figure_html(figures, "neighbour_scatter", cap2)}</div><div><h3>Quadrant counts</h3>'
            f"{qtable}</div></div></section>")


def variogram_section(summary: dict, figures: dict) -> str:
    """The fitted model, whether it is trustworthy, the figure."""
    v = summary.get("variogram") or {}
    if not v.get("available"):
        return f'<section id="variogram"><h2>Variogram</h2>{unavailable(summary, "variogram")}</section>'
    model = v.get("model", {})
    rows = [("Values", escape(v.get("values", ""))),
            ("Model", f"{text(model.get('model'))}, fitted to the {escape(str(v.get('fit_estimator', '')).replace('_', '-'))} "
                      "estimates by weighted least squares"),
            ("Nugget", format_number(model.get("nugget"))), ("Partial sill", format_number(model.get("partial_sill"))),
            ("Sill", format_number(model.get("sill"))), ("Practical range", format_length(model.get("practical_range"))),
            ("Pair-weighted R\u00b2", format_number(model.get("r_squared"), 3)),
            ("Trustworthy", "yes" if model.get("trustworthy") else "no"),
            ("Why", escape(people_text("; ".join(str(r) for r in model.get("reasons", [])))))]
    if (v.get("anisotropy") or {}).get("text"):
        rows.append(("Anisotropy", escape(people_text(v["anisotropy"]["text"]))))
    if (v.get("neighbourhood") or {}).get("reason"):
        rows.append(("Neighbourhood", escape(people_text(v["neighbourhood"]["reason"]))))
    body = "".join(f'<tr><th scope="row">{escape(k)}</th><td>{val}</td></tr>' for k, val in rows)
    search = v.get("pair_search", {})
    note = (f" {format_number(search.get('pairs_used'))} of about {format_number(search.get('pairs_in_reach'))} pairs in "
            f"reach used (seeded sample, seed {search.get('seed')})." if search.get("sampled") else "")
    cap = ("Top: all directions (Matheron and Cressie-Hawkins estimates) with the fitted model; bottom: by direction, "
           f"the same model refitted per direction.{note}")
    return (f'<section id="variogram"><h2>Variogram</h2><p class="lead">How fast the values change with distance; the '
            f"same model the screen used.</p><div class=\"two\"><div>{figure_html(figures, 'variogram', cap)}</div>"
            f'<div><table class="kv" id="variogram-model">{body}</table></div></div></section>')


def strips_section(summary: dict, figures: dict) -> str:
    """Strip profiles and the table of every strip, collapsed."""
    s = summary["strips"]
    widths = "; ".join(f"{escape(direction_words(float(k)))}: {format_length(w)} wide" for k, w in s["widths_m"].items())
    lead = (f'<p class="lead">The area is cut into parallel strips ({widths}). In each strip the mean and the median '
            f"are compared: a single wild value pulls the mean away from the median. The difference, divided by a robust "
            f"spread and calibrated for the strip's own number of points, is <i>u</i>; a strip is flagged when |u| &gt; "
            f"{format_number(s['flag_u'])}. Strips with fewer than {s['min_n']} points are not judged.</p>")
    caption = "Strip means (solid) and medians (dashed) across the area, 5-95 % range shaded; flagged strips ringed."
    cols = [("direction", "text", "Strips"), ("strip", "number", "Strip"), ("n", "number", "n"), ("mean", "number", "Mean"),
            ("median", "number", "Median"), ("iqr", "number", "IQR"), ("u", "number", "u"), ("flagged", "text", "Flagged"),
            ("extreme_id", "text", "Extreme point"), ("extreme_value", "number", "Extreme value"), ("note", "text", "Note")]
    body = []
    for r in s["rows"]:
        body.append(f"<tr{_FLAG_ROW if r['flagged'] else ''}>"
                    f"<td data-sort=\"{format_number(r['direction'])}\">{escape(direction_words(r['direction']))}</td>"
                    + num_cell(r["strip"]) + num_cell(r["n"]) + num_cell(r["mean"], 5) + num_cell(r["median"], 5)
                    + num_cell(r["iqr"]) + num_cell(r["u"], 3)
                    + f"<td>{'yes' if r['flagged'] else ''}</td><td>{text(r['extreme_id']) if r['n'] else ''}</td>"
                    + num_cell(r["extreme_value"], 5) + f"<td>{escape(r['note'])}</td></tr>")
    return (f'<section id="strips"><details class="method"><summary>Strips: {plural(s["flagged"], "strip")} flagged'
            f"</summary>{lead}{figure_html(figures, 'strips', caption)}{_sortable('strips-table', cols, ''.join(body))}"
            "</details></section>")


def lag_pairs_section(summary: dict, figures: dict) -> str:
    """h-scatterplot panels per direction, culprits and the flagged pairs, collapsed."""
    lp = summary.get("lag_pairs") or {}
    if not lp.get("available"):
        return f'<section id="lag_pairs"><h2>Lag pairs</h2>{unavailable(summary, "lag_pairs")}</section>'
    search = lp.get("pair_search", {})
    sampled = (f" The pairs in reach ({format_number(search.get('pairs_in_reach'))}) exceed the budget: a seeded sample "
               f"(seed {search.get('seed')}) of {format_number(search.get('pairs_used'))} pairs is used."
               if search.get("sampled") else "")
    directions = lp.get("directions", [])
    lead = (f'<p class="lead">Pairs of points at about the same separation and in about the same direction should have '
            f"similar {escape(lp['values'])}. Each panel plots the value at one end against the other for one lag class; "
            f"a pair outside the dashed band ({format_number(lp.get('threshold'))} robust scales) is out of line. "
            f"{plural(len(directions), 'direction')} (&plusmn;{format_number(lp.get('angle_tolerance'))}&deg;), first lag "
            f"{format_length(lp.get('first_lag'))}; {format_number(lp.get('pairs_screened'))} pairs screened, "
            f"{format_number(lp.get('pairs_flagged'))} out of line.{sampled}</p>")
    culprits = lp.get("culprit_ids") or []
    culprit_text = ("<p>Points in most of the out-of-line pairs around them (the likely culprits): "
                    + (", ".join(escape(c) for c in culprits) if culprits else "none") + ".</p>")
    figs = "".join(figure_html(figures, f["figure"], f"{escape(f['name'])} pairs (azimuth {escape(f['direction'])}&deg;): "
                               "value at the tail against value at the head, one panel per lag class; the solid line "
                               "is equality, the dashed band the allowed spread, diamonds the pairs out of line.")
                   for f in lp.get("figures", []))
    pairs = lp.get("flagged_pairs") or []
    table = ""
    if pairs:
        cols = [("tail_id", "text", "Tail"), ("head_id", "text", "Head"), ("tail_value", "number", "Tail value"),
                ("head_value", "number", "Head value"), ("difference", "number", "Difference"),
                ("separation", "number", "Separation (m)"), ("direction", "text", "Direction (\u00b0)"),
                ("lag", "number", "Lag"), ("pair_z", "number", "How far out"), ("culprit_id", "text", "Likely culprit")]
        shown = sorted(pairs, key=lambda p: -abs(p["pair_z"] or 0.0))
        total = int(lp.get("pairs_flagged") or len(pairs))
        body = "".join("<tr>" + "".join(num_cell(p[k], 5) if t == "number" else f"<td>{text(p[k])}</td>"
                                        for k, t, _ in cols) + "</tr>" for p in shown)
        title = (f"Out-of-line pairs ({total:,})" if len(shown) == total else
                 f"The {len(shown):,} farthest out of {total:,} out-of-line pairs (all of them are in the "
                 "GeoPackage's lag_pairs layer)")
        table = f"<h3>{title}</h3>" + _sortable("pairs-table", cols, body)
    return (f'<section id="lag_pairs"><details class="method"><summary>Lag pairs: '
            f"{plural(int(lp.get('pairs_flagged') or 0), 'pair')} out of line, {plural(len(culprits), 'likely culprit')}"
            f"</summary>{lead}{culprit_text}{figs}{table}</details></section>")
