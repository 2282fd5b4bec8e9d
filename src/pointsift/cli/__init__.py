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

from .._version import __version__
from ..config import caller
from ..errors import ConfigError, PointsiftError
from ..terminal import echo, printable
from .batch import batch
from .campaigns import campaigns
from .describe import describe
from .options import config_from_options, screen_options, table_options
from .screen import screen

__all__ = ["main", "cli", "screen_options", "table_options", "config_from_options", "EXIT_OK", "EXIT_DATA", "EXIT_USAGE",
           "EXIT_SOME_FAILED", "EXIT_INTERRUPTED"]

EXIT_OK = 0
EXIT_DATA = 1
EXIT_USAGE = 2
EXIT_SOME_FAILED = 3  # batch: finished, some inputs failed (set by the command, passed through)
EXIT_INTERRUPTED = 130  # Ctrl-C (128 + SIGINT, common practice)


def _setup_logging(verbose: int, quiet: bool) -> None:
    level = logging.WARNING
    if quiet:
        level = logging.ERROR
    elif verbose:
        level = logging.DEBUG if verbose > 1 else logging.INFO
    logging.basicConfig(level=level, format="%(levelname)s %(name)s: %(message)s")
    for handler in logging.getLogger().handlers:
        handler.setFormatter(_PrintableFormatter("%(levelname)s %(name)s: %(message)s"))


class _PrintableFormatter(logging.Formatter):
    """Log lines with control characters escaped, like everything else printed."""

    def format(self, record: logging.LogRecord) -> str:
        return printable(super().format(record), keep_newlines=True)


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
    # every message of this run names options as the command line writes them (--crs)
    ctx.with_resource(caller("cli"))
    ctx.obj["verbose"] = verbose
    ctx.obj["quiet"] = quiet
    _setup_logging(verbose, quiet)

for _command in (screen, describe, batch, campaigns):
    cli.add_command(_command)


def main(argv=None) -> int:
    """Entry point: run the CLI and map exceptions to exit codes."""
    from ..lifetime import terminate_as_interrupt

    verbose = any(a in ("-v", "-vv", "--verbose") for a in (argv if argv is not None else sys.argv[1:]))
    try:
        # SIGTERM (timeout, schedulers, kill) stops a run as Ctrl-C does: temporary files removed, exit 130
        with terminate_as_interrupt():
            code = cli.main(args=argv, prog_name="pointsift", standalone_mode=False)
    except click.exceptions.Abort:
        echo("Stopped.", err=True)
        return EXIT_INTERRUPTED
    except click.exceptions.ClickException as exc:
        exc.show()
        return EXIT_USAGE
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except ConfigError as exc:
        echo(f"Error: {exc}", err=True, lines=True)
        return EXIT_USAGE
    except PointsiftError as exc:
        echo(f"Error: {exc}", err=True, lines=True)
        return EXIT_DATA
    except KeyboardInterrupt:
        echo("Stopped.", err=True)
        return EXIT_INTERRUPTED
    except OSError as exc:  # disk full, permissions, a vanished folder
        echo(f"Error: {exc}. Check the path, its permissions and the free disk space.", err=True)
        return EXIT_DATA
    except Exception as exc:  # an internal error: say so plainly
        echo(f"Internal error: {type(exc).__name__}: {exc}", err=True)
        if verbose:
            traceback.print_exc()
        else:
            echo("Run again with -v to see the traceback, and report it with the command you ran.", err=True)
        return EXIT_DATA
    # ctx.exit(n) inside a command (batch: 3 when some inputs failed) comes back here as n
    return code if isinstance(code, int) else EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
