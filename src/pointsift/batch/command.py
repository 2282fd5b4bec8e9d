"""What ``pointsift batch`` does, without click: plan, run, summary."""

from __future__ import annotations

import os
import sys
from collections.abc import Sequence

from ..config import ReportConfig, ScreenConfig, spell
from ..errors import ConfigError
from .outcomes import BatchResult
from .plan import load_plan, plan_from_args
from .progress import make_progress
from .runner import run_batch

__all__ = ["run_command"]


def run_command(
    inputs: Sequence[str],
    *,
    config: ScreenConfig | None = None,
    given: Sequence[str] = (),
    out_dir: str | os.PathLike | None = None,
    jobs: int | None = None,
    force: bool = False,
    quiet: bool = False,
    report: bool = False,
    layers: Sequence[str] = (),
    by: str | None = None,
    x: str | None = None,
    y: str | None = None,
    stream=None,
    report_config: ReportConfig | None = None,
) -> BatchResult:
    """What ``pointsift batch`` does, without click: plan, run, summary.

    One argument ending in ``.toml`` is a plan; anything else is the direct
    form (files, globs, directories) and needs ``config`` and ``out_dir``.
    Screen options and ``layers``/``by``/``x``/``y`` belong in the plan when
    one is given.

    Parameters
    ----------
    inputs : sequence of str
        ``PLAN.toml``, or files, globs and folders.
    config : ScreenConfig, optional
        The screen options of the direct form.
    given : sequence of str
        Names of the screen options the caller set (a plan refuses them).
    out_dir, jobs, force, quiet, report, layers, by, x, y, stream
        As the command-line options of ``pointsift batch``.
    report_config : ReportConfig, optional
        How the reports of the direct form are drawn (a plan sets its own).

    Returns
    -------
    BatchResult
        ``exit_code`` gives the process exit code (0, 3 or 130).

    Raises
    ------
    ConfigError
        The plan or arguments cannot be used (exit code 2).
    """
    if len(inputs) == 1 and str(inputs[0]).lower().endswith(".toml"):
        named = [*given, *(name for name, v in (("layers", layers), ("by", by), ("x", x), ("y", y), ("report", report))
                           if v)]
        if named:
            raise ConfigError(
                f"With a plan, screen options belong in the plan; remove {', '.join(spell(n) for n in named)} "
                f"or put them in [defaults] of the plan. Only {spell('out_dir')}, {spell('jobs')}, force and quiet apply."
            )
        plan = load_plan(inputs[0], out_dir=out_dir, jobs=jobs)
    else:
        if not inputs:
            raise ConfigError("Give a plan (PLAN.toml) or input files, globs or folders.")
        if config is None:
            raise ConfigError(f"Name the value column with {spell('value', 'COLUMN')} (or give a PLAN.toml).")
        if out_dir is None:
            raise ConfigError(f"Name the output folder with {spell('out_dir', 'DIR')} (or give a PLAN.toml that sets out_dir).")
        plan = plan_from_args(list(inputs), out_dir=out_dir, config=config, layers=list(layers) or None, by=by,
                              x=x, y=y, report=report, jobs=jobs or 1, report_config=report_config)
    progress = make_progress(quiet, stream)
    result = run_batch(plan, force=force, progress=progress)
    if not quiet:
        print(result.summary(), file=stream if stream is not None else sys.stderr, flush=True)
    return result
