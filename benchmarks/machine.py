"""One line describing the machine, printed beside every benchmark figure.

Benchmarks run as scripts (``python benchmarks/NAME.py``), so this folder is
first on ``sys.path`` and ``from machine import describe`` finds this file.
"""

from __future__ import annotations

import os
import platform


def describe() -> str:
    """CPU model, logical CPUs, memory, OS, Python, the head-sum kernel and the load average."""
    cpu = platform.processor() or "unknown CPU"
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="replace") as fh:
            cpu = next((ln.split(":", 1)[1].strip() for ln in fh if ln.startswith("model name")), cpu)
    except OSError:
        pass
    mem = ""
    try:
        mem = f", {os.sysconf('SC_PHYS_PAGES') * os.sysconf('SC_PAGE_SIZE') / 2**30:.0f} GiB RAM"
    except (ValueError, OSError, AttributeError):
        pass
    try:
        load = f", load {os.getloadavg()[0]:.1f}"  # wall times on a busy shared machine mean little
    except OSError:
        load = ""
    from spotcheck.engine import backend

    return (
        f"machine: {cpu}, {os.cpu_count()} logical CPUs{mem}, {platform.system()} {platform.machine()}, "
        f"Python {platform.python_version()}; kernel: {backend.BACKEND_NOTE}{load}"
    )
