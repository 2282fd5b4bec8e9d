"""``pointsift campaigns``: screen repeated campaigns of the same wells into one GeoPackage."""

from __future__ import annotations

import click

from ..errors import ConfigError
from .options import config_from_options, screen_options

__all__ = ["campaigns", "CAMPAIGN_OPTIONS", "campaign_config_from_options"]

#: CLI option name -> CampaignConfig field (batch plan keys use the same words).
CAMPAIGN_OPTIONS = {
    "date": "date",
    "campaign": "campaign",
    "campaign_window": "campaign_window",
    "change_span": "change_span",
    "min_campaigns": "min_campaigns",
    "min_campaign_readings": "min_campaign_readings",
    "change_permutations": "change_permutations",
    "jobs": "jobs",
}


def campaign_config_from_options(options: dict):
    """Build a :class:`~pointsift.campaigns.CampaignConfig` from parsed options (unset ones keep their defaults)."""
    from ..campaigns import CampaignConfig

    chosen = {key: options[name] for name, key in CAMPAIGN_OPTIONS.items() if options.get(name) is not None}
    screen = config_from_options({k: v for k, v in options.items() if k not in CAMPAIGN_OPTIONS})
    return CampaignConfig(screen=screen, **chosen)


def _echo(run, top: int = 10) -> None:
    result = run.result
    counts = result.counts
    info = result.run_info
    click.echo(
        f"Screened {info['rows']} readings of {info['wells']} wells in {info['campaigns']} campaigns "
        f"({info['campaigns_screened']} large enough for the campaign screen): {counts['suspect']} suspect, "
        f"{counts['review']} review, {counts['ok']} ok, {counts['unscreened']} unscreened "
        f"({info['extra_readings']} extra readings of a well in a campaign)."
    )
    if info["moved_wells"]:
        shown = ", ".join(info["moved_wells"][:10])
        click.echo(f"Wells whose location changed between campaigns ({len(info['moved_wells'])}): {shown}"
                   + (" ..." if len(info["moved_wells"]) > 10 else ""))
    readings = result.readings
    flagged = readings[readings.reading_status == "suspect"].sort_values("reading_score", ascending=False).head(top)
    id_column = info["parameters"]["screen"]["id"]
    if len(flagged):
        click.echo(f"Strongest suspects (of {counts['suspect']}):")
        for _, item in flagged.iterrows():
            click.echo(f"  {item[id_column]} {item['campaign_label']}: {item['reading_reasons']}")


@click.command()
@click.argument("inputs", nargs=-1, required=True, metavar="INPUT...")
@screen_options
@click.option("--date", default=None, help="Date column; campaigns are formed from it by --campaign-window.")
@click.option("--campaign", default=None, help="Campaign label column (instead of campaigns from dates).")
@click.option("--campaign-window", default=None,
              help="Rule forming campaigns from dates: NAME=FIRST-LAST months, e.g. spring=1-6,fall=7-12 (default), or year, or month.")
@click.option("--change-span", type=click.IntRange(2, None), default=None,
              help="Campaigns between the two readings of the longer change (default: a year, the same season).")
@click.option("--min-campaigns", type=click.IntRange(3, None), default=None, help="Readings a well needs for its history to be judged (default 6).")
@click.option("--min-campaign-readings", type=click.IntRange(5, None), default=None,
              help="Readings a campaign needs for the campaign screen (default 20).")
@click.option("--change-permutations", type=click.IntRange(99, 100000), default=None,
              help="Permutations for local Moran's I of the changes (default 199).")
@click.option("--jobs", "-j", type=click.IntRange(1, None), default=None, help="Worker processes (default 1).")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), help="Output GeoPackage (.gpkg).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
@click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False),
              help="Also write a self-contained HTML report: the change map and the flagged wells' series.")
@click.pass_context
def campaigns(ctx, inputs, out_path, overwrite, layer, x_column, y_column, report_path=None, **options):
    """Screen repeated campaigns: INPUT is one long-form layer (a row per reading, with --id, --date or
    --campaign, --value and the location), or several layers/files, one per campaign (--layer '*' for
    every layer of one GeoPackage). Writes OUT.gpkg with the layers readings, wells, changes and run_info."""
    import os

    from ..campaign_run import campaigns_file

    if options.get("id_column") is None:
        raise ConfigError("pointsift campaigns needs the well id that joins readings across campaigns: pass --id COLUMN.")
    config = campaign_config_from_options(options)
    if report_path is not None and os.path.exists(report_path) and not overwrite:
        raise ConfigError(f"--report {report_path!r} already exists. Pass --overwrite to replace it, or choose another name.")
    run = campaigns_file(list(inputs), out_path, config, layer=layer, x=x_column, y=y_column, overwrite=overwrite,
                         report_path=report_path)
    if not ctx.obj.get("quiet"):
        _echo(run)
        click.echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")
        for path in run.extra_outputs.values():
            click.echo(f"Wrote {path}.")
