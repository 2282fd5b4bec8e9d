"""``pointsift screen``: screen one input into one GeoPackage."""

from __future__ import annotations

import click

from ..terminal import echo
from ..vocabulary import FLAGGED, REVIEW, SUSPECT, UNSCREENED
from .options import config_from_options, output_options, pop_table_values, report_config_from_options, table_options

__all__ = ["screen", "check_report_paths", "check_outputs", "CAUTION_LINE"]

#: One line of caution on the terminal (the full text is in the output's run_info and layer description).
CAUTION_LINE = ("Caution: flags are screening aids, not determinations; check field records and follow local "
                "regulations and licensed professional practice before changing or discarding data.")


def _echo_result(result, top: int = 10) -> None:
    counts = result.counts
    total = sum(counts.values())
    echo(
        f"Screened {total} rows: {counts['suspect']} suspect, {counts['review']} review, "
        f"{counts['ok']} ok, {counts['unscreened']} unscreened."
    )
    info = result.run_info
    echo(f"Distances in {info['work_crs_name']} ({info['work_crs']}).")
    for note in info.get("notes", []):
        if not note.startswith("Distances computed in"):
            echo(f"Note: {note}")
    frame = result.frame
    flagged = frame[frame["screen_status"].isin(FLAGGED)]
    if len(flagged):
        status_rank = flagged["screen_status"].map({SUSPECT: 0, REVIEW: 1})
        order = flagged.assign(_rank=status_rank).sort_values(["_rank", "screen_score"], ascending=[True, False]).head(top)
        ids = result.prepared.ids
        echo(f"Strongest flags (of {len(flagged)}):")
        for row, item in order.iterrows():
            position = frame.index.get_loc(row)
            echo(f"  {item['screen_status']:<8} {ids[position]}: {item['screen_reasons']}")
    unscreened = frame[frame["screen_status"] == UNSCREENED]
    if len(unscreened):
        reasons = unscreened["screen_reasons"].str.replace(r"'[^']*'", "'...'", regex=True).value_counts().head(5)
        echo("Unscreened, by reason:")
        for text, count in reasons.items():
            echo(f"  {count} x {text}")


@click.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@table_options("screen")
@output_options("Output GeoPackage (.gpkg).", out_required=True)
@click.pass_context
def screen(ctx, input_path, out_path, overwrite, report_path=None, summary_json_path=None, **options):
    """Screen INPUT (GeoPackage, shapefile, CSV or GeoParquet) and write OUTPUT.gpkg
    with every input row plus screen_status, screen_score and screen_reasons."""
    from ..run import screen_file

    where = pop_table_values(options, None)
    report_config = report_config_from_options(options)
    config = config_from_options(options)
    check_outputs(input_path, [("--out", out_path), ("--report", report_path), ("--summary-json", summary_json_path)], overwrite)
    run = screen_file(input_path, out_path, config, layer=where["layer"], x=where["x"], y=where["y"], overwrite=overwrite,
                      report_path=report_path, summary_json_path=summary_json_path, report_config=report_config)
    if not ctx.obj.get("quiet"):
        _echo_result(run.result)
        echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")
        for path in run.extra_outputs.values():
            echo(f"Wrote {path}.")
        echo(CAUTION_LINE)


def check_report_paths(report_path, summary_json_path, overwrite: bool) -> None:
    """Refuse an existing report or summary without --overwrite, or one without a folder (see :func:`check_outputs`)."""
    check_outputs(None, [("--report", report_path), ("--summary-json", summary_json_path)], overwrite)


def check_outputs(input_path, outputs, overwrite: bool, *, figures=()) -> None:
    """Refuse, before any work, an output that is a file of the input (a shapefile's side
    files too), another output of the run, or exists without --overwrite (every output alike)."""
    from ..io import check_output_paths

    outputs = [(option, path) for option, path in outputs if path is not None]
    inputs = [input_path] if input_path is not None else []
    check_output_paths(outputs + list(figures), inputs)
    check_output_paths(outputs, inputs, overwrite=overwrite)
