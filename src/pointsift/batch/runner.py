"""Running a batch: skip what is up to date, screen the rest (in worker processes), write the index."""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import logging
import math
import multiprocessing
import os
import shutil
import signal
import threading
import time
from dataclasses import dataclass
from pathlib import Path

from .._version import __version__
from ..config import caller
from ..errors import ConfigError, InputError, OutputError
from ..io import file_sha256
from ..vocabulary import STATUSES
from .fingerprints import RECORD_SUFFIX, read_record, record_of, unit_fingerprint, write_record
from .index import write_index
from .outcomes import DONE, FAILED, NOT_RUN, SKIPPED, BatchResult, UnitOutcome
from .plan import BatchPlan
from .progress import SilentProgress
from .units import Unit, describe_failure, expand_units, group_labels, read_key, with_origin

__all__ = ["run_batch"]

logger = logging.getLogger(__name__)

_STAGING_PREFIX = ".batch-staging-"


@dataclass(frozen=True)
class _Task:
    unit: Unit
    out_path: Path
    report_path: Path | None
    record_path: Path
    staging: Path
    fingerprint: str
    input_sha256: str
    version: str
    #: a group's rows and their source, read once per layer by the expansion (None: the unit reads its file)
    read: tuple | None = None


def _group_filter(by: str, group: str | None):
    """Row selector for one group, by the same labels the expansion used."""

    def select(frame):
        if by not in frame.columns:
            raise InputError(f"grouping column {by!r} is no longer in the layer; it was there when the batch started.")
        labels = group_labels(frame[by])
        keep = [label == group for label in labels]
        return frame.loc[keep].copy()

    return select


def _group_rows(unit: Unit, layers_read: dict) -> tuple | None:
    """A group's rows (and their source) from the layer the expansion read, or None to read the file."""
    if unit.by is None or read_key(unit) not in layers_read:
        return None
    frame, source, labels = layers_read[read_key(unit)]
    keep = [label == unit.group for label in labels]
    return frame.loc[keep].copy(), source


def _lonlat_extent(bounds, crs) -> tuple[float, float, float, float] | None:
    if crs is None or bounds is None or not all(math.isfinite(float(b)) for b in bounds):
        return None
    from pyproj import CRS, Transformer

    source = CRS.from_user_input(crs)
    target = CRS.from_epsg(4326)
    if source == target:
        return tuple(float(b) for b in bounds)
    transformer = Transformer.from_crs(source, target, always_xy=True)
    return tuple(float(b) for b in transformer.transform_bounds(*bounds, densify_pts=21))


def _crs_text(crs) -> str:
    if crs is None:
        return ""
    try:
        from pyproj import CRS

        crs = CRS.from_user_input(crs)
        authority = crs.to_authority()
        return ":".join(authority) if authority else crs.name
    except Exception:
        return str(crs)


def _screen_unit(task: _Task) -> UnitOutcome:
    """Screen one unit into the staging folder (in a worker, or in this process with one job).

    Nothing is moved into place here: :func:`_commit` does that in the
    parent, so a unit counts as done exactly when its output is in place,
    whatever moment a Ctrl-C or SIGTERM comes at.
    """
    unit = task.unit
    started = time.perf_counter()
    staged_out, staged_report = _staged(task)
    try:
        with caller(unit.words):  # messages about this unit in the words of whoever set it up
            screened, crs, counts, seconds = (_run_campaigns if unit.command == "campaigns" else _run_screen)(
                task, staged_out, staged_report)
        bounds = screened.total_bounds if len(screened) else None
        outcome = UnitOutcome(
            unit=unit,
            outcome=DONE,
            counts={s: int(counts.get(s, 0)) for s in STATUSES},
            points=int(len(screened)),
            screen_seconds=seconds,
            output=task.out_path.name,
            report=task.report_path.name if task.report_path else "",
            input_sha256=task.input_sha256,
            fingerprint=task.fingerprint,
            input_crs=_crs_text(crs),
            extent_lonlat=_lonlat_extent(bounds, crs),
        )
    except Exception as exc:  # any failure of one unit is recorded; the batch continues
        logger.debug("unit %s failed", unit.name, exc_info=True)
        _discard(staged_out, staged_report)
        outcome = _failed(task, with_origin(describe_failure(exc, unit.path), unit))
    outcome.seconds = time.perf_counter() - started
    return outcome


