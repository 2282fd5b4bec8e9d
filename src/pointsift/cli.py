"""The ``pointsift`` command line.

Exit codes (one place, :func:`main`): 0 the run completed (also when suspects
were found), 1 a data or output problem, 2 a usage problem (unknown option,
invalid value). ``pointsift batch`` adds 3 for "finished, some inputs
failed". A user mistake never prints a Python traceback; an internal error
prints one only with ``-v``.
"""

from __future__ import annotations

import logging
import sys
import traceback

import click

from . import __version__
from .errors import ConfigError, PointsiftError

__all__ = ["main", "cli", "screen_options", "config_from_options"]

EXIT_OK = 0
EXIT_DATA = 1
EXIT_USAGE = 2
EXIT_SOME_FAILED = 3


class _LengthType(click.ParamType):
    name = "LENGTH"

    def convert(self, value, param, ctx):
        from .config import parse_length

        if value is None or isinstance(value, float):
            return value
        try:
            return parse_length(value, name=f"--{param.name.replace('_', '-')}" if param else "length")
        except ConfigError as exc:
            self.fail(str(exc), param, ctx)


LENGTH = _LengthType()


def _sentinels(ctx, param, value):
    if value is None:
        return None
    if value.strip().lower() in ("", "none"):
        return ()
    try:
        return tuple(float(part) for part in value.split(","))
    except ValueError:
        raise click.BadParameter(f"{value!r} is not a comma-separated list of numbers, e.g. '-9999,-999'.")


