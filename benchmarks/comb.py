"""Combs of windows (issue 26): one pass over the head terms for many positions.

    python benchmarks/comb.py                 # (a) 64 windows up to 10^7 and 10^8 (a few minutes)
    python benchmarks/comb.py --quick         # (a) up to 10^6 and 10^7 only
    python benchmarks/comb.py --stretch       # also (b): 16 windows in [10^9, 2 10^9) (long)
    python benchmarks/comb.py --quick --stretch   # (b) at 10^7 instead
    python benchmarks/comb.py --against OLD.so    # also the single-window kernel, old build against this one

For each case it prints the windows (count, first position, gap, deepest
position), the time of the comb (``comb.comb_window_digits``, one thread), of
the deepest window alone and of every window alone (``evaluate.window_digits``
per window, the cost without the comb), and the ratios.  The comb and the
deepest window are timed as the fastest of 3 runs up to 10^7, once deeper.
The times are the process's CPU seconds (one thread throughout, so on an idle machine they are
the wall times; on a shared one they vary less), and the comb's wall time is
printed beside them; all windows' digits
must agree with the windows alone.  Issue 26's targets: (a) 64 windows spread
over positions up to 10^8 in at most 6 times the deepest window alone, (b) 16
windows in one stretch of 10^9 digits at depth 10^9 in at most 4 times one
window there (here: the deepest).  Then the single-window kernel's ns per
term on the default path (the comb must not slow it: ``--against`` times an
older build beside this one).  Pi by the default formula (Bellard's), 16 hex
digits a window, the default kernel path; the machine may be shared, so the
load average is printed.
"""

from __future__ import annotations

import argparse
import random
import sys
import time
from collections.abc import Callable

from kernel import against, cpu_flags, load_now, ns_per_term, power  # noqa: E402  (benchmarks/kernel.py)
from machine import describe  # noqa: E402  (this folder is first on sys.path)

from spotcheck.engine import _kernel  # type: ignore[attr-defined]
from spotcheck.engine.comb import CombWindow, comb_window_digits
from spotcheck.engine.evaluate import window_digits
from spotcheck.engine.series import Series, series_of
from spotcheck.formulas import get_constant

# --- tuning -------------------------------------------------------------------
DIGITS = 16  # hex digits a window
SPREAD_WINDOWS = 64  # case (a)
STRETCH_WINDOWS = 16  # case (b)
SEED = 26
SINGLE_K = 4096  # k per sampled chunk for the single-window ns per term
REPEATS = 3  # the comb and the deepest window alone: the fastest of this many runs ...
REPEAT_UP_TO = 10**7  # ... up to this deepest position (deeper: one run)
# -------------------------------------------------------------------------------


def spread(deepest: int, count: int, rng: random.Random) -> tuple[int, int]:
    """(first position, gap) of ``count`` windows spread over 1 .. deepest, the last at ``deepest``."""
    gap = deepest // count - rng.randrange(max(1, deepest // (100 * count)))
    return deepest - (count - 1) * gap, gap


def cpu_seconds(fn: Callable[[], object], repeats: int) -> tuple[float, float, object]:
    """(fastest CPU seconds, its wall seconds, the result) over ``repeats`` runs."""
    best = (float("inf"), 0.0, None)
    for _ in range(repeats):
        t0, w0 = time.process_time(), time.perf_counter()
        out = fn()
        best = min(best, (time.process_time() - t0, time.perf_counter() - w0, out), key=lambda b: b[0])
    return best


def run_case(label: str, series: Series, first: int, gap: int, count: int) -> None:
    positions = [first + i * gap for i in range(count)]
    repeats = REPEATS if positions[-1] <= REPEAT_UP_TO else 1
    comb, wall, out = cpu_seconds(lambda: comb_window_digits(series, first, gap, count, DIGITS), repeats)
    windows: list[CombWindow] = out  # type: ignore[assignment]
    deepest, _, _ = cpu_seconds(lambda: window_digits(series, 4 * (positions[-1] - 1), DIGITS), repeats)
    alone = 0.0
    for w in windows:
        t0 = time.process_time()
        digits, _ = window_digits(series, 4 * (w.position - 1), DIGITS)
        alone += time.process_time() - t0
        if digits != w.digits:
            sys.exit(f"the comb's digits at {w.position} differ from the window alone: {w.digits} {digits}")
    print(
        f"{label}: {count} windows, positions {first:,} + i * {gap:,} (deepest {positions[-1]:,}), "
        f"{DIGITS} digits each, {sum(w.alone for w in windows)} re-evaluated alone"
    )
    print(
        f"    comb {comb:8.2f} s   deepest alone {deepest:8.2f} s   windows alone {alone:8.2f} s   "
        f"comb / deepest {comb / deepest:5.2f}   windows alone / comb {alone / comb:5.2f}   "
        f"(comb wall {wall:.2f} s, load {load_now()})"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="smaller depths: (a) up to 10^7, (b) at 10^7")
    parser.add_argument(
        "--stretch", action="store_true", help="also case (b) (at 10^9 without --quick: long)"
    )
    parser.add_argument(
        "--against", metavar="FILE", help="another build of _kernel: single-window ns per term"
    )
    args = parser.parse_args()
    print(describe())
    print(cpu_flags())
    series = series_of(get_constant("pi").formula())
    rng = random.Random(SEED)
    print(f"\n(a) {SPREAD_WINDOWS} windows spread over positions up to the deepest, pi (bellard), one thread")
    for deepest in (10**6, 10**7) if args.quick else (10**7, 10**8):
        first, gap = spread(deepest, SPREAD_WINDOWS, rng)
        run_case(f"  up to {power(deepest)}", series, first, gap, SPREAD_WINDOWS)
    if args.stretch:
        depth = 10**7 if args.quick else 10**9
        gap = depth // STRETCH_WINDOWS - rng.randrange(1000)
        print(f"\n(b) {STRETCH_WINDOWS} windows in [{power(depth)}, 2 {power(depth)}), one thread")
        run_case(f"  at {power(depth)}", series, depth, gap, STRETCH_WINDOWS)
    print(f"\nsingle window (head_sum), path {_kernel.active_path()}, ns per term, {SINGLE_K} k sampled")
    for p in (10**7, 10**8):
        print(f"  {power(p)}: {ns_per_term(_kernel.head_sum, series, p, SINGLE_K):.2f}")
    if args.against:
        against(args.against)


if __name__ == "__main__":
    main()