def _run_screen(task: _Task, staged_out: Path, staged_report: Path | None):
    """A screen unit into the staging folder: (screened rows, their CRS, counts, seconds)."""
    from ..run import screen_file

    unit = task.unit
    run = screen_file(
        unit.path, staged_out, unit.config, layer=unit.layer, x=unit.x, y=unit.y, overwrite=True,
        frame_filter=_group_filter(unit.by, unit.group) if unit.by and task.read is None else None,
        source_note=f"{unit.by} = {unit.group if unit.group is not None else '(missing)'}" if unit.by else None,
        report_path=staged_report, report_config=unit.report_config, read=task.read,
    )
    return run.result.frame, run.result.prepared.input_crs or run.result.frame.crs, run.counts, run.seconds


def _run_campaigns(task: _Task, staged_out: Path, staged_report: Path | None):
    """A campaigns unit (plan ``command = "campaigns"``) into the staging folder, like :func:`_run_screen`."""
    from ..campaign_run import campaigns_file

    unit = task.unit
    run = campaigns_file([unit.path], staged_out, unit.campaign, layer=unit.layer, x=unit.x, y=unit.y, overwrite=True,
                         report_path=staged_report)
    return run.result.readings, run.result.readings.crs, run.counts, run.seconds


def _staged(task: _Task) -> tuple[Path, Path | None]:
    """Where a unit's output (and report) are written before they are moved into place."""
    return task.staging / task.out_path.name, (task.staging / task.report_path.name if task.report_path else None)


def _discard(*paths) -> None:
    for leftover in paths:
        if leftover is not None and leftover.exists():
            leftover.unlink()


def _failed(task: _Task, message: str) -> UnitOutcome:
    return UnitOutcome(unit=task.unit, outcome=FAILED, message=message, input_sha256=task.input_sha256,
                       fingerprint=task.fingerprint)


def _commit(task: _Task, outcome: UnitOutcome, outcomes: list, number: int) -> UnitOutcome:
    """Move a screened unit's staged files into place, write its record and count it, as one step.

    Ctrl-C and SIGTERM are held back for the few milliseconds this takes (and
    acted on right after), so the index never calls a unit ``not-run`` beside
    the output it made, nor ``done`` without it. A failed unit is only counted.
    """
    with _signals_held():
        if outcome.outcome == DONE:
            staged_out, staged_report = _staged(task)
            try:
                os.replace(staged_out, task.out_path)
                if staged_report is not None:
                    os.replace(staged_report, task.report_path)
                elif _remove_stale_report(task.out_path):
                    outcome.message = ("removed the report of an earlier run (this run writes none, so it no "
                                       "longer matched the output)")
                write_record(task.record_path, record_of(outcome, task.version))
            except OSError as exc:
                _discard(staged_out, staged_report)
                seconds = outcome.seconds
                outcome = _failed(task, f"the finished output could not be moved into place: {exc}")
                outcome.seconds = seconds
        outcomes[number] = outcome
    return outcome


def _remove_stale_report(out_path: Path) -> bool:
    """Remove ``<unit>.html`` beside a refreshed output when this run writes no report.

    An earlier run with reports left it; beside the new output it would show
    numbers the output no longer has. Returns True when a file was removed.
    """
    stale = out_path.with_suffix(".html")
    try:
        stale.unlink()
    except FileNotFoundError:
        return False
    return True


def _worker_init(owner: int | None = None) -> None:
    # Ctrl-C reaches the whole process group; the parent decides how to stop,
    # so a worker always finishes (or is terminated by) the parent.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if owner is not None:
        from ..lifetime import die_with_parent

        die_with_parent(owner)  # no orphan goes on writing when the batch is killed


