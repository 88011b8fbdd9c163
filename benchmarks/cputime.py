"""CPU seconds of a whole process tree, for benchmark ratios that a busy shared machine disturbs less.

``become_subreaper()`` makes this process the reaper of its orphaned
descendants (Linux ``prctl(PR_SET_CHILD_SUBREAPER)``), so a fork server that
outlives the command it served, and the children it forked, are reaped here
and their CPU time lands in ``RUSAGE_CHILDREN``.  ``TreeCpu`` measures the
difference around a block and reaps what is left at its end.
"""

from __future__ import annotations

import ctypes
import os
import resource
import time

PR_SET_CHILD_SUBREAPER = 36


def become_subreaper() -> bool:
    """True when orphaned descendants will be reparented to this process (Linux only)."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def _children_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def reap(timeout: float = 5.0) -> None:
    """Wait for every descendant that is still ours (a fork server ends when its parent has)."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        try:
            pid, _ = os.waitpid(-1, os.WNOHANG)
        except ChildProcessError:
            return
        if pid == 0:
            time.sleep(0.01)


class TreeCpu:
    """``with TreeCpu() as cpu: subprocess.run(...)`` then ``cpu.seconds``: user + system time of the tree."""

    def __enter__(self) -> TreeCpu:
        reap()
        self._start = _children_cpu()
        self.seconds = 0.0
        return self

    def __exit__(self, *exc: object) -> None:
        reap()
        self.seconds = _children_cpu() - self._start
