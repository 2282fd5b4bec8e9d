"""``pointsift describe``: summary figures, stem-and-leaf, strips, trend and variogram of one input."""

from __future__ import annotations

import math
import os
from pathlib import Path

import click

from ..errors import ConfigError
from ..record import run_record
from ..vocabulary import SUSPECT, direction_words
from .options import (config_from_options, describe_config_from_options, output_options, pop_table_values,
                      report_config_from_options, table_options)
from ..terminal import echo
from .screen import check_outputs

__all__ = ["describe"]


def _number(value) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.4g}"


def _echo_description(description, value_column: str, where: str) -> None:
    prepared = description.prepared
    s = description.summary
    n_rows = prepared.n
    echo(f"Described {n_rows} rows of {value_column!r} in {where}: {s.n} used, {n_rows - s.n} unscreened.")
    echo(f"Distances in {prepared.work_crs.name} ({prepared.work_crs.to_string()}).")
    for note in (*prepared.notes, *description.notes):
        echo(f"Note: {note}")
    echo(
        f"Values: mean {_number(s.mean)}, median {_number(s.median)}, sd {_number(s.sd)} "
        f"and variance {_number(s.variance)} (n - 1 denominator)"
    )
    echo(
        f"  min {_number(s.min)}, 5% {_number(s.p05)}, 25% {_number(s.p25)}, 75% {_number(s.p75)}, "
        f"95% {_number(s.p95)}, max {_number(s.max)} (percentiles by linear interpolation); IQR {_number(s.iqr)}"
    )
    echo(f"  robust sd: IQR/1.349 = {_number(s.robust_sd_iqr)}, 1.4826 x MAD = {_number(s.robust_sd_mad)}")
    echo(
        f"  skewness {_number(s.skewness)} (adjusted Fisher-Pearson G1), "
        f"excess kurtosis {_number(s.kurtosis)} (adjusted G2)"
    )
    if description.shift is not None:
        shift = description.shift
        kept = shift.without_suspects
        echo(
            f"Without the {shift.n_suspects} suspect row{'s' if shift.n_suspects != 1 else ''}: "
            f"mean {_number(kept.mean)} (moves {shift.mean_shift:+.4g}), sd {_number(kept.sd)} (moves {shift.sd_shift:+.4g})"
        )
    if description.unscreened:
        echo("Unscreened, by reason:")
        for reason, count in list(description.unscreened.items())[:5]:
            echo(f"  {count} x {reason}")
    echo("")
    echo(description.stem_leaf.text(), lines=True)
    echo("")
    strips = description.strips
    echo(f"Strips (flagged when |u| > {strips.flag_u:g}; u is calibrated for each strip's own n):")
    table = strips.table
    ids = prepared.ids
    for direction, width in strips.widths.items():
        part = table[table["direction"] == direction]
        judged = int(part["u"].notna().sum())
        flagged = part[part["flagged"]]
        echo(
            f"  {direction_words(direction, form='strips')}, {width:g} m wide: {len(part)} strips, "
            f"{judged} judged, {len(flagged)} flagged"
        )
        for _, row in flagged.iterrows():
            echo(
                f"    strip {row['strip']}: n {row['n']}, mean {_number(row['mean'])}, median {_number(row['median'])}, "
                f"u {row['u']:+.2f}; extreme value {_number(row['extreme_value'])} at {ids[int(row['extreme_row'])]}"
            )
    info = description.trend_info
    if description.trend is not None:
        share, robust = info["variance_explained"], info["robust_variance_explained"]
        if math.isfinite(share) and math.isfinite(robust):
            echo(
                f"Trend: {info['method']} explains {100 * share:.1f} % of the variance "
                f"(robust share {100 * robust:.1f} %)."
            )
        else:
            echo(f"Trend: {info['method']}; the share of variance explained is undefined (the values do not vary).")
    else:
        echo(f"Trend: {info.get('note', 'none requested')}.")