class _StopRequest:
    """First Ctrl-C: finish the units in progress, start no new ones. Second: abandon them."""

    def __init__(self, progress: SilentProgress) -> None:
        self.requested = False
        self.progress = progress
        self._previous = None
        self._installed = False

    def __enter__(self) -> "_StopRequest":
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.getsignal(signal.SIGINT)
            self._previous_term = signal.getsignal(signal.SIGTERM)
            signal.signal(signal.SIGINT, self._handle)
            # SIGTERM (timeout, schedulers, kill) wants the run gone soon: like a second
            # Ctrl-C, the units in progress are abandoned; the index is still written
            signal.signal(signal.SIGTERM, self._terminate)
            self._installed = True
        return self

    def _terminate(self, signum, frame) -> None:
        self.requested = True
        raise KeyboardInterrupt

    def _handle(self, signum, frame) -> None:
        if self.requested:
            raise KeyboardInterrupt
        self.requested = True
        self.progress.note(
            "Stopping: finishing the inputs in progress, starting no new ones "
            "(Ctrl-C again abandons them; no partial file is left either way)."
        )

    def __exit__(self, *exc) -> None:
        if self._installed:
            signal.signal(signal.SIGINT, self._previous)
            signal.signal(signal.SIGTERM, self._previous_term)


@contextlib.contextmanager
def _no_interrupt():
    """Ignore Ctrl-C for a moment."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


@contextlib.contextmanager
def _signals_held():
    """Hold Ctrl-C and SIGTERM back during a short step; the handlers in force act on them after it."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    arrived: list[int] = []
    held = (signal.SIGINT, signal.SIGTERM)
    previous = {number: signal.signal(number, lambda signum, frame: arrived.append(signum)) for number in held}
    try:
        yield
    finally:
        for number in held:
            signal.signal(number, previous[number])
        for signum in arrived:
            handler = previous[signum]
            if callable(handler):
                handler(signum, None)
            elif handler == signal.SIG_DFL:
                signal.raise_signal(signum)


def _mp_context():
    """Worker processes that do not inherit the parent's threads or open files.

    ``forkserver`` (Linux) forks workers from a small server that has already
    imported the screening modules, so each worker starts in milliseconds;
    ``spawn`` elsewhere.
    """
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        # the guard makes the fork server die with this process (and its workers with it)
        context.set_forkserver_preload(["pointsift._forkserver_guard", "pointsift.batch.runner", "pointsift.run",
                                        "pointsift.pipeline", "pointsift.io"])
        return context
    return multiprocessing.get_context("spawn")


def run_batch(
    plan: BatchPlan,
    *,
    jobs: int | None = None,
    force: bool = False,
    progress: SilentProgress | None = None,
) -> BatchResult:
    """Run a batch: expand, skip what is up to date, screen the rest, write the index.

    Parameters
    ----------
    plan : BatchPlan
        A validated plan (:func:`load_plan`, :func:`plan_from_args`).
    jobs : int, optional
        Worker processes; overrides ``plan.jobs``. Results do not depend on it.
    force : bool
        Redo every unit even when its output is up to date.
    progress : reporter, optional
        From :func:`make_progress`; silent when omitted.

    Returns
    -------
    BatchResult
        Outcomes in plan order; ``exit_code`` is 0 (all done or up to date),
        3 (some failed) or 130 (stopped by Ctrl-C).

    Notes
    -----
    Each unit is screened into a staging folder inside the output directory
    and moved into place only when complete, so an output is either whole or
    absent. The first Ctrl-C lets units in progress finish and starts no new
    ones; a second abandons them (their staged files are removed). Either way
    the index is written with the units not run marked ``not-run``.
    """
    progress = progress or SilentProgress()
    jobs = jobs if jobs is not None else plan.jobs
    if not (isinstance(jobs, int) and jobs >= 1):
        raise ConfigError(f"jobs must be a whole number of worker processes, 1 or more, got {jobs!r}.")
    started = time.perf_counter()
    out_dir = plan.out_dir
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"Cannot create the output directory {str(out_dir)!r}: {exc}") from None
    lock = _take_lock(out_dir)
    try:
        for stale in out_dir.glob(f"{_STAGING_PREFIX}*"):  # left by a run that was killed
            shutil.rmtree(stale, ignore_errors=True)
        staging = out_dir / f"{_STAGING_PREFIX}{os.getpid()}"
        staging.mkdir(exist_ok=True)
        with contextlib.ExitStack() as shield:
            try:
                units, outcomes, interrupted = _run_units(plan, out_dir, staging, jobs, force, progress)
            finally:
                # from here a Ctrl-C pressed again must not lose the index (this takes well under a second)
                shield.enter_context(_no_interrupt())
                shutil.rmtree(staging, ignore_errors=True)
                progress.close()
            if interrupted and not units:  # stopped while listing the inputs: keep the previous index
                raise KeyboardInterrupt
            final: list[UnitOutcome] = []
            for unit, outcome in zip(units, outcomes):
                if outcome is None:
                    outcome = UnitOutcome(unit=unit, outcome=NOT_RUN, message="not run: the batch was stopped by Ctrl-C.")
                final.append(outcome)
            result = BatchResult(outcomes=final, seconds=0.0, interrupted=interrupted)
            result.index_csv, result.index_gpkg = write_index(final, out_dir)
    finally:
        lock.unlink(missing_ok=True)
    result.seconds = time.perf_counter() - started
    return result


