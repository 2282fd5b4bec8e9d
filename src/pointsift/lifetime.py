"""Processes that stop when asked and die with their parent.

* :func:`terminate_as_interrupt`: SIGTERM (what ``timeout``, schedulers and
  ``kill`` send) is handled like Ctrl-C, so a stopped run cleans up the same way.
* :func:`die_with_parent`: called in a worker process, makes it exit as soon as
  the process that started the work is gone (Linux: ``PR_SET_PDEATHSIG``;
  everywhere: a watcher thread), so no orphan goes on writing outputs.
* :func:`process_alive`: whether a process id is a live process, and the
  same one (its start time), for locks taken over only from dead owners.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading
import time

__all__ = ["terminate_as_interrupt", "die_with_parent", "process_alive", "process_start_time"]


def _interrupt(signum, frame):
    raise KeyboardInterrupt


@contextlib.contextmanager
def terminate_as_interrupt():
    """Within the block, SIGTERM raises KeyboardInterrupt in the main thread, as Ctrl-C does.

    Examples
    --------
    >>> with terminate_as_interrupt():
    ...     pass
    """
    installed = threading.current_thread() is threading.main_thread()
    previous = signal.getsignal(signal.SIGTERM) if installed else None
    if installed:
        signal.signal(signal.SIGTERM, _interrupt)
    try:
        yield
    finally:
        if installed:
            signal.signal(signal.SIGTERM, previous)


def _set_parent_death_signal() -> bool:
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        PR_SET_PDEATHSIG = 1  # <linux/prctl.h>
        return libc.prctl(PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def die_with_parent(owner_pid: int, *, every: float = 0.5) -> None:
    """Make this (worker) process exit when ``owner_pid`` or its own parent is gone.

    Parameters
    ----------
    owner_pid : int
        The process that started the work (the batch), which may be the
        grandparent (a fork server sits between them).
    every : float
        Seconds between the watcher thread's checks.
    """
    _set_parent_death_signal()  # the parent (fork server) dies -> SIGKILL at once
    parent = os.getppid()
    started = process_start_time(owner_pid)

    def watch() -> None:
        while True:
            time.sleep(every)
            if os.getppid() != parent or not process_alive(owner_pid, started):
                os._exit(1)  # nothing to clean here: the owner's next run removes what was staged

    threading.Thread(target=watch, name="pointsift-die-with-parent", daemon=True).start()


def process_start_time(pid: int) -> str | None:
    """Start time of a process (Linux: clock ticks since boot, from /proc), None when unknown."""
    try:
        with open(f"/proc/{int(pid)}/stat", "rb") as handle:
            stat = handle.read().decode("ascii", "replace")
    except OSError:
        return None
    # the command name (field 2) may hold spaces and parentheses: split after the last ")"
    fields = stat.rsplit(")", 1)[-1].split()
    return fields[19] if len(fields) > 19 else None


def process_alive(pid: int, start_time: str | None = None) -> bool:
    """Whether ``pid`` is a live process (and, given ``start_time``, the same one, not a reused id).

    Examples
    --------
    >>> process_alive(os.getpid())
    True
    """
    if not isinstance(pid, int) or pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass  # exists, owned by someone else
    except OSError:
        return False
    if start_time is not None:
        now = process_start_time(pid)
        if now is not None and now != start_time:
            return False  # the id was reused by another process
    if sys.platform.startswith("linux"):
        try:
            with open(f"/proc/{pid}/stat", "rb") as handle:
                state = handle.read().rsplit(b")", 1)[-1].split()[0]
            if state in (b"Z", b"X"):
                return False  # a zombie is dead, only not yet reaped
        except OSError:
            pass
    return True
