"""``pointsift batch``: many inputs, unattended and resumable (the work is in :mod:`pointsift.batch`)."""

from __future__ import annotations

import click

from .options import OPTION_TO_CONFIG, batch_screen_options, config_from_options

__all__ = ["batch"]


@click.command()
@click.argument("inputs", nargs=-1, required=True, metavar="PLAN.toml | INPUTS...")
@batch_screen_options
@click.option("--layer", "layers", multiple=True, help="GeoPackage layer to screen; repeat for several (default: every layer).")
@click.option("--by", default=None, help="Screen each group of this column on its own, e.g. network_id or a campaign date column.")
@click.option("--out-dir", type=click.Path(file_okay=False), default=None, help="Folder for the outputs and the batch index (a plan may set out_dir).")
@click.option("--jobs", "-j", type=click.IntRange(1, None), default=None, help="Worker processes (default 1, or the plan's jobs).")
@click.option("--force", is_flag=True, help="Redo every input, also those whose output is up to date.")
@click.option("--report", "batch_report", is_flag=True, help="Also write a self-contained HTML report beside each output.")
@click.option("-q", "--quiet", "batch_quiet", is_flag=True, help="No progress and no summary.")
@click.pass_context
def batch(ctx, inputs, layers, by, out_dir, jobs, force, batch_report, batch_quiet, x_column, y_column, **options):
    """Screen many inputs: PLAN.toml, or files, globs and folders with --value and --out-dir.

    Writes one GeoPackage per file, layer or group, and batch-index.csv / .gpkg.
    Up-to-date outputs are skipped. Exit code 0 all done, 3 some inputs failed
    (listed in the index), 2 unusable plan, 130 stopped by Ctrl-C. See docs/batch.md.
    """
    from ..batch import run_command

    quiet = batch_quiet or bool(ctx.obj.get("quiet"))
    plan_form = len(inputs) == 1 and inputs[0].lower().endswith(".toml")
    if plan_form or options.get("value") is None:
        chosen = {OPTION_TO_CONFIG[name]: v for name, v in options.items() if v is not None}
    else:
        chosen = config_from_options(options).as_record()
    result = run_command(inputs, out_dir=out_dir, jobs=jobs, force=force, quiet=quiet, layers=layers, by=by,
                         x=x_column, y=y_column, options=chosen, report=batch_report)
    ctx.exit(result.exit_code)
