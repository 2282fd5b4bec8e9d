"""The screening report: one self-contained HTML page and a JSON summary with the same numbers.

:func:`build_report` takes a screen (:class:`~pointsift.pipeline.ScreenResult`)
or a prepared layer from ``describe`` and returns a :class:`Report`: the page
(:attr:`Report.html`) and the summary document (:attr:`Report.summary`,
validated by ``summary.schema.json`` in this package). It computes nothing: every
number is the run's own (:class:`pointsift.findings.Findings`). The page works
offline and alone: figures are inline PNGs, styles and the small sorting
script are inline, and nothing is fetched from a network.

Examples
--------
>>> from pointsift.report import build_report            # doctest: +SKIP
>>> report = build_report(result)                         # doctest: +SKIP
>>> report.write("report.html", "summary.json")           # doctest: +SKIP
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

from ..errors import OutputError
from ..io import write_text
from .contents import SUMMARY_FORMAT, SUMMARY_VERSION, collect, flagged_rows
from .html import render

__all__ = [
    "Report",
    "build_report",
    "load_summary_schema",
    "validate_summary",
    "flagged_rows",
    "SUMMARY_FORMAT",
    "SUMMARY_VERSION",
    "SCHEMA_FILE",
]

#: File name of the JSON schema of the summary, inside this package.
SCHEMA_FILE = "summary.schema.json"


@dataclass
class Report:
    """A rendered report.

    Attributes
    ----------
    html : str
        The page.
    summary : dict
        The summary document (plain JSON values; see :func:`load_summary_schema`).
    figures : dict
        The figures as data URIs, by name.
    """

    html: str
    summary: dict
    figures: dict = field(default_factory=dict, repr=False)

    def summary_json(self) -> str:
        """The summary as JSON text (UTF-8, indented, no NaN)."""
        return json.dumps(self.summary, indent=1, ensure_ascii=False, allow_nan=False) + "\n"

    def write(self, html_path=None, json_path=None, *, protect: tuple = ()) -> dict:
        """Write the page and/or the summary, each atomically.

        Parameters
        ----------
        html_path, json_path : path-like, optional
            Targets (None: not written).
        protect : tuple of path-like
            Paths that must never be written (the input).

        Returns
        -------
        dict
            ``{"report": path, "summary_json": path}`` for what was written.

        Raises
        ------
        OutputError
            When a target is an input, or its folder does not exist.
        """
        written = {}
        if html_path is not None:
            written["report"] = str(_write_text(html_path, self.html, protect))
        if json_path is not None:
            written["summary_json"] = str(_write_text(json_path, self.summary_json(), protect))
        return written


def _write_text(path, text: str, protect: tuple) -> Path:
    from ..io import check_output_paths

    target = Path(path)
    # the input with its side files (a shapefile's .dbf, .prj...), and the run's other outputs
    check_output_paths([("The report", target)], [p for p in protect if p])
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"Folder {str(folder)!r} for {str(target)!r} does not exist. Create it first or choose another path.")
    write_text(target, text)
    return target


def build_report(
    result=None,
    *,
    description=None,
    run_info: dict | None = None,
    config=None,
    seed: int = 0,
    extra_sections=(),
) -> Report:
    """Build the report of a screen, or of a described layer, from its findings.

    Nothing is computed here: the numbers are the run's own
    (``result.findings`` or ``description.findings``), so the page, the JSON
    and the GeoPackage agree.

    Parameters
    ----------
    result : ScreenResult, optional
        A screen. Gives every section.
    description : Description, optional
        Without a screen: a description (``pointsift describe``); with a
        screen of its own (``describe(..., screen=result)``) it gives every
        section too.
    run_info : dict, optional
        Run record; ``result.run_info`` by default.
    config : ReportConfig, optional
        How the page is drawn (points drawn, suspects named by id, title);
        the defaults of :class:`pointsift.config.ReportConfig` when omitted.
    seed : int
        Seed of the drawing samples.
    extra_sections : sequence of (anchor, title, html)
        Sections placed first on the page (the campaign report's,
        :mod:`pointsift.report.campaigns`); their numbers are not in the summary.

    Returns
    -------
    Report

    Raises
    ------
    ConfigError
        When neither a result nor a description is given.
    """
    from ..config import ReportConfig
    from ..errors import ConfigError
    from ..record import CAUTION, library_versions

    config = ReportConfig() if config is None else config

    if result is None and description is None:
        raise ConfigError("build_report needs a screen result or a description; pass result= or description=.")
    if description is not None:
        findings = description.findings
        if run_info is None and description.screen is not None:
            run_info = description.screen.run_info
    else:
        findings = result.findings
        run_info = result.run_info if run_info is None else run_info
    collected = collect(findings, run_info=dict(run_info or {}), max_points=config.report_points,
                        max_labels=config.report_labels, seed=seed, title=config.report_title,
                        versions=library_versions(), caution=CAUTION)
    return Report(html=render(collected.summary, collected.figures, extra_sections), summary=collected.summary,
                  figures=collected.figures)


def load_summary_schema() -> dict:
    """The JSON schema (draft 2020-12) of the summary document."""
    text = resources.files(__package__).joinpath(SCHEMA_FILE).read_text(encoding="utf-8")
    return json.loads(text)


def validate_summary(summary: dict) -> None:
    """Check a summary document against :func:`load_summary_schema` (needs the ``jsonschema`` package).

    Raises
    ------
    jsonschema.ValidationError
        Naming the first field that does not match.
    """
    import jsonschema

    jsonschema.validate(summary, load_summary_schema(), cls=jsonschema.Draft202012Validator)
