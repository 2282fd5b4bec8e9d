"""``pointsift screen``: screen one input into one GeoPackage."""

from __future__ import annotations

import os

import click

from ..errors import ConfigError
from ..vocabulary import FLAGGED, REVIEW, SUSPECT, UNSCREENED
from .options import config_from_options, pop_table_values, table_options

__all__ = ["screen", "check_report_paths"]


def _echo_result(result, top: int = 10) -> None:
    counts = result.counts
    total = sum(counts.values())
    click.echo(
        f"Screened {total} rows: {counts['suspect']} suspect, {counts['review']} review, "
        f"{counts['ok']} ok, {counts['unscreened']} unscreened."
    )
    info = result.run_info
    click.echo(f"Distances in {info['work_crs_name']} ({info['work_crs']}).")
    for note in info.get("notes", []):
        if not note.startswith("Distances computed in"):
            click.echo(f"Note: {note}")
    frame = result.frame
    flagged = frame[frame["screen_status"].isin(FLAGGED)]
    if len(flagged):
        status_rank = flagged["screen_status"].map({SUSPECT: 0, REVIEW: 1})
        order = flagged.assign(_rank=status_rank).sort_values(["_rank", "screen_score"], ascending=[True, False]).head(top)
        ids = result.prepared.ids
        click.echo(f"Strongest flags (of {len(flagged)}):")
        for row, item in order.iterrows():
            position = frame.index.get_loc(row)
            click.echo(f"  {item['screen_status']:<8} {ids[position]}: {item['screen_reasons']}")
    unscreened = frame[frame["screen_status"] == UNSCREENED]
    if len(unscreened):
        reasons = unscreened["screen_reasons"].str.replace(r"'[^']*'", "'...'", regex=True).value_counts().head(5)
        click.echo("Unscreened, by reason:")
        for text, count in reasons.items():
            click.echo(f"  {count} x {text}")


@click.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@table_options("screen")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), help="Output GeoPackage (.gpkg).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
@click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False), help="Also write a self-contained HTML report (works offline).")
@click.option("--summary-json", "summary_json_path", default=None, type=click.Path(dir_okay=False), help="Also write the report's numbers as JSON.")
@click.pass_context
def screen(ctx, input_path, out_path, overwrite, report_path=None, summary_json_path=None, **options):
    """Screen INPUT (GeoPackage, shapefile, CSV or GeoParquet) and write OUTPUT.gpkg
    with every input row plus screen_status, screen_score and screen_reasons."""
    from ..run import screen_file

    where = pop_table_values(options, None)
    config = config_from_options(options)
    check_report_paths(report_path, summary_json_path, overwrite)
    run = screen_file(input_path, out_path, config, layer=where["layer"], x=where["x"], y=where["y"], overwrite=overwrite,
                      report_path=report_path, summary_json_path=summary_json_path)
    if not ctx.obj.get("quiet"):
        _echo_result(run.result)
        click.echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")
        for path in run.extra_outputs.values():
            click.echo(f"Wrote {path}.")


def check_report_paths(report_path, summary_json_path, overwrite: bool) -> None:
    """Refuse to replace an existing report or summary without --overwrite (before any work is done)."""
    for option, path in (("--report", report_path), ("--summary-json", summary_json_path)):
        if path is not None and os.path.exists(path) and not overwrite:
            raise ConfigError(f"{option} {path!r} already exists. Pass --overwrite to replace it, or choose another name.")
        if path is not None:
            folder = os.path.dirname(os.path.abspath(path))
            if not os.path.isdir(folder):
                raise ConfigError(f"{option} {path!r}: folder {folder!r} does not exist. Create it first or choose another path.")
