"""Processes stop when asked and die with their parent (pointsift.lifetime)."""

import os
import signal
import subprocess
import sys
import time

import pytest

from pointsift.lifetime import die_with_parent, process_alive, process_start_time, terminate_as_interrupt


def test_sigterm_is_handled_like_ctrl_c():
    # Issue 10, item 6: SIGTERM (timeout, schedulers, kill) must clean up like SIGINT.
    with pytest.raises(KeyboardInterrupt):
        with terminate_as_interrupt():
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(1)
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL  # restored after the block


def test_process_alive_tells_dead_zombie_and_reused_ids():
    assert process_alive(os.getpid())
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    deadline = time.time() + 30
    while time.time() < deadline:  # exited but not reaped: a zombie is dead
        if not process_alive(child.pid):
            break
        time.sleep(0.05)
    assert not process_alive(child.pid)
    child.wait()
    assert not process_alive(child.pid)
    assert not process_alive(os.getpid(), start_time="not its start time")
    assert process_alive(os.getpid(), start_time=process_start_time(os.getpid()))


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="process listing through /proc")
def test_worker_dies_with_the_process_that_started_the_work(tmp_path):
    # Issue 10, item 6: batch workers went on writing for minutes after their parent was killed.
    marker = tmp_path / "worker.pid"
    worker_script = tmp_path / "worker.py"
    worker_script.write_text(
        "import os, sys, time\n"
        "from pointsift.lifetime import die_with_parent\n"
        "die_with_parent(int(sys.argv[1]), every=0.2)\n"
        f"open({str(marker)!r}, 'w').write(str(os.getpid()))\n"
        "time.sleep(120)\n"
    )
    owner_code = (
        "import os, subprocess, sys, time\n"
        f"subprocess.Popen([sys.executable, {str(worker_script)!r}, str(os.getpid())])\n"
        "time.sleep(120)\n"
    )
    owner = subprocess.Popen([sys.executable, "-c", owner_code])
    deadline = time.time() + 60
    while not (marker.exists() and marker.read_text()) and time.time() < deadline:
        time.sleep(0.1)
    worker = int(marker.read_text())
    assert process_alive(worker)
    owner.kill()
    owner.wait()
    deadline = time.time() + 5
    while process_alive(worker) and time.time() < deadline:
        time.sleep(0.1)
    alive = process_alive(worker)
    if alive:
        os.kill(worker, signal.SIGKILL)
    assert not alive, "the worker outlived its parent by more than 5 s"


# --- signals at random moments of whole runs ---------------------------------------------

_INPUT_SUFFIXES = {".gpkg", ".shp", ".csv", ".tsv", ".txt", ".parquet", ".geoparquet", ".pq", ".geojson", ".json", ".fgb"}


def _command(*args):
    return [sys.executable, "-c", "import sys; from pointsift.cli import main; sys.exit(main())", *map(str, args)]


def _session(sid: int) -> list[int]:
    """Live processes of a session (Linux /proc; field 6 of /proc/PID/stat is the session id)."""
    members = []
    for name in os.listdir("/proc"):
        if not name.isdigit():
            continue
        try:
            with open(f"/proc/{name}/stat", "rb") as handle:
                fields = handle.read().rsplit(b")", 1)[-1].split()
        except OSError:
            continue
        if int(fields[3]) == sid and fields[0] not in (b"Z", b"X"):
            members.append(int(name))
    return members


def _sound_output(path, rows: int) -> bool:
    import sqlite3

    with sqlite3.connect(f"file:{path}?mode=ro", uri=True) as db:  # Reference: SQLite's own integrity check
        return db.execute("PRAGMA integrity_check").fetchone()[0] == "ok" and db.execute('SELECT COUNT(*) FROM "screened"').fetchone()[0] == rows


def _interrupt_at_random(args, cwd, moment: float, signum) -> None:
    """Start a run in its own session, signal its main process after ``moment`` s, and
    check that no process of the run is alive 5 s later."""
    run = subprocess.Popen(_command(*args), cwd=cwd, start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    time.sleep(moment)
    if run.poll() is None:
        run.send_signal(signum)
    try:
        run.wait(timeout=5)
    except subprocess.TimeoutExpired:
        pass
    deadline = time.time() + 5
    while _session(run.pid) and time.time() < deadline:
        time.sleep(0.1)
    left = _session(run.pid)
    for pid in left:  # do not leave them behind for the rest of the suite
        os.kill(pid, signal.SIGKILL)
    if run.poll() is None:
        run.kill()
        run.wait()
    assert not left, f"{len(left)} process(es) of the run still alive 5 s after signal {signum}"


def _visible_to_a_later_run(folder, expected) -> list[str]:
    """Files a later run would take as inputs (by suffix), other than those expected."""
    return sorted(p.name for p in folder.rglob("*") if p.is_file() and p.suffix.lower() in _INPUT_SUFFIXES and p.name not in expected)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="process listing through /proc")
