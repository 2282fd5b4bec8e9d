"""The report of ``pointsift campaigns``: the change map and the flagged wells' series, on the report page.

Each section is a function of a :class:`~pointsift.campaigns.CampaignResult`
returning HTML and its figures (inline PNG data URIs), so the page works
offline and alone. :func:`campaign_report_html` puts them on the same page as
the screen report (:func:`pointsift.report.html.page`: its header, counts
cards, styles, phone-width rules and Content-Security-Policy), with the run
record and the caution; every number on it comes from the result's run record
and layers. :func:`write_campaign_report` writes it through
:func:`pointsift.io.write_text` (atomic, never over an input).
"""

from __future__ import annotations

from html import escape
from pathlib import Path

import numpy as np

from ..errors import OutputError

__all__ = ["change_map_section", "series_section", "campaign_report_html", "campaign_summary", "write_campaign_report",
           "plot_change_map", "plot_flagged_series"]

_STATUS_COLOURS = {"suspect": "#b2182b", "review": "#e08214", "ok": "#4d4d4d", "unscreened": "#bdbdbd"}


def _data_uri(fig) -> str:
    import matplotlib.pyplot as plt

    from .figures import figure_data_uri

    uri = figure_data_uri(fig)
    plt.close(fig)
    return uri


def _last_pair(result):
    changes = result.changes
    if len(changes) == 0 or "pair" not in changes:
        return None
    consecutive = changes[changes.pair == "consecutive"]
    if len(consecutive) == 0:
        return None
    labels = list(result.campaign_labels)
    last = max(consecutive.to_campaign.unique(), key=labels.index)
    at_last = consecutive[consecutive.to_campaign == last]
    first = at_last.from_campaign.value_counts().index[0]
    return at_last[at_last.from_campaign == first], first, last


