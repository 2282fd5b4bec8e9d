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