def screen_options(func):
    """Options shared by ``screen``, ``describe`` and ``batch`` (one definition)."""
    options = [
        click.option("--value", "value", required=True, help="Column holding the measured values."),
        click.option("--id", "id_column", default=None, help="Column identifying each point in reasons and tables."),
        click.option("--layer", default=None, help="Layer to read from a multi-layer file (GeoPackage)."),
        click.option("--x", "x_column", default=None, help="Column of x / longitude / easting (tables)."),
        click.option("--y", "y_column", default=None, help="Column of y / latitude / northing (tables)."),
        click.option("--crs", default=None, help="CRS of the coordinates when the file has none, e.g. EPSG:4326."),
        click.option("--work-crs", default=None, help="Metric CRS to compute distances in (default: chosen from the data)."),
        click.option(
            "--no-data",
            "sentinels",
            default=None,
            callback=_sentinels,
            help="Comma-separated no-data codes (default -9999,-999,-99999; 'none' for none).",
        ),
        click.option("--neighbours", "k", type=click.IntRange(3, 100), default=None, help="k nearest neighbours (default 10)."),
        click.option("--within", type=LENGTH, default=None, help="Use every neighbour within this distance instead of k nearest, e.g. 5km."),
        click.option("--min-neighbours", type=click.IntRange(2, 50), default=None, help="Fewer neighbours leaves a point unscreened (default 4)."),
        click.option("--max-distance", type=LENGTH, default=None, help="Ignore neighbours farther than this (default: from the spacing)."),
        click.option("--coincident-tolerance", type=LENGTH, default=None, help="Points closer than this are one spot (default 0.5m)."),
        click.option(
            "--duplicate-tolerance",
            "coincident_value_tolerance",
            type=click.FloatRange(min=0, min_open=True),
            default=None,
            help="Records at one spot disagree when their values differ by more (default: 1 local robust sd).",
        ),
        click.option("--permutations", type=click.IntRange(99, 100000), default=None, help="Permutations for local Moran's I / Gi* (default 999)."),
        click.option("--seed", type=int, default=None, help="Seed of all random draws (default fixed, runs repeat)."),
        click.option("--fdr", type=click.FloatRange(0, 1, min_open=True, max_open=True), default=None, help="False discovery rate (default 0.05)."),
        click.option("--suspect-z", type=click.FloatRange(min=0, min_open=True), default=None, help="Standardized residual for 'suspect' (default 3.5)."),
        click.option("--review-z", type=click.FloatRange(min=0, min_open=True), default=None, help="Standardized residual for 'review' (default 3)."),
        click.option(
            "--detrend",
            type=click.Choice(["auto", "none", "surface1", "surface2", "polish"]),
            default=None,
            help="Regional trend removed before the cluster statistics (default auto).",
        ),
        click.option("--lag-count", type=click.IntRange(1, 1000), default=None, help="Number of variogram lag classes (default: from the extent and spacing)."),
        click.option("--lag-width", type=LENGTH, default=None, help="Width of the variogram lag classes (0, W], (W, 2W], ..., e.g. 500m (default: from the extent and spacing)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


_OPTION_TO_CONFIG = {
    "value": "value",
    "id_column": "id",
    "crs": "crs",
    "work_crs": "work_crs",
    "sentinels": "sentinels",
    "k": "k",
    "within": "within",
    "min_neighbours": "min_neighbours",
    "max_distance": "max_distance",
    "coincident_tolerance": "coincident_tolerance",
    "coincident_value_tolerance": "coincident_value_tolerance",
    "permutations": "permutations",
    "seed": "seed",
    "fdr": "fdr",
    "suspect_z": "suspect_z",
    "review_z": "review_z",
    "detrend": "detrend",
    "lag_count": "lag_count",
    "lag_width": "lag_width",
}


def config_from_options(options: dict):
    """Build a :class:`~pointsift.config.ScreenConfig` from parsed CLI options
    (options left unset keep their defaults)."""
    from .config import ScreenConfig

    chosen = {key: options[name] for name, key in _OPTION_TO_CONFIG.items() if options.get(name) is not None}
    if chosen.get("within") is not None:
        chosen["graph"] = "band"
    if chosen.get("min_neighbours") is None and chosen.get("k") is not None and chosen["k"] < 4:
        chosen["min_neighbours"] = chosen["k"]
    return ScreenConfig(**chosen)


def _setup_logging(verbose: int, quiet: bool) -> None:
    level = logging.WARNING
    if quiet:
        level = logging.ERROR
    elif verbose:
        level = logging.DEBUG if verbose > 1 else logging.INFO
    logging.basicConfig(level=level, format="%(levelname)s %(name)s: %(message)s")


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="pointsift")
@click.option("-v", "--verbose", count=True, help="More messages (-vv for debugging).")
@click.option("-q", "--quiet", is_flag=True, help="Only errors.")
@click.pass_context
def cli(ctx, verbose, quiet):
    """Screen irregularly spaced point measurements (for example water levels in
    monitoring wells) for wrong values and local anomalies.

    Flags are screening aids, not determinations: check field records and
    follow local regulations and licensed professional practice.
    """
    ctx.ensure_object(dict)
    ctx.obj["verbose"] = verbose
    ctx.obj["quiet"] = quiet
    _setup_logging(verbose, quiet)


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
    flagged = frame[frame["screen_status"].isin(["suspect", "review"])]
    if len(flagged):
        status_rank = flagged["screen_status"].map({"suspect": 0, "review": 1})
        order = flagged.assign(_rank=status_rank).sort_values(["_rank", "screen_score"], ascending=[True, False]).head(top)
        ids = result.prepared.ids
        click.echo(f"Strongest flags (of {len(flagged)}):")
        for row, item in order.iterrows():
            position = frame.index.get_loc(row)
            click.echo(f"  {item['screen_status']:<8} {ids[position]}: {item['screen_reasons']}")
    unscreened = frame[frame["screen_status"] == "unscreened"]
    if len(unscreened):
        reasons = unscreened["screen_reasons"].str.replace(r"'[^']*'", "'...'", regex=True).value_counts().head(5)
        click.echo("Unscreened, by reason:")
        for text, count in reasons.items():
            click.echo(f"  {count} x {text}")


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@screen_options
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), help="Output GeoPackage (.gpkg).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
@click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False), help="Also write a self-contained HTML report (works offline).")
@click.option("--summary-json", "summary_json_path", default=None, type=click.Path(dir_okay=False), help="Also write the report's numbers as JSON.")
@click.pass_context
def screen(ctx, input_path, out_path, overwrite, layer, x_column, y_column, report_path=None, summary_json_path=None, **options):
    """Screen INPUT (GeoPackage, shapefile, CSV or GeoParquet) and write OUTPUT.gpkg
    with every input row plus screen_status, screen_score and screen_reasons."""
    from .run import screen_file

    config = config_from_options(options)
    _check_report_paths(report_path, summary_json_path, overwrite)
    run = screen_file(input_path, out_path, config, layer=layer, x=x_column, y=y_column, overwrite=overwrite,
                      report_path=report_path, summary_json_path=summary_json_path)
    if not ctx.obj.get("quiet"):
        _echo_result(run.result)
        click.echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")
        for path in run.extra_outputs.values():
            click.echo(f"Wrote {path}.")


