"""Tests of pointsift.batch.runner: real batches over invented programmes, resume, workers, Ctrl-C, the lock, reports.

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pyogrio
import pytest
import shapely

from pointsift import batch
from batch_data import FAST, line_of, make_programme, read_index, synthetic_points, write_gpkg


@pytest.mark.filterwarnings("ignore:GPKG. bad application_id:RuntimeWarning")
def test_batch_over_a_programme_with_bad_inputs(tmp_path, capsys):
    from pointsift.cli import main

    plan = make_programme(tmp_path)
    code = main(["batch", str(plan)])
    captured = capsys.readouterr()
    assert code == batch.EXIT_SOME_FAILED == 3
    out_dir = tmp_path / "screened"
    index = read_index(out_dir)
    assert index["outcome"].to_dict() == {
        "corrupt": "failed",
        "no_crs": "failed",
        "no_value": "failed",
        "north": "done",
        "south": "done",
        "regional__network-A": "done",
        "regional__network-B": "done",
        "regional__network-C": "done",
        "springs": "done",
    }
    assert "corrupt.gpkg" in index.loc["corrupt", "message"]
    assert "has no CRS" in index.loc["no_crs", "message"]
    # the message points at the plan entry to fix, and names the option as the plan writes it
    entry_line = line_of(plan.read_text(), "[[input]]")
    message = index.loc["no_crs", "message"]
    assert 'Pass crs = "EPSG:XXXX"' in message and "--crs" not in message
    assert message.endswith(f"(plan entry: plan.toml line {entry_line}, [[input]] #1)")
    assert "no column 'level_m'" in index.loc["no_value", "message"] and "head_m" in index.loc["no_value", "message"]
    assert "9 units: 6 done, 3 failed" in captured.err
    # each output read back with pyogrio: every input row is there, with a status word
    expected_rows = {"north": 90, "south": 70, "regional__network-A": 50, "regional__network-B": 40,
                     "regional__network-C": 30, "springs": 50}
    for unit, rows in expected_rows.items():
        screened = pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")
        assert len(screened) == rows
        assert set(screened["screen_status"]) <= {"suspect", "review", "ok", "unscreened"}
        counts = screened["screen_status"].value_counts()
        assert [int(index.loc[unit, s] or 0) for s in ("suspect", "review", "ok", "unscreened")] == [
            int(counts.get(s, 0)) for s in ("suspect", "review", "ok", "unscreened")]
        assert index.loc[unit, "output"] == f"{unit}.gpkg"
    # a group holds exactly its rows (reference: pandas selection on the input)
    regional = pyogrio.read_dataframe(tmp_path / "grouped" / "regional.gpkg")
    group_b = pyogrio.read_dataframe(out_dir / "regional__network-B.gpkg", layer="screened")
    assert group_b["well"].tolist() == regional.loc[regional["network"] == "B", "well"].tolist()
    # extent polygons in longitude/latitude contain the points (reference: pyproj + shapely)
    layer = pyogrio.read_dataframe(out_dir / "batch-index.gpkg", layer="batch_index").set_index("unit")
    north = pyogrio.read_dataframe(tmp_path / "data" / "north.gpkg").to_crs("EPSG:4326")
    assert layer.loc["north", "geometry"].buffer(1e-9).contains(shapely.MultiPoint(north.geometry.tolist()))
    assert layer.loc["corrupt", "geometry"] is None
    # nothing partial: only outputs, their records and the index
    expected = {f"{u}.gpkg" for u in expected_rows} | {f"{u}.batch.json" for u in expected_rows} | {
        "batch-index.csv", "batch-index.gpkg"}
    assert {p.name for p in out_dir.iterdir()} == expected


def test_rerun_skips_touched_input_redone_option_change_redoes_all(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    for seed in range(3):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(60, seed=seed)})
    out_dir = tmp_path / "out"

    def run(**options):
        plan = batch.plan_from_args([str(data)], out_dir=out_dir, options={**FAST, **options})
        result = batch.run_batch(plan)
        return {o.unit.name: o.outcome for o in result.outcomes}

    assert run() == {"net0": "done", "net1": "done", "net2": "done"}
    written = {p.name: p.stat().st_mtime_ns for p in out_dir.glob("net*.gpkg")}
    assert run() == {"net0": "skipped-up-to-date", "net1": "skipped-up-to-date", "net2": "skipped-up-to-date"}
    assert {p.name: p.stat().st_mtime_ns for p in out_dir.glob("net*.gpkg")} == written  # not rewritten
    # a new modification time alone is not a change of content
    os.utime(data / "net0.gpkg", ns=(1, 1))
    assert run()["net0"] == "skipped-up-to-date"
    # new content in one input redoes only that one
    changed = synthetic_points(60, seed=1)
    changed.loc[3, "level_m"] += 0.5
    (data / "net1.gpkg").unlink()
    write_gpkg(data / "net1.gpkg", {"wells": changed})
    assert run() == {"net0": "skipped-up-to-date", "net1": "done", "net2": "skipped-up-to-date"}
    # an option change redoes all
    assert run(k=8) == {"net0": "done", "net1": "done", "net2": "done"}
    assert set(run(k=8).values()) == {"skipped-up-to-date"}
    # a deleted output is made again; --force redoes everything
    (out_dir / "net2.gpkg").unlink()
    assert run(k=8)["net2"] == "done"
    plan = batch.plan_from_args([str(data)], out_dir=out_dir, options={**FAST, "k": 8})
    assert {o.outcome for o in batch.run_batch(plan, force=True).outcomes} == {"done"}


def test_jobs_2_writes_identical_attribute_tables_to_jobs_1(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    for seed in range(3):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(80, seed=seed)})
    network = np.repeat(np.array(["east", "west"], dtype=object), 50)
    write_gpkg(data / "regional.gpkg", {"wells": synthetic_points(100, seed=7, extra={"network": network})})
    results = {}
    for jobs in (1, 2):
        plan = batch.plan_from_args([str(data)], out_dir=tmp_path / f"jobs{jobs}", options=FAST, jobs=jobs)
        results[jobs] = batch.run_batch(plan)
        assert results[jobs].exit_code == 0
    names = sorted(p.name for p in (tmp_path / "jobs1").glob("*.gpkg") if p.name != "batch-index.gpkg")
    assert names == sorted(p.name for p in (tmp_path / "jobs2").glob("*.gpkg") if p.name != "batch-index.gpkg")
    assert len(names) == 4
    for name in names:
        one = pyogrio.read_dataframe(tmp_path / "jobs1" / name, layer="screened", read_geometry=False)
        two = pyogrio.read_dataframe(tmp_path / "jobs2" / name, layer="screened", read_geometry=False)
        # byte-identical: the same CSV text, every float written with full precision
        assert one.to_csv(float_format="%.17g").encode() == two.to_csv(float_format="%.17g").encode()
    fingerprints = [[o.fingerprint for o in results[j].outcomes] for j in (1, 2)]
    assert fingerprints[0] == fingerprints[1]


@pytest.mark.parametrize("jobs, presses", [(1, 1), pytest.param(2, 2, marks=pytest.mark.slow)])
def test_ctrl_c_keeps_finished_outputs_and_leaves_nothing_partial(tmp_path, jobs, presses):
    """Real signals to a real process (end to end); the moments are pinned down in the in-process tests below."""
    import signal
    import subprocess
    import sys
    import time

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(12):
        write_gpkg(data / f"net{seed:02d}.gpkg", {"wells": synthetic_points(400, seed=seed)})
    out_dir = tmp_path / "out"
    command = [sys.executable, "-m", "pointsift.cli", "batch", str(data), "--value", "level_m", "--permutations", "99",
               "--out-dir", str(out_dir), "--jobs", str(jobs)]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while not list(out_dir.glob("*.batch.json")) and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.02)
    for _ in range(presses):
        process.send_signal(signal.SIGINT)
        time.sleep(0.05)
    stdout, stderr = process.communicate(timeout=120)
    assert process.returncode == batch.EXIT_INTERRUPTED == 130, stderr
    index = read_index(out_dir)
    outcomes = index["outcome"]
    assert (outcomes == "done").sum() >= 1 and (outcomes == "not-run").sum() >= 1
    assert set(outcomes) <= {"done", "not-run"}
    for unit in index.index[outcomes == "done"]:
        assert len(pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")) == 400
    for unit in index.index[outcomes == "not-run"]:
        assert not (out_dir / f"{unit}.gpkg").exists() and not (out_dir / f"{unit}.batch.json").exists()
    leftovers = [p.name for p in out_dir.iterdir()
                 if not (p.name.endswith(".gpkg") or p.name.endswith(".batch.json") or p.name == "batch-index.csv")]
    assert leftovers == []
    assert "stopped by Ctrl-C" in stderr
    # a rerun finishes the rest and redoes nothing
    rerun = subprocess.run(command, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    again = read_index(out_dir)["outcome"]
    assert (again[outcomes == "done"] == "skipped-up-to-date").all()
    assert (again[outcomes == "not-run"] == "done").all()


class _PressingProgress(batch.SilentProgress):
    """Presses Ctrl-C (SIGINT to this process) ``presses`` times when the first unit is counted."""

    def __init__(self, presses: int) -> None:
        self.presses = presses
        self.counted = []

    def advance(self, outcome) -> None:
        import signal

        self.counted.append(outcome.unit.name)
        if len(self.counted) == 1:
            for _ in range(self.presses):
                signal.raise_signal(signal.SIGINT)  # the handler runs before raise_signal returns


class _FinishedAtOnce:
    """An executor whose every task has already finished when submit returns (a worker that
    was faster than the parent): the moment of the race, without depending on timing."""

    def __init__(self, workers: int) -> None:
        pass

    def submit(self, function, *args):
        import concurrent.futures as cf

        future = cf.Future()
        future.set_result(function(*args))
        return future

    def shutdown(self, wait=True, cancel_futures=False) -> None:
        pass


def _check_index_matches_the_folder(out_dir: Path, result) -> dict:
    outcomes = {o.unit.name: o.outcome for o in result.outcomes}
    index = read_index(out_dir)["outcome"].to_dict()
    assert index == outcomes
    for name, outcome in outcomes.items():
        # done exactly when the output and its record are in place (issue 9 review: not-run beside its output)
        in_place = (out_dir / f"{name}.gpkg").exists() and (out_dir / f"{name}.batch.json").exists()
        assert in_place == (outcome == "done"), (name, outcome)
    assert not [p for p in out_dir.iterdir() if p.name.startswith(".")]  # no staging folder, no lock
    return outcomes


def _twelve_inputs(tmp_path: Path) -> Path:
    data = tmp_path / "data"
    data.mkdir()
    for seed in range(12):
        write_gpkg(data / f"net{seed:02d}.gpkg", {"wells": synthetic_points(60, seed=seed)})
    return data


needs_main_thread = pytest.mark.skipif(
    __import__("threading").current_thread() is not __import__("threading").main_thread(),
    reason="signal handlers can only be installed in the main thread")


@needs_main_thread
def test_second_ctrl_c_commits_units_whose_worker_had_already_finished(tmp_path, monkeypatch):
    from pointsift.batch import runner

    data = _twelve_inputs(tmp_path)
    monkeypatch.setattr(runner, "_make_executor", _FinishedAtOnce)
    plan = batch.plan_from_args([str(data)], out_dir=tmp_path / "out", options=FAST, jobs=2)
    result = batch.run_batch(plan, progress=_PressingProgress(presses=2))
    assert result.interrupted and result.exit_code == 130
    outcomes = _check_index_matches_the_folder(tmp_path / "out", result)
    # 2 x jobs units were in flight and all had finished: the one counted first and the three
    # waiting to be collected are done; the eight never started are not run
    assert sorted(outcomes.values()).count("done") == 4
    assert sorted(outcomes.values()).count("not-run") == 8


@needs_main_thread
@pytest.mark.parametrize("jobs, presses", [(1, 1), (1, 2), pytest.param(2, 1, marks=pytest.mark.slow),
                                           pytest.param(2, 2, marks=pytest.mark.slow)])
def test_ctrl_c_in_process_index_matches_the_folder(tmp_path, jobs, presses):
    data = _twelve_inputs(tmp_path)
    plan = batch.plan_from_args([str(data)], out_dir=tmp_path / "out", options=FAST, jobs=jobs)
    result = batch.run_batch(plan, progress=_PressingProgress(presses=presses))
    assert result.interrupted and result.exit_code == 130
    outcomes = _check_index_matches_the_folder(tmp_path / "out", result)
    done = [name for name, outcome in outcomes.items() if outcome == "done"]
    assert set(outcomes.values()) <= {"done", "not-run"}
    if jobs == 1:  # one unit at a time: only the first was screened
        assert len(done) == 1
    elif presses == 1:  # 2 x jobs units were in flight: one press lets them all finish
        assert len(done) == 4
    else:  # a second press abandons those still in a worker
        assert 1 <= len(done) <= 4
    # a rerun redoes only what was not run
    again = batch.run_batch(plan)
    assert {o.unit.name: o.outcome for o in again.outcomes} == {
        name: ("skipped-up-to-date" if name in done else "done") for name in outcomes}


def _child_pids(pid: int) -> list[int]:
    found = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                stat = Path(f"/proc/{entry}/stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                found.append(int(entry))
    return found


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="finds worker processes through /proc (Linux)")
def test_a_worker_killed_mid_run_is_replaced_and_its_unit_redone(tmp_path):
    import signal
    import subprocess
    import sys
    import time

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(8):
        write_gpkg(data / f"n{seed}.gpkg", {"wells": synthetic_points(1000, seed=seed)})
    out_dir = tmp_path / "out"
    process = subprocess.Popen(
        [sys.executable, "-m", "pointsift.cli", "batch", str(data), "--value", "level_m", "--permutations", "99",
         "--out-dir", str(out_dir), "--jobs", "2"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    killed = None
    deadline = time.monotonic() + 120
    while killed is None and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.05)
        if not list(out_dir.glob("*.batch.json")):
            continue
        # workers are grandchildren of the batch process (through the forkserver)
        workers = [w for child in _child_pids(process.pid) for w in _child_pids(child)]
        if workers:
            os.kill(workers[0], signal.SIGKILL)  # as the kernel's out-of-memory killer would
            killed = workers[0]
    stdout, stderr = process.communicate(timeout=300)
    assert killed is not None, "no worker seen"
    assert process.returncode == 0, stderr
    index = read_index(out_dir)
    assert set(index["outcome"]) == {"done"} and len(index) == 8
    for unit in index.index:
        assert len(pyogrio.read_dataframe(out_dir / f"{unit}.gpkg", layer="screened")) == 1000


def test_a_second_batch_into_the_same_folder_is_refused_while_the_first_runs(tmp_path):
    import subprocess
    import sys

    from pointsift.errors import OutputError

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(40, seed=1)})
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    plan = batch.plan_from_args([str(tmp_path / "a.gpkg")], out_dir=out_dir, options=FAST)
    holder = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        (out_dir / ".batch.lock").write_text(str(holder.pid))
        with pytest.raises(OutputError, match=rf"Another batch \(process {holder.pid}\) is writing to"):
            batch.run_batch(plan)
    finally:
        holder.kill()
        holder.wait()
    # the holder is gone: its lock is stale and the batch takes the folder over
    result = batch.run_batch(plan)
    assert [o.outcome for o in result.outcomes] == ["done"]
    assert not (out_dir / ".batch.lock").exists()


def test_reports_beside_outputs_and_resumed_like_outputs(tmp_path):
    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(80, seed=2)})
    plan = tmp_path / "plan.toml"
    plan.write_text('[batch]\nout_dir = "out"\nreport = true\n[defaults]\nvalue = "level_m"\npermutations = 99\n'
                    '[[input]]\npath = "a.gpkg"\n')
    assert main(["-q", "batch", str(plan)]) == 0
    out_dir = tmp_path / "out"
    html = (out_dir / "a.html").read_text(encoding="utf-8")
    assert html.lstrip().lower().startswith("<!doctype html")
    assert read_index(out_dir).loc["a", "report"] == "a.html"
    assert main(["-q", "batch", str(plan)]) == 0
    assert read_index(out_dir).loc["a", "outcome"] == "skipped-up-to-date"
    (out_dir / "a.html").unlink()  # a missing report makes the unit out of date
    assert main(["-q", "batch", str(plan)]) == 0
    assert read_index(out_dir).loc["a", "outcome"] == "done" and (out_dir / "a.html").exists()
    # the direct form asks for reports with --report
    assert main(["-q", "batch", str(tmp_path / "a.gpkg"), "--value", "level_m", "--permutations", "99",
                 "--out-dir", str(tmp_path / "direct"), "--report"]) == 0
    assert (tmp_path / "direct" / "a.html").exists()


def test_a_rerun_without_reports_leaves_no_stale_report(tmp_path):
    # Issue 9, item 5: an earlier run's report must not sit beside a refreshed output it does not describe.
    import sqlite3

    from pointsift.cli import main

    write_gpkg(tmp_path / "a.gpkg", {"wells": synthetic_points(80, seed=2)})
    out_dir = tmp_path / "out"
    direct = ["-q", "batch", str(tmp_path / "a.gpkg"), "--value", "level_m", "--permutations", "99", "--out-dir", str(out_dir)]
    assert main([*direct, "--report"]) == 0
    assert (out_dir / "a.html").exists() and read_index(out_dir).loc["a", "report"] == "a.html"
    assert main([*direct, "--suspect-z", "4"]) == 0  # new options, no report: the output is refreshed
    index = read_index(out_dir)
    assert index.loc["a", "outcome"] == "done" and index.loc["a", "report"] == ""
    assert "removed the report of an earlier run" in index.loc["a", "message"]
    assert not (out_dir / "a.html").exists()
    # the GeoPackage index says the same (read with sqlite3, independently of pointsift and pyogrio)
    with sqlite3.connect(out_dir / "batch-index.gpkg") as db:
        assert db.execute("SELECT output, report FROM batch_index WHERE unit = 'a'").fetchone() == ("a.gpkg", "")


def test_groups_of_one_layer_read_and_hash_it_once_with_unchanged_results(tmp_path, monkeypatch):
    import pointsift.batch.runner as runner
    import pointsift.batch.units as units
    import pointsift.io as io
    import pointsift.run as run
    from pointsift.config import ScreenConfig
    from pointsift.pipeline import screen_frame

    network = np.repeat(np.array(["A", "B", "C"], dtype=object), [50, 40, 30])
    write_gpkg(tmp_path / "regional.gpkg", {"wells": synthetic_points(120, seed=4, extra={"network": network})})
    reads, hashes = [], []

    def counting(module, name, calls):
        original = getattr(module, name)

        def wrapper(path, *args, **kwargs):
            calls.append(str(path))
            return original(path, *args, **kwargs)

        monkeypatch.setattr(module, name, wrapper)

    counting(units, "read_points", reads)
    counting(run, "read_points", reads)
    counting(io, "file_sha256", hashes)  # read_points hashes through this one
    counting(runner, "file_sha256", hashes)
    plan = batch.plan_from_args([str(tmp_path / "regional.gpkg")], out_dir=tmp_path / "out", options=FAST,
                                by="network")
    result = batch.run_batch(plan)
    assert [o.outcome for o in result.outcomes] == ["done"] * 3
    assert len(reads) == 1 and len(hashes) == 1  # before: one read and one hash per group, and one more
    # each group's output is the screen of exactly its rows (reference: a pandas selection screened on its own)
    whole = pyogrio.read_dataframe(tmp_path / "regional.gpkg")
    for label in ("A", "B", "C"):
        alone = screen_frame(whole[whole["network"] == label].copy(), ScreenConfig(**FAST)).frame
        written = pyogrio.read_dataframe(tmp_path / "out" / f"regional__network-{label}.gpkg", layer="screened")
        assert written["well"].tolist() == alone["well"].tolist()
        assert written["screen_status"].tolist() == alone["screen_status"].tolist()
        assert np.allclose(written["screen_score"], alone["screen_score"], equal_nan=True)
    assert {o.input_sha256 for o in result.outcomes} == {io.file_sha256(tmp_path / "regional.gpkg")}


def _programme_csv(folder: Path) -> Path:
    from conftest import invented_programme

    frame = invented_programme(40, 8, seed=4, missing=0.0)
    frame.loc[150, "level_m"] = frame.loc[150, "level_m"] * 10  # a decimal slip
    path = folder / "readings.csv"
    frame.assign(x=frame.geometry.x, y=frame.geometry.y).drop(columns="geometry").to_csv(path, index=False)
    return path


def test_a_plan_entry_runs_the_campaign_screen_like_the_command(tmp_path):
    import sqlite3
    import textwrap

    from pointsift.cli import main

    _programme_csv(tmp_path)
    plan = tmp_path / "plan.toml"
    plan.write_text(textwrap.dedent("""
        [batch]
        out_dir = "out"
        [defaults]
        value = "level_m"
        id = "well_id"
        crs = "EPSG:32633"
        x = "x"
        y = "y"
        permutations = 99
        [[input]]
        path = "readings.csv"
        command = "campaigns"
        date = "date"
        min_campaigns = 5
    """))
    result = batch.run_batch(batch.load_plan(plan))
    assert [o.outcome for o in result.outcomes] == ["done"], result.outcomes[0].message
    assert main(["campaigns", str(tmp_path / "readings.csv"), "--value", "level_m", "--id", "well_id", "--date", "date",
                 "--crs", "EPSG:32633", "--x", "x", "--y", "y", "--permutations", "99", "--min-campaigns", "5",
                 "--out", str(tmp_path / "direct.gpkg")]) == 0
    query = "select well_id, reading_status, reading_score, reading_reasons from readings order by fid"
    with sqlite3.connect(tmp_path / "out" / "readings.gpkg") as con:  # an independent reader
        from_plan = con.execute(query).fetchall()
        layers = {r[0] for r in con.execute("select table_name from gpkg_contents")}
    with sqlite3.connect(tmp_path / "direct.gpkg") as con:
        direct = con.execute(query).fetchall()
    assert {"readings", "wells", "changes", "run_info"} <= layers
    assert from_plan == direct and from_plan[150][1] == "suspect"
    assert result.outcomes[0].counts == {s: sum(r[1] == s for r in direct) for s in ("suspect", "review", "ok", "unscreened")}
    # the campaign options are part of what makes the output up to date
    assert [o.outcome for o in batch.run_batch(batch.load_plan(plan)).outcomes] == ["skipped-up-to-date"]
    plan.write_text(plan.read_text().replace("min_campaigns = 5", "min_campaigns = 6"))
    assert [o.outcome for o in batch.run_batch(batch.load_plan(plan)).outcomes] == ["done"]


def test_campaign_keys_need_the_campaigns_command(tmp_path):
    import textwrap

    from pointsift.errors import ConfigError

    _programme_csv(tmp_path)
    plan = tmp_path / "plan.toml"
    plan.write_text(textwrap.dedent("""
        [batch]
        out_dir = "out"
        [[input]]
        path = "readings.csv"
        value = "level_m"
        date = "date"
        [[input]]
        path = "readings.csv"
        value = "level_m"
        command = "campaigns"
        date = "date"
        by = "well_id"
    """))
    with pytest.raises(ConfigError) as caught:
        batch.load_plan(plan)
    message = str(caught.value)
    assert "key 'date': is a campaign key: set command = \"campaigns\"" in message
    assert "key 'by': does not apply with command = \"campaigns\"" in message
