"""``pointsift campaigns``: screen repeated campaigns of the same wells into one GeoPackage."""

from __future__ import annotations

import click

from ..terminal import echo
from .options import config_from_options, given_options, output_options, pop_table_values, table_options
from .screen import CAUTION_LINE, check_outputs

__all__ = ["campaigns", "campaign_config_from_options"]


def campaign_config_from_options(options: dict, jobs: int | None = None):
    """Build a :class:`~pointsift.campaigns.CampaignConfig` from parsed options (unset ones keep their defaults)."""
    from ..campaigns import CampaignConfig
    from ..config import caller

    screen = config_from_options(options)
    with caller("cli"):
        return CampaignConfig(screen=screen, **given_options(options, "campaign"),
                              **({"jobs": jobs} if jobs is not None else {}))


def _echo(run, top: int = 10) -> None:
    result = run.result
    counts = result.counts
    info = result.run_info
    echo(
        f"Screened {info['rows']} readings of {info['wells']} wells in {info['campaigns']} campaigns "
        f"({info['campaigns_screened']} large enough for the campaign screen): {counts['suspect']} suspect, "
        f"{counts['review']} review, {counts['ok']} ok, {counts['unscreened']} unscreened "
        f"({info['extra_readings']} extra readings of a well in a campaign)."
    )
    if info["moved_wells"]:
        shown = ", ".join(info["moved_wells"][:10])
        echo(f"Wells whose location changed between campaigns ({len(info['moved_wells'])}): {shown}"
                   + (" ..." if len(info["moved_wells"]) > 10 else ""))
    readings = result.readings
    flagged = readings[readings.reading_status == "suspect"].sort_values("reading_score", ascending=False).head(top)
    id_column = info["parameters"]["screen"]["id"]
    if len(flagged):
        echo(f"Strongest suspects (of {counts['suspect']}):")
        for _, item in flagged.iterrows():
            echo(f"  {item[id_column]} {item['campaign_label']}: {item['reading_reasons']}")


@click.command()
@click.argument("inputs", nargs=-1, required=True, metavar="INPUT...")
@table_options("campaigns")
@output_options("Output GeoPackage (.gpkg).", out_required=True, summary_json=False,
                report_help="Also write a self-contained HTML report: the change map and the flagged wells' series.")
@click.pass_context
def campaigns(ctx, inputs, out_path, overwrite, report_path=None, **options):
    """Screen repeated campaigns: INPUT is one long-form layer (a row per reading, with --id, --date or
    --campaign, --value and the location), or several layers/files, one per campaign (--layer '*' for
    every layer of one GeoPackage). Writes OUT.gpkg with the layers readings, wells, changes and run_info."""
    from ..campaign_run import campaigns_file

    settings = pop_table_values(options, None)
    config = campaign_config_from_options(options, jobs=settings["jobs"])
    check_outputs(None, [("--out", out_path), ("--report", report_path)], overwrite)
    run = campaigns_file(list(inputs), out_path, config, layer=settings["layer"], x=settings["x"], y=settings["y"],
                         overwrite=overwrite, report_path=report_path)
    if not ctx.obj.get("quiet"):
        _echo(run)
        echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")
        for path in run.extra_outputs.values():
            echo(f"Wrote {path}.")
        echo(CAUTION_LINE)