def _check_report_paths(report_path, summary_json_path, overwrite: bool) -> None:
    """Refuse to replace an existing report or summary without --overwrite (before any work is done)."""
    import os

    for option, path in (("--report", report_path), ("--summary-json", summary_json_path)):
        if path is not None and os.path.exists(path) and not overwrite:
            raise ConfigError(f"{option} {path!r} already exists. Pass --overwrite to replace it, or choose another name.")
        if path is not None:
            folder = os.path.dirname(os.path.abspath(path))
            if not os.path.isdir(folder):
                raise ConfigError(f"{option} {path!r}: folder {folder!r} does not exist. Create it first or choose another path.")


def _number(value) -> str:
    import math

    return "n/a" if value is None or not math.isfinite(value) else f"{value:.4g}"


def _parse_directions(ctx, param, value):
    try:
        directions = tuple(float(part) for part in str(value).split(",") if part.strip())
    except ValueError:
        raise click.BadParameter(f"{value!r} is not a comma-separated list of azimuths in degrees, e.g. '90,0'.")
    if not directions:
        raise click.BadParameter("give at least one azimuth, e.g. '90' for west-east strips.")
    return directions


def _echo_description(description, value_column: str, where: str) -> None:
    from .methods.strips import direction_words

    prepared = description.prepared
    s = description.summary
    n_rows = prepared.n
    click.echo(f"Described {n_rows} rows of {value_column!r} in {where}: {s.n} used, {n_rows - s.n} unscreened.")
    click.echo(f"Distances in {prepared.work_crs.name} ({prepared.work_crs.to_string()}).")
    for note in prepared.notes:
        click.echo(f"Note: {note}")
    click.echo(
        f"Values: mean {_number(s.mean)}, median {_number(s.median)}, sd {_number(s.sd)} "
        f"and variance {_number(s.variance)} (n - 1 denominator)"
    )
    click.echo(
        f"  min {_number(s.min)}, 5% {_number(s.p05)}, 25% {_number(s.p25)}, 75% {_number(s.p75)}, "
        f"95% {_number(s.p95)}, max {_number(s.max)} (percentiles by linear interpolation); IQR {_number(s.iqr)}"
    )
    click.echo(f"  robust sd: IQR/1.349 = {_number(s.robust_sd_iqr)}, 1.4826 x MAD = {_number(s.robust_sd_mad)}")
    click.echo(
        f"  skewness {_number(s.skewness)} (adjusted Fisher-Pearson G1), "
        f"excess kurtosis {_number(s.kurtosis)} (adjusted G2)"
    )
    if description.shift is not None:
        shift = description.shift
        kept = shift.without_suspects
        click.echo(
            f"Without the {shift.n_suspects} suspect row{'s' if shift.n_suspects != 1 else ''}: "
            f"mean {_number(kept.mean)} (moves {shift.mean_shift:+.4g}), sd {_number(kept.sd)} (moves {shift.sd_shift:+.4g})"
        )
    if description.unscreened:
        click.echo("Unscreened, by reason:")
        for reason, count in list(description.unscreened.items())[:5]:
            click.echo(f"  {count} x {reason}")
    click.echo("")
    click.echo(description.stem_leaf.text())
    click.echo("")
    strips = description.strips
    click.echo(f"Strips (flagged when |u| > {strips.flag_u:g}; u is calibrated for each strip's own n):")
    table = strips.table
    ids = prepared.ids
    for direction, width in strips.widths.items():
        part = table[table["direction"] == direction]
        judged = int(part["u"].notna().sum())
        flagged = part[part["flagged"]]
        click.echo(
            f"  {direction_words(direction)}, {width:g} m wide: {len(part)} strips, "
            f"{judged} judged, {len(flagged)} flagged"
        )
        for _, row in flagged.iterrows():
            click.echo(
                f"    strip {row['strip']}: n {row['n']}, mean {_number(row['mean'])}, median {_number(row['median'])}, "
                f"u {row['u']:+.2f}; extreme value {_number(row['extreme_value'])} at {ids[int(row['extreme_row'])]}"
            )
    info = description.trend_info
    if description.trend is not None:
        import math

        share, robust = info["variance_explained"], info["robust_variance_explained"]
        if math.isfinite(share) and math.isfinite(robust):
            click.echo(
                f"Trend: {info['method']} explains {100 * share:.1f} % of the variance "
                f"(robust share {100 * robust:.1f} %)."
            )
        else:
            click.echo(f"Trend: {info['method']}; the share of variance explained is undefined (the values do not vary).")
    else:
        click.echo(f"Trend: {info.get('note', 'none requested')}.")


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@screen_options
@click.option("--out", "out_path", default=None, type=click.Path(dir_okay=False), help="Also write the strips layer and summary tables to this GeoPackage (.gpkg).")
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
@click.option("--strips", "directions", default="90,0", callback=_parse_directions, help="Strip directions: azimuths in degrees along which strips run, comma-separated; 90 west-east, 0 south-north (default 90,0).")
@click.option("--strip-width", type=LENGTH, default=None, help="Strip width, e.g. 500m (default: from the point density).")
@click.option("--min-strip-points", type=click.IntRange(5, None), default=5, help="Smaller strips are too small to judge (default 5).")
@click.option("--stem-unit", type=click.FloatRange(min=0, min_open=True), default=None, help="Stem unit of the stem-and-leaf display, a power of ten (default: chosen).")
@click.option("--stem-split", type=click.Choice(["1", "2", "5"]), default=None, help="Lines per stem (default: chosen).")
@click.option("--bin-width", type=click.FloatRange(min=0, min_open=True), default=None, help="Histogram bin width (default: Freedman-Diaconis).")
@click.option("--figures", "figures_dir", default=None, type=click.Path(file_okay=False), help="Folder to write histogram.png, strips.png and the variogram figures into.")
@click.option("--with-screen", is_flag=True, help="Screen first, and also summarise without the suspect rows.")
@click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False), help="Also write a self-contained HTML report (works offline).")
@click.option("--summary-json", "summary_json_path", default=None, type=click.Path(dir_okay=False), help="Also write the report's numbers as JSON.")
@click.pass_context
def describe(ctx, input_path, out_path, overwrite, layer, x_column, y_column, directions, strip_width,
             min_strip_points, stem_unit, stem_split, bin_width, figures_dir, with_screen, report_path=None,
             summary_json_path=None, **options):
    """Describe INPUT: summary figures, stem-and-leaf display, strip statistics
    across the area and the regional trend. Reads INPUT exactly as 'screen' does."""
    import os
    from datetime import datetime, timezone
    from pathlib import Path

    from .explore import describe as describe_prepared
    from .explore import description_layers
    from .io import read_points, run_info_table, write_geopackage
    from .prepare import prepare

    config = config_from_options(options)
    _check_report_paths(report_path, summary_json_path, overwrite)
    result = None
    if figures_dir is not None and not Path(figures_dir).is_dir():
        raise ConfigError(f"--figures folder {figures_dir!r} does not exist. Create it first or choose another folder.")
    frame, source = read_points(input_path, layer=layer, x=x_column, y=y_column, crs=config.crs)
    where = f"layer {source.layer!r} of {source.path!r}" if source.layer else repr(source.path)
    suspects = None
    if "screen_status" in frame.columns:
        # A screened layer: summarise without the rows it already calls suspect.
        suspects = (frame["screen_status"] == "suspect").to_numpy()
        prepared = prepare(frame, config, where=where)
    elif with_screen:
        from .pipeline import screen_frame

        result = screen_frame(frame, config, source=source)
        suspects = (result.frame["screen_status"] == "suspect").to_numpy()
        prepared = result.prepared
    else:
        prepared = prepare(frame, config, where=where)
    description = describe_prepared(
        prepared,
        directions=directions,
        strip_width=strip_width,
        min_strip_n=min_strip_points,
        trend=config.detrend,
        lag_count=config.lag_count,
        lag_width=config.lag_width,
        stem_unit=stem_unit,
        split=int(stem_split) if stem_split else None,
        suspect_mask=suspects,
        figures=figures_dir is not None,
        bin_width=bin_width,
        value_label=config.value,
        seed=config.seed,
        screen=result,
    )
    if not ctx.obj.get("quiet"):
        _echo_description(description, config.value, where)
    if figures_dir is not None:
        saved = []
        for name, file_name in (("histogram", "histogram.png"), ("strip_profiles", "strips.png"),
                                ("variogram", "variogram.png"), ("variogram_cloud", "variogram_cloud.png"),
                                ("sqrt_difference_cloud", "sqrt_difference_cloud.png")):
            if name in description.figures:
                description.figures[name].savefig(os.path.join(figures_dir, file_name), dpi=150)
                saved.append(file_name)
        if not ctx.obj.get("quiet"):
            click.echo(f"Wrote {', '.join(saved[:-1])} and {saved[-1]} to {figures_dir}.")
    if out_path is not None:
        layers = description_layers(description)
        layers["run_info"] = run_info_table(
            {
                "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
                "command": "describe",
                "input_path": source.path,
                "input_layer": source.layer,
                "input_sha256": source.sha256,
                "rows": int(prepared.n),
                "value_column": config.value,
                "input_crs": prepared.input_crs.to_string(),
                "work_crs": prepared.work_crs.to_string(),
                "strip_widths_m": {f"{d:g}": w for d, w in description.strips.widths.items()},
                "trend": description.trend_info,
                "variogram": (
                    {"values": description.variogram_basis, **description.variogram.run_info()}
                    if description.variogram is not None else {"note": "no variogram: too few usable points"}
                ),
                "notes": list(prepared.notes),
            }
        )
        written = write_geopackage(out_path, layers, overwrite=overwrite, protect=(os.fspath(input_path),))
        if not ctx.obj.get("quiet"):
            click.echo(f"Wrote {written} (layers {', '.join(layers)}).")
    if report_path is not None or summary_json_path is not None:
        from .report import build_report

        run_info = None
        if result is None:
            from .pipeline import CAUTION, library_versions

            run_info = {
                "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
                "input_path": source.path,
                "input_layer": source.layer,
                "input_format": source.driver,
                "input_sha256": source.sha256,
                "value_column": config.value,
                "id_column": config.id,
                "input_crs": prepared.input_crs.to_string(),
                "work_crs": prepared.work_crs.to_string(),
                "work_crs_name": prepared.work_crs.name,
                "output_path": out_path,
                "parameters": config.as_record(),
                "strip_widths_m": {f"{d:g}": w for d, w in description.strips.widths.items()},
                "trend": description.trend_info,
                "notes": list(prepared.notes),
                "versions": library_versions(),
                "caution": CAUTION,
            }
        report = build_report(description=description, run_info=run_info)
        for path in report.write(report_path, summary_json_path, protect=(os.fspath(input_path),)).values():
            if not ctx.obj.get("quiet"):
                click.echo(f"Wrote {path}.")


