"""The run plan: how one request's head sums are run, and what that will cost.

:class:`RunPlan` is built once by :func:`spotcheck.engine.api.extract` and is
the only thing passed down through the evaluation: the series, the request
(position, count), the block size, the runner (threads or a Dask cluster),
the journal checkpoint and the progress callback.  The precision of each
window is chosen by the evaluation itself (``words``), so it is an argument
beside the plan, not part of it.

:func:`estimate_cost` says, from a short calibration of the kernel and the
twin on terms like the run's own, what a request will cost (CPU seconds,
memory, which path and why) and whether it can finish at all
(:attr:`CostEstimate.feasible`).
"""

from __future__ import annotations

import math
import os
import resource
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Any

from spotcheck.engine import backend
from spotcheck.engine.blocks import BlockProgress, BlockRunner, deep_block_k, thread_runner
from spotcheck.engine.series import Series

if TYPE_CHECKING:
    from spotcheck.engine.journal import Journal

__all__ = [
    "RunPlan",
    "CostEstimate",
    "estimate_series_cost",
    "cluster_cores_needed",
    "BLOCK_K",
    "window_plan",
]

# --- tuning -----------------------------------------------------------------
# Head terms per block in an ordinary run (no checkpoint, no cluster); blocks
# are the unit for worker threads and progress.  Checkpointed and cluster runs
# use blocks.deep_block_k (about 2^27 terms, 7-15 s each at the C kernel's
# 55-110 ns per term).
BLOCK_K = 1 << 18
# A run estimated above this many CPU seconds is refused: 100 core-years
# locally (so 10^15 digits of pi, about 4 core-years, still starts), and
# 10^5 core-years with a cluster (the sum has at most a few thousand blocks in
# flight at once, so more does not finish either).
MAX_LOCAL_CPU_SECONDS = 100 * 365.25 * 86400
MAX_CLUSTER_CPU_SECONDS = 100_000 * 365.25 * 86400
# The wall time a cluster of the size the estimate names would take (the
# "cluster hint"): a year.  A cluster run keeps at most cluster.MAX_IN_FLIGHT
# blocks, one core each, busy at once, so no hint names more cores than that.
CLUSTER_REACH_SECONDS = 365.25 * 86400
# Calibration: values of k timed per path, best of CALIBRATION_REPEATS.
CALIBRATION_K_KERNEL = 1 << 13
CALIBRATION_POINTS = 4  # places in the kernel's range of k where it is timed
CALIBRATION_K_TWIN = 1 << 7
CALIBRATION_REPEATS = 3
# Memory per finished block a journal keeps (its record), bytes.
BYTES_PER_BLOCK = 400
# ---------------------------------------------------------------------------


@dataclass
class RunPlan:
    """Everything the evaluation needs to know about how to run one request."""

    series: Series
    position: int
    count: int
    runner: BlockRunner
    block_k: int | None = None
    """Values of k per block; ``None``: :data:`BLOCK_K`, or :func:`deep_block_k`
    when there is a journal or a cluster."""
    journal: Journal | None = None
    on_block: Callable[[BlockProgress], None] | None = None
    deep: bool = False
    """A checkpointed or cluster run (larger blocks by default)."""

    @classmethod
    def local(cls, series: Series, position: int = 1, count: int = 1, workers: int = 1) -> RunPlan:
        """A plain plan: threads on this machine, no checkpoint, no progress."""
        return cls(series, position, count, thread_runner(workers))

    def block_size(self, d: int) -> int:
        if self.block_k is not None:
            return self.block_k
        if self.deep:
            return deep_block_k(self.series, self.series.head_length(d))
        return BLOCK_K


def window_plan(series: Series, position: int, count: int) -> list[tuple[int, int, int]]:
    """The windows ``(d, digits, words)`` that serve a request, as the evaluation cuts it."""
    from spotcheck.engine.evaluate import window_capacity, words_for

    out = []
    p, remaining = position, count
    while remaining > 0:
        d = 4 * (p - 1)
        n = min(remaining, window_capacity(series, d))
        out.append((d, n, words_for(series, d, n)))
        p += n
        remaining -= n
    return out


@dataclass(frozen=True)
class CostEstimate:
    """What a request will cost, from a short calibration on this machine."""

    position: int
    count: int
    terms: int
    """Head terms of every window (the tail is negligible)."""
    kernel_terms: int
    twin_terms: int
    path: str
    """``"compiled"``, ``"twin"`` or ``"compiled+twin"``."""
    why: str
    """Why the twin takes terms ("" when it takes none)."""
    ns_per_term_kernel: float
    ns_per_term_twin: float
    cpu_seconds: float
    wall_seconds: float
    """``cpu_seconds`` over the workers (or the cluster's, when known)."""
    workers: int
    memory_bytes: int
    """Resident memory expected at the end: this process now, plus the block records a
    checkpoint keeps (a run without one keeps only the blocks in flight)."""
    blocks: int
    windows: int
    feasible: bool
    limit_seconds: float
    """CPU seconds above which the request is refused."""
    hint: str | None
    """What would make an infeasible request feasible: ``"cluster"`` (with ``cluster_cores``), or ``None``."""
    cluster_cores: int | None = None
    """Cores of a Dask cluster that would finish the head sum within :data:`CLUSTER_REACH_SECONDS`
    when this machine's workers would not (None: no cluster was considered, this machine is enough,
    or more cores than a cluster run keeps busy would be needed)."""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def _best_ns(fn: Callable[..., tuple[int, int]], *args: Any) -> float:
    """Best-of-N nanoseconds per term of ``fn(*args)``."""
    best = math.inf
    for _ in range(CALIBRATION_REPEATS):
        t0 = time.perf_counter()
        _, terms = fn(*args)
        dt = time.perf_counter() - t0
        if terms:
            best = min(best, dt / terms * 1e9)
    return best if best < math.inf else 0.0