def test_screen_stopped_by_sigterm_or_sigkill_at_random_moments(tmp_path):
    # Issue 10, item 6: SIGTERM left ".out.XXXX.partial.gpkg" and a journal; SIGKILL the partial.
    import hashlib
    import random

    from conftest import build_wells, leftovers, write_points

    source = write_points(build_wells(150, seed=21), tmp_path / "wells.gpkg")
    args = ["screen", source, "--value", "level_m", "--id", "well_id", "--out", tmp_path / "out.gpkg", "--overwrite",
            "--report", tmp_path / "out.html", "--permutations", "99"]
    started = time.perf_counter()
    assert subprocess.run(_command(*args), capture_output=True).returncode == 0
    duration = time.perf_counter() - started
    moments = random.Random(20261202)
    for signum in (signal.SIGTERM, signal.SIGKILL):
        previous = hashlib.sha256((tmp_path / "out.gpkg").read_bytes()).hexdigest()
        _interrupt_at_random(args, tmp_path, moments.uniform(0.1, 0.9) * duration, signum)
        now = hashlib.sha256((tmp_path / "out.gpkg").read_bytes()).hexdigest()
        assert now == previous or _sound_output(tmp_path / "out.gpkg", 150)  # the previous output, or a whole new one
        assert _visible_to_a_later_run(tmp_path, {"wells.gpkg", "out.gpkg"}) == []
        if signum == signal.SIGTERM:
            assert leftovers(tmp_path) == []  # cleaned on the way out
        rerun = subprocess.run(_command(*args), capture_output=True, text=True)
        assert rerun.returncode == 0, rerun.stderr
        assert leftovers(tmp_path) == [] and _sound_output(tmp_path / "out.gpkg", 150)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="process listing through /proc")
def test_batch_with_two_jobs_stopped_by_sigterm_or_sigkill(tmp_path):
    # Issue 10, item 6: SIGTERM or SIGKILL of `batch --jobs 2` left the staging folder and the
    # lock, and its workers kept writing; a rerun took over the lock while they still wrote.
    import random

    from conftest import build_wells, write_points

    inputs = tmp_path / "in"
    inputs.mkdir()
    for number in range(4):
        write_points(build_wells(120, seed=30 + number), inputs / f"net{number}.gpkg")
    out = tmp_path / "out"
    args = ["batch", inputs, "--value", "level_m", "--out-dir", out, "--jobs", "2", "--permutations", "99", "--force"]
    started = time.perf_counter()
    first = subprocess.run(_command(*args), capture_output=True, text=True)
    assert first.returncode == 0, first.stderr
    duration = time.perf_counter() - started
    outputs = sorted(p.name for p in out.glob("*.gpkg") if p.name.startswith("net"))
    assert len(outputs) == 4
    moments = random.Random(7)
    for signum in (signal.SIGTERM, signal.SIGKILL):
        _interrupt_at_random(args, tmp_path, moments.uniform(0.3, 0.9) * duration, signum)
        for name in outputs:  # every output whole: the previous one or a new one
            assert _sound_output(out / name, 120)
        expected = set(outputs) | {"batch-index.gpkg", "batch-index.csv"} | {p.name for p in inputs.iterdir()}
        expected |= {name.replace(".gpkg", ".batch.json") for name in outputs}
        assert _visible_to_a_later_run(out, expected) == []
        assert _visible_to_a_later_run(inputs, expected) == []
        rerun = subprocess.run(_command(*args), capture_output=True, text=True)
        assert rerun.returncode == 0, rerun.stderr
        hidden = sorted(p.name for p in out.iterdir() if p.name.startswith("."))
        assert hidden == [], hidden  # no lock, staging folder or partial file left
        assert (out / "batch-index.csv").exists()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="process listing through /proc")
def test_sigterm_while_the_output_is_written_leaves_nothing(tmp_path):
    # Issue 10, item 6: SIGTERM during the write left the partial GeoPackage and its journal.
    # The run is held in the middle of writing (the first layer written, the next one waits).
    import hashlib

    from conftest import build_wells, leftovers, write_points

    source = write_points(build_wells(60, seed=22), tmp_path / "wells.gpkg")
    before = hashlib.sha256(source.read_bytes()).hexdigest()
    out = tmp_path / "out.gpkg"
    out.write_bytes(b"the previous output")
    held = tmp_path / "held"
    script = (
        "import sys, time\n"
        "import pointsift.io as io\n"
        "real = io._write_layer\n"
        "def slow(*args, **kwargs):\n"
        "    real(*args, **kwargs)\n"
        f"    open({str(held)!r}, 'w').close()\n"
        "    time.sleep(60)\n"
        "io._write_layer = slow\n"
        "from pointsift.cli import main\n"
        f"sys.exit(main(['screen', {str(source)!r}, '--value', 'level_m', '--out', {str(out)!r}, '--overwrite', '--permutations', '99']))\n"
    )
    run = subprocess.Popen([sys.executable, "-c", script], start_new_session=True, stderr=subprocess.PIPE, text=True)
    deadline = time.time() + 120
    while not held.exists() and time.time() < deadline and run.poll() is None:
        time.sleep(0.05)
    assert held.exists(), run.stderr.read() if run.poll() is not None else "the write never started"
    assert leftovers(tmp_path)  # the temporary file is there, half written
    run.send_signal(signal.SIGTERM)
    try:
        code = run.wait(timeout=5)
    except subprocess.TimeoutExpired:
        run.kill()
        code = run.wait()
    assert code == 130, code  # stopped, as by Ctrl-C (128 + SIGINT, common practice)
    assert leftovers(tmp_path) == []
    assert out.read_bytes() == b"the previous output"
    assert hashlib.sha256(source.read_bytes()).hexdigest() == before  # the input untouched