def plot_change_map(pair, first: str, last: str, review_z: float, crs=None):
    """Map of each well's change between two campaigns; wells whose change is out of line are ringed.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    x = pair.geometry.x.to_numpy()
    y = pair.geometry.y.to_numpy()
    change = pair["change"].to_numpy(dtype=float)
    z = pair["change_z"].to_numpy(dtype=float)
    fig, ax = plt.subplots(figsize=(7.5, 6.0))
    limit = float(np.nanpercentile(np.abs(change), 98)) if np.isfinite(change).any() else 1.0
    limit = limit if limit > 0 else 1.0
    dots = ax.scatter(x, y, c=change, cmap="RdBu", vmin=-limit, vmax=limit, s=22, edgecolors="none")
    out = np.isfinite(z) & (np.abs(z) >= review_z)
    ax.scatter(x[out], y[out], s=90, facecolors="none", edgecolors="black", linewidths=1.2,
               label=f"change out of line with the neighbours (|z| >= {review_z:g})")
    for xi, yi, name in zip(x[out], y[out], pair["well_id"].to_numpy()[out]):
        ax.annotate(str(name), (xi, yi), xytext=(4, 4), textcoords="offset points", fontsize=7)
    fig.colorbar(dots, ax=ax, shrink=0.8, label=f"change {first} to {last} (later minus earlier)")
    if crs is not None and getattr(crs, "is_geographic", False):
        ax.set_aspect(1.0 / np.cos(np.radians(np.nanmean(y))))
        ax.set_xlabel("longitude")
        ax.set_ylabel("latitude")
    else:
        ax.set_aspect("equal")
        ax.set_xlabel("x")
        ax.set_ylabel("y")
    if out.any():
        ax.legend(loc="lower left", fontsize=8)
    ax.set_title(f"Change between {first} and {last}: {len(pair)} wells measured in both")
    return fig


def change_map_section(result) -> tuple[str, dict]:
    """HTML of the change map between the last two campaigns, and its figure."""
    got = _last_pair(result)
    if got is None:
        return "<section id='change-map'><h2>Change between the last two campaigns</h2><p>No change could be screened.</p></section>", {}
    pair, first, last = got
    review_z = result.run_info["parameters"]["screen"]["review_z"]
    uri = _data_uri(plot_change_map(pair, first, last, review_z, crs=result.changes.crs))
    z = pair["change_z"].to_numpy(dtype=float)
    text = (f"<p>{len(pair)} wells measured in {escape(first)} and {escape(last)}; median change "
            f"{np.nanmedian(pair['change']):.3g}; {int(np.sum(np.abs(z) >= review_z))} changes out of line with the "
            "neighbours' changes (ringed and named). A regional rise or fall colours the whole map alike and rings nothing.</p>")
    html = (f"<section id='change-map'><h2>Change between the last two campaigns</h2>{text}"
            f"<figure><img alt='Map of each well's change between the last two campaigns' src='{uri}'>"
            "<figcaption>Change of each well, coloured; out-of-line changes ringed</figcaption></figure></section>")
    return html, {"change_map": uri}


def plot_flagged_series(result, wells: list, max_panels: int = 12):
    """Small multiples: each flagged well's readings over its neighbours' median series.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    s = result.series
    matrix, years = s["matrix"], s["campaign_year"]
    names = list(s["well_names"])
    status = result.readings["reading_status"].to_numpy()
    wells = wells[:max_panels]
    cols = 3 if len(wells) > 4 else max(1, len(wells))
    rows = int(np.ceil(len(wells) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(3.3 * cols, 2.4 * rows), squeeze=False)
    for ax in axes.ravel()[len(wells):]:
        ax.set_visible(False)
    for ax, well in zip(axes.ravel(), wells):
        w = names.index(well)
        codes = np.flatnonzero(matrix[w] >= 0)
        rws = matrix[w, codes]
        t = years[codes]
        ax.plot(t, s["neighbour_level"][rws], color="#9e9e9e", lw=1.2, label="neighbours' median")
        ax.plot(t, s["values"][rws], color="#2b2b2b", lw=0.8, marker="o", ms=2.5, label="this well")
        for word in ("review", "suspect"):
            hit = status[rws] == word
            ax.scatter(t[hit], s["values"][rws][hit], color=_STATUS_COLOURS[word], s=28, zorder=3, label=word)
        ax.set_title(str(well), fontsize=8)
        ax.tick_params(labelsize=7)
    handles, labels = axes.ravel()[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="lower center", ncol=4, fontsize=8, frameon=False)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    return fig


def series_section(result, max_panels: int = 12) -> tuple[str, dict]:
    """HTML of the flagged wells' series (strongest first), and its figure."""
    readings = result.readings
    flagged = readings[readings.reading_status == "suspect"]
    if len(flagged) == 0:
        return "<section id='series'><h2>Flagged wells' series</h2><p>No reading is suspect.</p></section>", {}
    id_column = result.run_info["parameters"]["screen"]["id"]
    order = flagged.assign(_w=flagged[id_column].astype(str)).groupby("_w").reading_score.max().sort_values(ascending=False)
    wells = list(order.index)
    uri = _data_uri(plot_flagged_series(result, wells, max_panels))
    shown = min(len(wells), max_panels)
    html = (f"<section id='series'><h2>Flagged wells' series</h2><p>{len(wells)} wells have a suspect reading; "
            f"the {shown} with the strongest evidence are drawn: the well's representative readings (dark) over its "
            "neighbours' median series (grey: each neighbour's reading minus its own median, the median of those, "
            "put on this well's median level). A reading that leaves the grey line alone is what the history and "
            "change screens look for.</p>"
            f"<figure><img alt=\"Series of the flagged wells over their neighbours' median\" src='{uri}'>"
            "<figcaption>Each flagged well's readings (dark, suspect and review marked) over its neighbours' median "
            "series (grey)</figcaption></figure></section>")
    return html, {"flagged_series": uri}


def campaign_summary(result) -> dict:
    """What the page shows about the run, from the result's run record only (plain values)."""
    info = result.run_info
    record = [(key, info.get(key)) for key in ("input_path", "rows", "wells", "campaigns", "campaigns_screened",
                                               "campaign_rule", "representative_readings", "extra_readings",
                                               "change_span_campaigns", "moved_wells", "work_crs", "timings_s")]
    return {"title": "Repeated campaigns: readings screened", "command": info.get("command", "campaigns"),
            "created": info.get("created"), "pointsift_version": (info.get("versions") or {}).get("pointsift", ""),
            "counts": dict(result.counts), "caution": info["caution"], "record": record,
            "versions": info.get("versions") or {}}


def _run_section(summary: dict, anchor: str = "run", title: str = "About the run") -> str:
    from .html import key_values

    rows = [(k, escape(", ".join(map(str, v)) if isinstance(v, list) else str(v))) for k, v in summary["record"]]
    versions = ", ".join(f"{escape(k)} {escape(str(v))}" for k, v in summary["versions"].items())
    return (f'<section id="{anchor}"><h2>{escape(title)}</h2>{key_values(rows)}'
            f"<details><summary>pointsift and library versions</summary><p>{versions}</p></details></section>")


def _readings_section(summary: dict) -> str:
    """Readings per status over all campaigns (the final verdict of each reading)."""
    counts = summary["counts"]
    total = sum(counts.values())
    rows = "".join(f'<tr><th scope="row">{escape(word)}</th><td class="num">{n:,}</td>'
                   f'<td class="num">{100.0 * n / total if total else 0:.1f} %</td></tr>' for word, n in counts.items())
    return (f'<section id="readings"><h2>Readings per status, all campaigns</h2><table class="kv">{rows}</table>'
            f'<p class="muted">{total:,} readings: the status of each combines its campaign screen, its change against '
            "the neighbours' changes and its own history (the layer readings of the GeoPackage).</p></section>")


def _latest_heading(label: str) -> str:
    return (f'<section id="latest"><h2>The latest campaign, {escape(label)}, screened on its own</h2>'
            f"<p>The sections below are the single-campaign screen of {escape(label)}, as "
            "<code>pointsift screen</code> shows it: its statuses are that screen's, before the change and history "
            "evidence (the readings layer holds the final ones), and row numbers count its representative "
            "readings.</p></section>")


def campaign_report_html(result) -> str:
    """The whole page: readings per status, the change map, the flagged wells' series, then the latest
    campaign's own screen report (counts, points to check, map, ...), the run record and the caution.

    Without a screened campaign the page has the campaign sections only, on the same page frame.
    """
    from ..config import ReportConfig
    from .html import counts_section, header, page

    summary = campaign_summary(result)
    change_html, _ = change_map_section(result)
    series_html, _ = series_section(result)
    extra = [("readings", "Readings", _readings_section(summary)), ("change-map", "Change map", change_html),
             ("series", "Flagged wells' series", series_html)]
    if result.latest_screen is not None:
        extra.append(("campaign-run", "The campaigns",
                      _run_section(summary, "campaign-run", "How the campaigns were formed and screened")))
        from . import build_report

        extra.append(("latest", "Latest campaign", _latest_heading(result.latest_campaign)))
        title = f"Repeated campaigns: readings screened (latest campaign {result.latest_campaign})"
        return build_report(result.latest_screen, run_info=result.latest_screen.run_info,
                            config=ReportConfig(report_title=title), extra_sections=extra).html
    caution = escape(summary["caution"])
    nav = ('<nav aria-label="Sections"><ul>' + "".join(f'<li><a href="#{k}">{escape(t)}</a></li>' for k, t, _ in extra)
           + '<li><a href="#run">About the run</a></li></ul></nav>')
    body = [header(summary), nav, "<main>",
            f'<div class="caution" role="note" id="caution"><strong>Read this first.</strong> {caution}</div>',
            counts_section(summary), *(html for _, _, html in extra), _run_section(summary),
            f"<footer><p>{caution}</p><p>The status, score and reasons of every reading are in the output "
            "GeoPackage (layers readings, wells, changes).</p></footer>", "</main>"]
    return page(summary["title"], body)


def write_campaign_report(result, path, *, overwrite: bool = False, protect: tuple = ()) -> Path:
    """Write the campaign report page atomically (never over an input or another output)."""
    from ..io import check_output_paths, write_text

    target = Path(path)
    check_output_paths([("The report", target)], [p for p in protect if p])
    if target.exists() and not overwrite:
        raise OutputError(f"{str(target)!r} exists. Pass --overwrite to replace it, or choose another name.")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"Folder {str(folder)!r} for {str(target)!r} does not exist. Create it first or choose another path.")
    return write_text(target, campaign_report_html(result))
