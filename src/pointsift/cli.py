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
            help="Records at one spot disagree when their values differ by more (default: 3 local robust sd).",
        ),
        click.option("--permutations", type=click.IntRange(99, 100000), default=None, help="Permutations for local Moran's I / Gi* (default 999)."),
        click.option("--seed", type=int, default=None, help="Seed of all random draws (default fixed, runs repeat)."),
        click.option("--fdr", type=click.FloatRange(0, 1, min_open=True, max_open=True), default=None, help="False discovery rate (default 0.05)."),
        click.option("--suspect-z", type=click.FloatRange(min=0, min_open=True), default=None, help="Standardized residual for 'suspect' (default 5)."),
        click.option("--review-z", type=click.FloatRange(min=0, min_open=True), default=None, help="Standardized residual for 'review' (default 3.5)."),
        click.option(
            "--detrend",
            type=click.Choice(["auto", "none", "surface1", "surface2", "polish"]),
            default=None,
            help="Regional trend removed before the cluster statistics (default auto).",
        ),
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
@click.pass_context
def screen(ctx, input_path, out_path, overwrite, layer, x_column, y_column, **options):
    """Screen INPUT (GeoPackage, shapefile, CSV or GeoParquet) and write OUTPUT.gpkg
    with every input row plus screen_status, screen_score and screen_reasons."""
    from .run import screen_file

    config = config_from_options(options)
    run = screen_file(input_path, out_path, config, layer=layer, x=x_column, y=y_column, overwrite=overwrite)
    if not ctx.obj.get("quiet"):
        _echo_result(run.result)
        click.echo(f"Wrote {run.output_path} in {run.seconds:.1f} s.")


def main(argv=None) -> int:
    """Entry point: run the CLI and map exceptions to exit codes."""
    verbose = any(a in ("-v", "-vv", "--verbose") for a in (argv if argv is not None else sys.argv[1:]))
    try:
        cli.main(args=argv, prog_name="pointsift", standalone_mode=False)
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
    except Exception as exc:  # an internal error: say so plainly
        click.echo(f"Internal error: {type(exc).__name__}: {exc}", err=True)
        if verbose:
            traceback.print_exc()
        else:
            click.echo("Run again with -v to see the traceback, and report it with the command you ran.", err=True)
        return EXIT_DATA
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