def _rss_bytes() -> int:
    try:
        with open("/proc/self/statm", encoding="ascii") as fh:
            return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):  # pragma: no cover - not Linux
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def estimate_series_cost(
    series: Series,
    position: int,
    count: int,
    *,
    workers: int = 1,
    cluster: bool = False,
    block_k: int | None = None,
    deep: bool = False,
) -> CostEstimate:
    """The cost of certified digits ``position ..`` of ``series`` (one evaluation per window)."""
    args = (series.m, series.s, series.e, series.q, series.alternating, series.js, series.cs)
    per_k = len(series.js)
    kernel_terms = twin_terms = blocks = 0
    ns_kernel = ns_twin = 0.0
    reasons: list[str] = []
    windows = window_plan(series, position, count)
    for d, _, words in windows:
        big_d = d - series.shift
        k_total = series.head_length(d)
        split = backend.kernel_split(series, big_d, words, k_total)
        k_kernel = min(split.k_split, k_total)
        kernel_terms += k_kernel * per_k
        twin_terms += (k_total - k_kernel) * per_k
        if split.reason and k_kernel < k_total and split.reason not in reasons:
            reasons.append(split.reason)
        size = block_k or (deep_block_k(series, k_total) if deep else BLOCK_K)
        blocks += -(-k_total // size)
        # Calibrate on terms like the run's own.  A term's cost follows its exponent's bits
        # (D - e k: long near k = 0, short near the end) and its modulus (which ladder), so the
        # kernel is timed at CALIBRATION_POINTS spread over its whole range and averaged; the
        # end of the range alone, with its short exponents, underestimated by 1.6 times.
        if k_kernel > 0 and ns_kernel == 0.0:
            samples = []
            for i in range(CALIBRATION_POINTS):
                mid = (2 * i + 1) * k_kernel // (2 * CALIBRATION_POINTS)
                k0 = max(0, mid - CALIBRATION_K_KERNEL // 2)
                k1 = min(k_kernel, k0 + CALIBRATION_K_KERNEL)
                samples.append(_best_ns(backend.head_sum, big_d, k0, k1, *args, words))
            ns_kernel = sum(samples) / len(samples)
        if k_kernel < k_total and ns_twin == 0.0:
            k1 = k_total
            k0 = max(k_kernel, k1 - CALIBRATION_K_TWIN)
            ns_twin = _best_ns(backend.head_sum_py, big_d, k0, k1, *args, words)
    path = "compiled+twin" if kernel_terms and twin_terms else "twin" if twin_terms else "compiled"
    cpu = (kernel_terms * ns_kernel + twin_terms * ns_twin) / 1e9
    workers = max(1, workers)
    limit = MAX_CLUSTER_CPU_SECONDS if cluster else MAX_LOCAL_CPU_SECONDS
    feasible = cpu <= limit
    cores = cluster_cores_needed(cpu) if not cluster and cpu <= MAX_CLUSTER_CPU_SECONDS else None
    if cores is not None and feasible and cores <= workers:
        cores = None  # this machine's workers finish it within the same time
    hint = "cluster" if not feasible and cores is not None else None
    return CostEstimate(
        position=position,
        count=count,
        terms=kernel_terms + twin_terms,
        kernel_terms=kernel_terms,
        twin_terms=twin_terms,
        path=path,
        why="; ".join(reasons),
        ns_per_term_kernel=round(ns_kernel, 2),
        ns_per_term_twin=round(ns_twin, 2),
        cpu_seconds=cpu,
        wall_seconds=cpu / workers,
        workers=workers,
        memory_bytes=_rss_bytes() + (BYTES_PER_BLOCK * blocks if deep else 0),
        blocks=blocks,
        windows=len(windows),
        feasible=feasible,
        limit_seconds=limit,
        hint=hint,
        cluster_cores=cores,
    )


def cluster_cores_needed(cpu_seconds: float) -> int | None:
    """Cores that finish ``cpu_seconds`` within :data:`CLUSTER_REACH_SECONDS`, or None when that is more
    than a cluster run keeps busy (:data:`spotcheck.engine.cluster.MAX_IN_FLIGHT` blocks at once).

    >>> cluster_cores_needed(200 * 365.25 * 86400), cluster_cores_needed(13_400 * 365.25 * 86400)
    (200, None)
    """
    from spotcheck.engine.cluster import MAX_IN_FLIGHT

    cores = max(1, math.ceil(cpu_seconds / CLUSTER_REACH_SECONDS))
    return cores if cores <= MAX_IN_FLIGHT else None
