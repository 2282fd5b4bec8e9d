"""Command-line options generated from the option table (:data:`pointsift.config.OPTIONS`).

Each command takes exactly the table's options that list it; nothing here
declares an option's type, range, default or help. Values are converted and
checked by :func:`pointsift.config.convert`, so a wrong value gets the same
message as in Python or a plan, in the command line's words (``--crs``).
"""

from __future__ import annotations

import click

from ..config import (OPTIONS, DescribeConfig, Option, OptionError, ReportConfig, ScreenConfig, caller, convert,
                      options_for)

__all__ = ["table_options", "screen_options", "config_from_options", "describe_config_from_options",
           "report_config_from_options", "OptionType", "given_options", "pop_table_values", "output_options"]

_METAVARS = {"int": "INTEGER", "float": "NUMBER", "length": "LENGTH", "numbers": "NUMBERS", "text": "TEXT",
             "texts": "TEXT"}


class OptionType(click.ParamType):
    """A click type that converts through the option table."""

    def __init__(self, option: Option) -> None:
        self.option = option
        self.name = option.metavar or (
            "[" + "|".join(map(str, option.choices)) + "]" if option.kind == "choice" else _METAVARS[option.kind])

    def get_metavar(self, param, *args, **kwargs) -> str:  # click 8.1 and 8.2 signatures
        return self.name

    def convert(self, value, param, ctx):
        if not isinstance(value, str):  # a default, or converted already
            return value
        try:
            with caller("cli"):
                if self.option.kind == "texts":  # one item per use of a repeatable flag
                    return convert(self.option.name, [value])[0]
                return convert(self.option.name, value)
        except OptionError as exc:
            self.fail(exc.problem, param, ctx)


def _click_option(option: Option, command: str):
    names = [f"--{option.flag}", *([f"-{option.short}"] if option.short else []), option.dest]
    if option.kind == "bool":
        return click.option(*names, is_flag=True, help=option.help_text())
    return click.option(
        *names,
        type=OptionType(option),
        multiple=option.multiple,
        required=command in option.required,
        help=option.help_text(),
    )


def table_options(command: str):
    """Decorator adding every table option of ``command`` (in table order)."""

    def decorate(func):
        for option in reversed(options_for(command)):
            func = _click_option(option, command)(func)
        return func

    return decorate


def screen_options(func):
    """The options of ``pointsift screen`` (kept for code that decorated its own commands with it)."""
    return table_options("screen")(func)


def given_options(options: dict, config: str) -> dict:
    """The table options of ``config`` given on the command line, by option name."""
    chosen = {}
    for option in OPTIONS.values():
        if option.config != config or option.dest not in options:
            continue
        value = options[option.dest]
        if value is not None and value != ():
            chosen[option.name] = value[0] if option.kind == "texts" and not option.multiple else value
    return chosen


def config_from_options(options: dict) -> ScreenConfig:
    """Build a :class:`~pointsift.config.ScreenConfig` from parsed CLI options
    (options left unset keep their defaults; rules joining options live in the config)."""
    with caller("cli"):
        return ScreenConfig(**given_options(options, "screen"))


def describe_config_from_options(options: dict) -> DescribeConfig:
    """Build a :class:`~pointsift.config.DescribeConfig` from parsed CLI options."""
    with caller("cli"):
        return DescribeConfig(**given_options(options, "describe"))


def report_config_from_options(options: dict) -> ReportConfig:
    """Build a :class:`~pointsift.config.ReportConfig` from parsed CLI options."""
    with caller("cli"):
        return ReportConfig(**given_options(options, "report"))


def output_options(out_help: str, *, out_required: bool, report_help: str = "Also write a self-contained HTML "
                   "report (works offline).", summary_json: bool = True):
    """The output options a one-input command declares itself: ``--out``, ``--overwrite``, ``--report``
    and (unless ``summary_json=False``) ``--summary-json``, the same words in every command."""

    def decorate(func):
        if summary_json:
            func = click.option("--summary-json", "summary_json_path", default=None, type=click.Path(dir_okay=False),
                                help="Also write the report's numbers as JSON.")(func)
        func = click.option("--report", "report_path", default=None, type=click.Path(dir_okay=False),
                            help=report_help)(func)
        func = click.option("--overwrite", is_flag=True, help="Replace an existing output file.")(func)
        return click.option("--out", "out_path", required=out_required, default=None,
                            type=click.Path(dir_okay=False), help=out_help)(func)

    return decorate


def pop_table_values(options: dict, config: str | None) -> dict:
    """Remove and return the parsed values of the table options a command reads itself (``config=None``)."""
    return {o.name: options.pop(o.dest) for o in OPTIONS.values() if o.config == config and o.dest in options}
