"""How many physical cores this machine has: the default number of head-sum workers.

The head sum is bound by the integer and vector multipliers, which two SMT
siblings (hyper-threads) of one core share: on the project's 2-vCPU test
machine (one core, two siblings) one worker beat two at positions 10^7 and
10^8 in every round.  So the default is one worker per physical core, not
one per logical CPU.

Linux: each logical CPU's ``topology/core_id`` and ``physical_package_id``
under ``/sys/devices/system/cpu`` name its core; the CPUs in one
``thread_siblings_list`` share a core.  Only CPUs this process may run on
(``os.sched_getaffinity``) are counted.  Anywhere else, or when sysfs says
nothing, the logical CPU count (``os.cpu_count``) is the fallback.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["physical_cores"]

_SYSFS = Path("/sys/devices/system/cpu")


def _allowed_cpus() -> set[int] | None:
    try:
        return set(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        return None


def _read(path: Path) -> str | None:
    try:
        return path.read_text(encoding="ascii").strip()
    except (OSError, UnicodeDecodeError):
        return None


def _parse_cpu_list(text: str) -> set[int]:
    """``0-3,8,10-11`` -> {0, 1, 2, 3, 8, 10, 11}; ValueError if malformed."""
    cpus: set[int] = set()
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        lo, _, hi = part.partition("-")
        first, last = int(lo), int(hi) if hi else int(lo)
        if last < first:
            raise ValueError(text)
        cpus.update(range(first, last + 1))
    return cpus


def physical_cores(sysfs: Path = _SYSFS, allowed: set[int] | None = None) -> int:
    """Physical cores among the CPUs this process may use; at least 1.

    ``sysfs`` and ``allowed`` are for tests (a fake topology tree, a CPU set).
    """
    if allowed is None:
        allowed = _allowed_cpus()
    fallback = len(allowed) if allowed else (os.cpu_count() or 1)
    try:
        entries = [p for p in sysfs.glob("cpu[0-9]*") if p.name[3:].isdigit()]
    except OSError:
        return max(1, fallback)
    cores: set[tuple[str, ...]] = set()
    for entry in entries:
        cpu = int(entry.name[3:])
        if allowed is not None and cpu not in allowed:
            continue
        topo = entry / "topology"
        core, package = _read(topo / "core_id"), _read(topo / "physical_package_id")
        if core is not None and package is not None:
            cores.add(("id", package, core))
            continue
        siblings = _read(topo / "thread_siblings_list") or _read(topo / "core_cpus_list")
        if siblings is None:
            return max(1, fallback)  # a CPU whose core we cannot tell: count logical CPUs
        try:
            cores.add(("siblings", *map(str, sorted(_parse_cpu_list(siblings)))))
        except ValueError:
            return max(1, fallback)
    return len(cores) if cores else max(1, fallback)