_LOCK_NAME = ".batch.lock"


def _take_lock(out_dir: Path) -> Path:
    """Claim the output folder, so two batches (say, overlapping scheduled runs) never write it at once.

    The lock holds the owner's process id and start time. It is taken over only
    when that owner is provably dead (no such process, a zombie, or the id now
    used by a process that started later).
    """
    import json

    from ..lifetime import process_alive, process_start_time

    lock = out_dir / _LOCK_NAME
    for _ in range(2):
        try:
            handle = os.open(lock, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
        except FileExistsError:
            try:
                text = lock.read_text().strip()
                holder_record = json.loads(text) if text.startswith("{") else {"pid": int(text or "0")}
                holder, started = int(holder_record.get("pid") or 0), holder_record.get("started")
            except (OSError, ValueError, TypeError, AttributeError):
                holder, started = 0, None
            if holder and (holder == os.getpid() or process_alive(holder, started)):
                raise OutputError(
                    f"Another batch (process {holder}) is writing to {str(out_dir)!r}. Wait for it to finish, "
                    f"or choose another --out-dir. If no batch is running, delete {str(lock)!r}."
                ) from None
            lock.unlink(missing_ok=True)  # left by a run that was killed: its owner is gone
            continue
        with os.fdopen(handle, "w") as stream:
            stream.write(json.dumps({"pid": os.getpid(), "started": process_start_time(os.getpid())}))
        return lock
    raise OutputError(f"Cannot claim {str(out_dir)!r} for the batch; delete {str(lock)!r} and run again.")


def _run_units(plan, out_dir, staging, jobs, force, progress):
    """Expand, check what is up to date, screen the rest; returns (units, outcomes, interrupted)."""
    version = __version__
    units: list[Unit] = []
    outcomes: list[UnitOutcome | None] = []
    tasks: list[tuple[int, _Task]] = []
    hashes: dict[Path, str] = {}
    interrupted = False
    try:
        with _StopRequest(progress) as stop:
            layers_read: dict = {}  # grouped layers, read once by the expansion
            units = expand_units(plan, layers_read)
            for key, (_, source, _) in layers_read.items():
                hashes.setdefault(Path(key[0]), source.sha256)
            outcomes = [None] * len(units)
            progress.start(len(units))
            for number, unit in enumerate(units):
                if stop.requested:
                    break
                tick = time.perf_counter()
                if unit.problem is not None:
                    outcomes[number] = UnitOutcome(unit=unit, outcome=FAILED, message=with_origin(unit.problem, unit),
                                                   seconds=time.perf_counter() - tick)
                    progress.advance(outcomes[number])
                    continue
                try:
                    if unit.path not in hashes:
                        hashes[unit.path] = file_sha256(unit.path)
                except OSError as exc:
                    outcomes[number] = UnitOutcome(unit=unit, outcome=FAILED, message=describe_failure(exc, unit.path))
                    progress.advance(outcomes[number])
                    continue
                sha = hashes[unit.path]
                fingerprint = unit_fingerprint(unit, sha, version)
                out_path = out_dir / f"{unit.name}.gpkg"
                report_path = out_dir / f"{unit.name}.html" if unit.report else None
                record_path = out_dir / f"{unit.name}{RECORD_SUFFIX}"
                record = None if force else read_record(record_path)
                if (
                    record is not None
                    and record.get("fingerprint") == fingerprint
                    and out_path.exists()
                    and (report_path is None or report_path.exists())
                ):
                    extent = record.get("extent_lonlat")
                    outcomes[number] = UnitOutcome(
                        unit=unit, outcome=SKIPPED, counts=dict(record.get("counts") or {}),
                        points=record.get("points"), seconds=time.perf_counter() - tick,
                        screen_seconds=record.get("screen_seconds"), output=out_path.name,
                        report=report_path.name if report_path else "", input_sha256=sha,
                        fingerprint=fingerprint, input_crs=record.get("input_crs") or "",
                        extent_lonlat=tuple(extent) if extent else None,
                    )
                    progress.advance(outcomes[number])
                    continue
                tasks.append((number, _Task(unit, out_path, report_path, record_path, staging, fingerprint, sha,
                                            version, _group_rows(unit, layers_read))))
            layers_read.clear()  # each task holds its own rows now
            if jobs == 1 or len(tasks) <= 1:
                for number, task in tasks:
                    if stop.requested:
                        break
                    progress.advance(_commit(task, _screen_unit(task), outcomes, number))
            else:
                _run_pool(tasks, outcomes, jobs, stop, progress)
            interrupted = stop.requested
    except KeyboardInterrupt:
        interrupted = True
    return units, outcomes, interrupted


def _run_pool(tasks, outcomes, jobs, stop, progress) -> None:
    """Feed tasks to worker processes, a few at a time so a stop request takes effect quickly.

    A worker that dies (a crash in a compiled library, killed for memory)
    breaks the pool: every unit in flight is tried once more in a new pool,
    and a unit that breaks a pool twice is recorded as failed. When the run
    is abandoned (a second Ctrl-C, SIGTERM), units whose worker has already
    returned are still committed; the others are dropped with their staged files.
    """
    by_number = dict(tasks)
    pending = list(reversed(tasks))
    running: dict[cf.Future, int] = {}
    strikes: dict[int, int] = {}
    executor = None

    def collect(future) -> bool:
        """Record a finished future; False when its pool broke."""
        number = running[future]
        try:
            result = future.result()
        except cf.process.BrokenProcessPool as exc:
            del running[future]
            strikes[number] = strikes.get(number, 0) + 1
            if strikes[number] < 2:
                pending.append((number, by_number[number]))
                return False
            message = f"the worker process stopped unexpectedly while screening this input, twice ({exc})."
            progress.advance(_commit(by_number[number], _failed(by_number[number], message), outcomes, number))
            return False
        _commit(by_number[number], result, outcomes, number)
        del running[future]
        progress.advance(outcomes[number])
        return True

    try:
        while pending or running:
            if executor is None:
                executor = _make_executor(min(jobs, len(pending) or 1))
            while pending and not stop.requested and len(running) < 2 * jobs:
                number, task = pending.pop()
                running[executor.submit(_screen_unit, task)] = number
            if not running:
                break
            done, _ = cf.wait(running, return_when=cf.FIRST_COMPLETED)
            healthy = [collect(future) for future in done]
            if not all(healthy):
                # the rest of the broken pool fails the same way: collect them, then start afresh
                for future in cf.as_completed(list(running)):
                    collect(future)
                executor.shutdown(wait=True)
                executor = None
        if executor is not None:
            executor.shutdown(wait=True)
    except BaseException:
        _abandon(executor, running, by_number, outcomes)
        raise


def _make_executor(workers: int) -> cf.Executor:
    return cf.ProcessPoolExecutor(max_workers=workers, mp_context=_mp_context(), initializer=_worker_init,
                                  initargs=(os.getpid(),))


def _abandon(executor, running: dict, by_number: dict, outcomes: list) -> None:
    """Stop the workers now, after committing every unit whose worker has already returned.

    A unit still in a worker is dropped: the caller removes the staging
    folder, so nothing it was writing survives, and the index calls it
    ``not-run``. A unit committed before (its output in place) is never undone.
    """
    for future, number in list(running.items()):
        if outcomes[number] is None and future.done() and not future.cancelled() and future.exception() is None:
            _commit(by_number[number], future.result(), outcomes, number)
    if executor is not None:
        for process in list((getattr(executor, "_processes", None) or {}).values()):
            process.terminate()
        executor.shutdown(wait=False, cancel_futures=True)