@click.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@table_options("describe")
@output_options("Also write the strips layer and summary tables to this GeoPackage (.gpkg).", out_required=False)
@click.option("--figures", "figures_dir", default=None, type=click.Path(file_okay=False), help="Folder to write histogram.png, strips.png and the variogram figures into.")
@click.option("--with-screen", is_flag=True, help="Screen first (with the screen's default options), and also summarise without the suspect rows.")
@click.pass_context
def describe(ctx, input_path, out_path, overwrite, figures_dir, with_screen, report_path=None,
             summary_json_path=None, **options):
    """Describe INPUT: summary figures, stem-and-leaf display, strip statistics
    across the area and the regional trend. Reads INPUT exactly as 'screen' does."""
    from ..explore import describe as describe_prepared

    where = pop_table_values(options, None)
    layer, x_column, y_column = where["layer"], where["x"], where["y"]
    settings = describe_config_from_options(options)
    report_config = report_config_from_options(options)
    config = config_from_options(options)
    if figures_dir is not None and not Path(figures_dir).is_dir():
        raise ConfigError(f"--figures folder {figures_dir!r} does not exist. Create it first or choose another folder.")
    figures = [("--figures", Path(figures_dir) / name) for _, name in _FIGURE_FILES] if figures_dir is not None else []
    check_outputs(input_path, [("--out", out_path), ("--report", report_path), ("--summary-json", summary_json_path)],
                  overwrite, figures=figures)
    result, prepared, source, suspects, where = _read(input_path, layer, x_column, y_column, config, with_screen)
    description = describe_prepared(
        prepared,
        directions=settings.directions,
        strip_width=settings.strip_width,
        min_strip_n=settings.min_strip_points,
        trend=config.detrend,
        lag_count=config.lag_count,
        lag_width=config.lag_width,
        stem_unit=settings.stem_unit,
        split=settings.stem_split,
        suspect_mask=suspects,
        figures=figures_dir is not None,
        bin_width=settings.bin_width,
        value_label=config.value,
        seed=config.seed,
        screen=result,
        config=config,
        where=where,
    )
    quiet = bool(ctx.obj.get("quiet"))
    if not quiet:
        _echo_description(description, config.value, where)
    if figures_dir is not None:
        _save_figures(description, figures_dir, quiet)
    record = run_record(
        "describe",
        config=config,
        prepared=prepared,
        source=source,
        output_path=out_path,
        describe=settings.as_record(),
        strip_widths_m={f"{d:g}": w for d, w in description.strips.widths.items()},
        trend=description.trend_info,
        described_scale=description.scale,
        **({"context": description.context_info} if description.context_info else {}),
        variogram=(
            {"values": description.variogram_basis, **description.variogram.run_info()}
            if description.variogram is not None else {"note": "no variogram: too few usable points"}
        ),
    )
    if out_path is not None:
        from ..explore import description_layers
        from ..io import run_info_table, write_geopackage

        layers = description_layers(description)
        layers["run_info"] = run_info_table(record)
        written = write_geopackage(out_path, layers, overwrite=overwrite, protect=(os.fspath(input_path),))
        if not quiet:
            echo(f"Wrote {written} (layers {', '.join(layers)}).")
    if report_path is not None or summary_json_path is not None:
        from ..report import build_report

        # a description with a screen of its own carries the screen's record
        report = build_report(description=description, run_info=record if result is None else None,
                              config=report_config)
        for path in report.write(report_path, summary_json_path, protect=(os.fspath(input_path),)).values():
            if not quiet:
                echo(f"Wrote {path}.")


def _read(input_path, layer, x_column, y_column, config, with_screen):
    """Read and prepare INPUT (screening it first with --with-screen); which rows are suspect, if known."""
    from ..io import read_points
    from ..prepare import prepare

    frame, source = read_points(input_path, layer=layer, x=x_column, y=y_column, crs=config.crs, thousands=config.thousands)
    where = f"layer {source.layer!r} of {source.path!r}" if source.layer else repr(source.path)
    result = suspects = None
    if "screen_status" in frame.columns:
        # A screened layer: summarise without the rows it already calls suspect.
        suspects = (frame["screen_status"] == SUSPECT).to_numpy()
        prepared = prepare(frame, config, where=where)
    elif with_screen:
        from ..pipeline import screen_frame

        result = screen_frame(frame, config, source=source)
        suspects = (result.frame["screen_status"] == SUSPECT).to_numpy()
        prepared = result.prepared
    else:
        prepared = prepare(frame, config, where=where)
    return result, prepared, source, suspects, where


_FIGURE_FILES = (("histogram", "histogram.png"), ("strip_profiles", "strips.png"), ("variogram", "variogram.png"),
                 ("variogram_cloud", "variogram_cloud.png"), ("sqrt_difference_cloud", "sqrt_difference_cloud.png"))


def _save_figures(description, figures_dir, quiet: bool) -> None:
    saved = []
    for name, file_name in _FIGURE_FILES:
        if name in description.figures:
            description.figures[name].savefig(os.path.join(figures_dir, file_name), dpi=150)
            saved.append(file_name)
    if not quiet and saved:
        echo(f"Wrote {', '.join(saved[:-1])} and {saved[-1]} to {figures_dir}." if len(saved) > 1
                   else f"Wrote {saved[0]} to {figures_dir}.")
