"""Deep positions on one machine (issue 8): wall time, thread speed-up, projection to N cores.

    python benchmarks/deep.py            # full runs at 10^8 and 10^9 (several minutes)
    python benchmarks/deep.py --quick    # 10^9 from a sample of its blocks, extrapolated
    python benchmarks/deep.py --path portable   # the same on one kernel path (default: the fastest)

For 14 certified hex digits of pi (the default formula) at positions 10^8
and 10^9, the head sum is cut into the blocks a checkpointed or cluster run
uses (``blocks.deep_block_k``) and run on 1 and on 2 threads of this machine.
A full run prints the digits and the wall time; ``--quick`` times an evenly
spread sample of the blocks of 10^9 and extrapolates from the sampled share
of terms, and says so.  The projection to N cores divides the one-thread
time by N times the measured two-thread efficiency; a cluster adds Dask's
per-task overhead (milliseconds per block of about a second or more).
The last line projects position 10^12 in core-hours (one-thread CPU time
grows in proportion to the position).

Measured 2026-12-02 on a 2-vCPU AMD EPYC VM, Python 3.11.7, the int128
kernel of commit 8659246 (load average about 1.5 from other jobs):

    position 10^8: 1 thread 14.0 s, 2 threads 7.1 s (ratio 1.99), ECB840E21926EC
    position 10^9: 1 thread 5.7 min, 2 threads 2.8 min (ratio 2.00), 85895585A0428B
    (both equal to the 1997 table; the kernel of commit a2959b7 took 20.4 s
    and 4.2 min: faster beyond moduli of 2^32, slower below)

and after the vector paths (issue 14, path avx512ifma, load about 1.5):
``--quick --position 1000000000`` 19.0 s on one thread (18.9 s of CPU time),
10.1 s on two, 10^12 projected at 5.3 core-hours of one-thread CPU time
(DEVELOPERS.md has the figures of each run).
"""

from __future__ import annotations

import argparse
import os
import sys
import time

from kernel import cpu_flags  # noqa: E402  (benchmarks/kernel.py)
from machine import describe  # noqa: E402  (this folder is first on sys.path)

from spotcheck.engine import backend
from spotcheck.engine.api import estimate_cost, extract
from spotcheck.engine.blocks import BlockRequest, block_problem, deep_block_k, thread_runner
from spotcheck.engine.evaluate import words_for
from spotcheck.engine.series import series_of
from spotcheck.formulas import get_constant

# --- settings ------------------------------------------------------------------
DIGITS = 14
POSITIONS = (10**8, 10**9)
QUICK_SAMPLE = 16  # --quick: every 16th block of 10^9
PROJECT_CORES = (8, 32, 128, 512)
# Bailey, Borwein, Plouffe, Math. Comp. 66 (1997), table of hex digits of pi
# at positions 10^8 and 10^9 (digit 1 is the first after the point); printed
# next to ours for the reader, not asserted.
PAPER_TABLE = {10**8: "ECB840E21926EC", 10**9: "85895585A0428B"}
# -------------------------------------------------------------------------------


def load() -> str:
    """The 1-minute load average: wall times on a shared machine mean little when it is high."""
    try:
        return f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs"
    except OSError:  # pragma: no cover - platforms without it
        return "unknown"


def power(n: int) -> str:
    return f"10^{len(str(n)) - 1}"


def duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.1f} s"
    if seconds < 7200:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


def full_run(position: int, workers: int) -> tuple[str, float, float, int]:
    """Digits, wall seconds, CPU seconds and block count of a real extract() at ``position``."""
    state = {"total": 0}

    def on_block(p) -> None:  # type: ignore[no-untyped-def]
        state["total"] = p.total
        eta = f", about {duration(p.eta)} left" if p.eta is not None else ""
        sys.stderr.write(f"\r  {power(position)}, {workers} thread(s): block {p.done}/{p.total}{eta}    ")

    t0, c0 = time.perf_counter(), time.process_time()
    result = extract("pi", position, DIGITS, workers=workers, block_progress=on_block)
    seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
    sys.stderr.write("\r" + " " * 70 + "\r")
    return result.digits, seconds, cpu, state["total"]