def _batch_options(func):
    """The screen options for ``batch``: --value optional (a plan names it), --layer repeatable."""
    probe = screen_options(lambda: None)
    params = getattr(func, "__click_params__", [])
    for param in probe.__click_params__:
        if param.name == "layer":
            continue
        if param.name == "value":
            param.required = False
            param.help = "Column holding the measured values (direct form; a plan sets it in [defaults])."
        params.append(param)
    func.__click_params__ = params
    return func


@cli.command()
@click.argument("inputs", nargs=-1, required=True, metavar="PLAN.toml | INPUTS...")
@_batch_options
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
    from .batch import run_command

    quiet = batch_quiet or bool(ctx.obj.get("quiet"))
    plan_form = len(inputs) == 1 and inputs[0].lower().endswith(".toml")
    if plan_form or options.get("value") is None:
        chosen = {_OPTION_TO_CONFIG[name]: v for name, v in options.items() if v is not None}
    else:
        chosen = config_from_options(options).as_record()
    result = run_command(inputs, out_dir=out_dir, jobs=jobs, force=force, quiet=quiet, layers=layers, by=by,
                         x=x_column, y=y_column, options=chosen, report=batch_report)
    ctx.exit(result.exit_code)


def main(argv=None) -> int:
    """Entry point: run the CLI and map exceptions to exit codes."""
    verbose = any(a in ("-v", "-vv", "--verbose") for a in (argv if argv is not None else sys.argv[1:]))
    try:
        code = cli.main(args=argv, prog_name="pointsift", standalone_mode=False)
    except click.exceptions.Abort:
        click.echo("Stopped.", err=True)
        return 130
    except click.exceptions.ClickException as exc:
        exc.show()
        return EXIT_USAGE
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except ConfigError as exc:
        click.echo(f"Error: {exc}", err=True)
        return EXIT_USAGE
    except PointsiftError as exc:
        click.echo(f"Error: {exc}", err=True)
        return EXIT_DATA
    except KeyboardInterrupt:
        click.echo("Stopped.", err=True)
        return 130
    except OSError as exc:  # disk full, permissions, a vanished folder
        click.echo(f"Error: {exc}. Check the path, its permissions and the free disk space.", err=True)
        return EXIT_DATA
    except Exception as exc:  # an internal error: say so plainly
        click.echo(f"Internal error: {type(exc).__name__}: {exc}", err=True)
        if verbose:
            traceback.print_exc()
        else:
            click.echo("Run again with -v to see the traceback, and report it with the command you ran.", err=True)
        return EXIT_DATA
    # ctx.exit(n) inside a command (batch: 3 when some inputs failed) comes back here as n
    return code if isinstance(code, int) else EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
