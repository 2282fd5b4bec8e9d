"""Option decorators shared by the commands, and the step from parsed options to a config."""

from __future__ import annotations

import click

from ..errors import ConfigError

__all__ = ["LENGTH", "screen_options", "batch_screen_options", "config_from_options", "OPTION_TO_CONFIG"]


class _LengthType(click.ParamType):
    name = "LENGTH"

    def convert(self, value, param, ctx):
        from ..config import parse_length

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


OPTION_TO_CONFIG = {
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
    from ..config import ScreenConfig

    chosen = {key: options[name] for name, key in OPTION_TO_CONFIG.items() if options.get(name) is not None}
    if chosen.get("within") is not None:
        chosen["graph"] = "band"
    if chosen.get("min_neighbours") is None and chosen.get("k") is not None and chosen["k"] < 4:
        chosen["min_neighbours"] = chosen["k"]
    return ScreenConfig(**chosen)


def batch_screen_options(func):
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