def sampled_run(position: int, workers: int, every: int) -> tuple[float, float, int, int]:
    """Seconds for every ``every``-th block of the head at ``position``, extrapolated to all blocks.

    Returns ``(estimated_wall, estimated_cpu, sampled_blocks, all_blocks)``.
    """
    f = get_constant("pi").formula()
    series = series_of(f)
    d = 4 * (position - 1)
    words = words_for(series, d, DIGITS)
    request = BlockRequest(series, d, words, deep_block_k(series, series.head_length(d)))
    all_blocks = list(request.blocks())  # an iterator (blocks are generated lazily)
    sample = all_blocks[every // 2 :: every]
    sampled_k = sum(k1 - k0 for k0, k1 in sample)

    # The sampled blocks through the runner a real run uses (sum_blocks itself
    # refuses an incomplete set of blocks); each record is checked as it is.
    t0, c0 = time.perf_counter(), time.process_time()
    for record in thread_runner(workers)(request, sample):
        problem = block_problem(request, record)
        if problem:
            raise RuntimeError(f"sampled block rejected: {problem}")
    seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
    scale = request.k_total / sampled_k
    return seconds * scale, cpu * scale, len(sample), len(all_blocks)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--quick", action="store_true", help=f"10^9 from every {QUICK_SAMPLE}th block, extrapolated"
    )
    parser.add_argument(
        "--position",
        type=int,
        action="append",
        help="measure only this position (repeatable; default 10^8 and 10^9)",
    )
    parser.add_argument(
        "--path", help="the kernel path to run (default: the one in use, the fastest offered)"
    )
    args = parser.parse_args()
    positions = tuple(args.position or POSITIONS)
    if backend.BACKEND != "c":
        sys.exit("the compiled kernel is not in use; these figures are for the C kernel")
    from spotcheck.engine import _kernel  # type: ignore[attr-defined]

    if args.path:
        _kernel.select_path(args.path)

    f = get_constant("pi").formula()
    print(describe())
    print(cpu_flags())
    print(f"backend: {backend.BACKEND_NOTE}; path running: {_kernel.active_path()}")
    print(f"pi, formula {f.key}: {f.notation()}; {DIGITS} certified hex digits; blocks of deep_block_k")
    print(f"load average at start: {load()}")
    print()
    cpus: dict[int, float] = {}
    nblocks: dict[int, int] = {}
    ratios: list[float] = []
    for position in positions:
        quick = args.quick and position >= 10**9
        if quick:
            t1, c1, n, total = sampled_run(position, 1, QUICK_SAMPLE)
            t2, _, _, _ = sampled_run(position, 2, QUICK_SAMPLE)
            how = f"estimated from {n} of {total} blocks (--quick), no digits"
            digits = ""
        else:
            digits, t1, c1, total = full_run(position, 1)
            digits2, t2, _, _ = full_run(position, 2)
            assert digits2 == digits
            table = PAPER_TABLE.get(position)
            mark = (
                "" if table is None else (" (= 1997 table)" if table == digits else f" (1997 table: {table})")
            )
            how = f"measured, {total} blocks, digits {digits}{mark}"
        ratios.append(t1 / t2)
        print(
            f"position {power(position)}: 1 thread {duration(t1)} (CPU {duration(c1)}), "
            f"2 threads {duration(t2)}, ratio {t1 / t2:.2f}"
        )
        print(f"  {how}")
        est = estimate_cost("pi", position, DIGITS, workers=1, checkpoint=True)
        print(
            f"  the engine's estimate before the run (api.estimate_cost): {duration(est.cpu_seconds)} CPU, "
            f"{est.ns_per_term_kernel} ns a term; measured / estimate {c1 / est.cpu_seconds:.2f}"
        )
        cpus[position] = c1
        nblocks[position] = total
    # On a shared machine other jobs only ever lower the ratio, so the best one
    # measured is the closer estimate of what the cores allow.
    eff = min(1.0, max(ratios) / 2)
    print()
    print(f"load average at end: {load()}")
    print(f"two-thread efficiency (best ratio / 2): {eff:.2f}")
    print(
        "projected wall time on N cores: one-thread CPU time / (M x efficiency), and / M (ideal), "
        "M = min(N, blocks); a cluster adds milliseconds per block"
    )
    print(f"{'N':>6}" + "".join(f"{power(p):>22}" for p in positions))
    for n in PROJECT_CORES:
        m = {p: min(n, nblocks[p]) for p in positions}
        cells = [f"{duration(cpus[p] / (m[p] * eff))} ({duration(cpus[p] / m[p])})" for p in positions]
        print(f"{n:>6}" + "".join(f"{c:>22}" for c in cells))
    cost_per_bit = cpus[positions[-1]] / positions[-1]
    hours = cost_per_bit * 10**12 / 3600
    print(
        f"projected 10^12 (time grows in proportion to the position): {hours:.1f} core-hours of one-thread "
        f"CPU time on path {_kernel.active_path()}, about {duration(hours * 3600 / (100 * eff))} on 100 cores"
    )


if __name__ == "__main__":
    main()
