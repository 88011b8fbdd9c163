"""One line describing the machine, printed beside every benchmark figure."""

from __future__ import annotations

import os
import platform


def describe() -> str:
    cpu = platform.processor() or "unknown CPU"
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="replace") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    mem = ""
    try:
        pages = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
        mem = f", {pages / 2**30:.0f} GiB RAM"
    except (ValueError, OSError, AttributeError):
        pass
    return f"machine: {cpu}, {os.cpu_count()} logical CPUs{mem}, Python {platform.python_version()}, {platform.system()}"
