"""``pointsift batch``: many inputs, unattended and resumable (the work is in :mod:`pointsift.batch`)."""

from __future__ import annotations

import click

from .options import config_from_options, given_options, pop_table_values, report_config_from_options, table_options

__all__ = ["batch"]


@click.command()
@click.argument("inputs", nargs=-1, required=True, metavar="PLAN.toml | INPUTS...")
@table_options("batch")
@click.option("--force", is_flag=True, help="Redo every input, also those whose output is up to date.")
@click.option("-q", "--quiet", "batch_quiet", is_flag=True, help="No progress and no summary.")
@click.pass_context
def batch(ctx, inputs, force, batch_quiet, **options):
    """Screen many inputs: PLAN.toml, or files, globs and folders with --value and --out-dir.

    Writes one GeoPackage per file, layer or group, and batch-index.csv / .gpkg.
    Up-to-date outputs are skipped. Exit code 0 all done, 3 some inputs failed
    (listed in the index), 2 unusable plan, 130 stopped by Ctrl-C. See docs/batch.md.
    """
    from ..batch import run_command

    quiet = batch_quiet or bool(ctx.obj.get("quiet"))
    settings = pop_table_values(options, None)
    plan_form = len(inputs) == 1 and inputs[0].lower().endswith(".toml")
    given = given_options(options, "screen")
    given_report = given_options(options, "report")
    config = None if plan_form or "value" not in given else config_from_options(options)
    report_config = None if plan_form else report_config_from_options(options)
    result = run_command(inputs, config=config, given=(*given, *given_report), out_dir=settings["out_dir"],
                         jobs=settings["jobs"], force=force, quiet=quiet, layers=settings["layers"], by=settings["by"],
                         x=settings["x"], y=settings["y"], report=settings["report"], report_config=report_config)
    ctx.exit(result.exit_code)
