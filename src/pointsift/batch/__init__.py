"""Batch screening: many files, layers and groups, unattended and resumable.

A batch is described by a *plan*: a TOML file (or the equivalent command-line
arguments) listing inputs and the screen options for each. The plan is
validated completely before any work starts. Each input is then expanded into
*units*, the things that are screened on their own and give one output
GeoPackage each:

* a file (CSV, Shapefile, GeoParquet, ...): one unit;
* a GeoPackage: one unit per layer (all layers, or the layers named);
* a layer split by a column (``by = "network_id"``): one unit per distinct
  value of that column.

Outputs go to one directory: ``<unit>.gpkg`` per unit (plus ``<unit>.html``
when reports are asked for and available), a small ``<unit>.batch.json`` beside each output
recording how it was made, and the batch index ``batch-index.csv`` /
``batch-index.gpkg`` listing every unit with its outcome.

A unit is skipped (``skipped-up-to-date``) when its output and record exist
and the record's fingerprint (SHA-256 of the input content, the effective
options and the pointsift version) matches the current one. A unit that
fails is recorded with its message and the batch carries on.

Exit codes (see :func:`run_batch` and ``docs/batch.md``): 0 every unit done or
up to date, 3 some units failed, 2 unusable plan, 130 stopped by Ctrl-C.
"""

from .command import run_command
from .fingerprints import RECORD_SUFFIX, unit_fingerprint
from .index import INDEX_COLUMNS, INDEX_LAYER, INDEX_STEM, index_frame, write_index
from .outcomes import (
    DONE,
    EXIT_BAD_PLAN,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_SOME_FAILED,
    FAILED,
    NOT_RUN,
    OUTCOMES,
    SKIPPED,
    BatchResult,
    UnitOutcome,
)
from .plan import BatchPlan, InputSpec, load_plan, parse_plan, plan_from_args
from .progress import LineProgress, RichProgress, SilentProgress, make_progress
from .runner import run_batch
from .units import DIRECTORY_SUFFIXES, Unit, expand_units, group_labels

__all__ = [
    "EXIT_OK",
    "EXIT_SOME_FAILED",
    "EXIT_BAD_PLAN",
    "EXIT_INTERRUPTED",
    "DONE",
    "SKIPPED",
    "FAILED",
    "NOT_RUN",
    "OUTCOMES",
    "INDEX_COLUMNS",
    "INDEX_LAYER",
    "INDEX_STEM",
    "RECORD_SUFFIX",
    "DIRECTORY_SUFFIXES",
    "InputSpec",
    "BatchPlan",
    "Unit",
    "UnitOutcome",
    "BatchResult",
    "load_plan",
    "parse_plan",
    "plan_from_args",
    "expand_units",
    "group_labels",
    "unit_fingerprint",
    "run_batch",
    "index_frame",
    "write_index",
    "make_progress",
    "run_command",
    "LineProgress",
    "RichProgress",
    "SilentProgress",
]
