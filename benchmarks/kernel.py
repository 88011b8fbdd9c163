"""Speed of the compiled head-sum kernel (issue 3), printed for the machine it runs on.

    python benchmarks/kernel.py            # everything (sympy at 10^7 takes about 100 s)
    python benchmarks/kernel.py --quick    # skips sympy at 10^7 and the digits at 10^8

Prints ns per head-sum term for each interleave / doubling variant, wall times
for 14 certified hex digits of pi with each formula, the ratio to sympy's
``pi_hex_digits`` and to the pure-Python twin, and the speed-up with 2 worker
threads.  Figures are minima over repeats, as the machine may be shared.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Callable

from machine import describe  # noqa: E402  (this folder is first on sys.path)

from spotcheck.engine import backend
from spotcheck.engine.api import extract
from spotcheck.engine.head_py import head_sum_py
from spotcheck.engine.series import Series, series_of
from spotcheck.formulas import get_constant

try:
    from spotcheck.engine import _kernel  # type: ignore[attr-defined]
except ImportError:  # pragma: no cover - the benchmark needs the extension
    sys.exit("the compiled kernel is not built (pip install the package with a C compiler)")

# --- settings ------------------------------------------------------------------
POSITIONS = (10**6, 10**7, 10**8)
DIGITS = 14
WORDS = 2  # 128 fractional bits: what 14 digits need up to position ~10^9
SAMPLE_CHUNKS = 8  # k ranges spread over the head
SAMPLE_K = 1 << 13  # k values per chunk
TWIN_K = 1 << 9  # k values per chunk for the (slow) pure twin
REPEATS = 3  # whole extractions
KERNEL_REPEATS = 7  # per sampled chunk (a few ms each); the minimum is kept
# (lanes, step) of _kernel._head_sum_variant; steps as in _kernel.c
STEPS = {
    0: "fused x*2x",
    1: "add+subtract",
    2: "multiply (no doubling trick)",
    3: "fused, 32-bit when n < 2^31",
    4: "fused, 32-bit, SSE2 when n < 2^29",
}
VARIANTS = [(lanes, step) for step in STEPS for lanes in (4, 8)]
# -------------------------------------------------------------------------------


def power(n: int) -> str:
    """``10^7`` for 10000000."""
    return f"10^{len(str(n)) - 1}"


def best_of(fn: Callable[[], object], repeats: int = REPEATS) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def sample_ranges(series: Series, position: int, span: int) -> tuple[int, list[tuple[int, int]]]:
    """``D`` and SAMPLE_CHUNKS k ranges spread evenly over the head at ``position``."""
    d = 4 * (position - 1)
    k_total = series.head_length(d)
    starts = [k_total * i // SAMPLE_CHUNKS for i in range(SAMPLE_CHUNKS)]
    return d - series.shift, [(k0, min(k0 + span, k_total)) for k0 in starts]


def ns_per_term(
    fn: Callable[..., tuple[int, int]], series: Series, position: int, span: int, *extra: int
) -> float:
    """Sum over the sampled chunks of each chunk's fastest of KERNEL_REPEATS runs, per term."""
    big_d, ranges = sample_ranges(series, position, span)
    s = series
    total, terms = 0.0, 0
    for k0, k1 in ranges:
        args = (big_d, k0, k1, s.m, s.s, s.e, s.q, s.alternating, s.js, s.cs, WORDS, *extra)
        total += best_of(lambda args=args: fn(*args), KERNEL_REPEATS)
        terms += (k1 - k0) * len(s.js)
    return total / terms * 1e9


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="skip sympy at 10^7 and the digits at 10^8")
    args = parser.parse_args()

    print(describe())
    print(f"backend: {backend.BACKEND_NOTE}")
    bbp = series_of(get_constant("pi").formula("bbp"))

    print(
        f"\nns per term, pi (BBP), {WORDS * 64} fractional bits, {SAMPLE_CHUNKS} x {SAMPLE_K} k sampled over the head"
    )
    print(f"{'lanes':>5}  {'doubling step':<34}" + "".join(f"{'n = ' + power(p):>12}" for p in POSITIONS))
    for lanes, step in VARIANTS:
        row = [ns_per_term(_kernel._head_sum_variant, bbp, p, SAMPLE_K, lanes, step) for p in POSITIONS]
        print(f"{lanes:>5}  {STEPS[step]:<34}" + "".join(f"{x:>12.1f}" for x in row))
    shipped = [ns_per_term(_kernel.head_sum, bbp, p, SAMPLE_K) for p in POSITIONS]
    print(f"{'':>5}  {'shipped head_sum':<34}" + "".join(f"{x:>12.1f}" for x in shipped))

    twin = ns_per_term(head_sum_py, bbp, 10**7, TWIN_K)
    print(
        f"\npure twin (head_sum_py) at n = 10^7: {twin:.0f} ns per term, {twin / shipped[1]:.0f}x the kernel"
    )

    print(
        f"\n{DIGITS} certified hex digits of pi, one worker (spotcheck.engine.api.extract; best of 3 below 10^8)"
    )
    times: dict[tuple[str, int], float] = {}
    for position in POSITIONS:
        if args.quick and position >= 10**8:
            print(f"  position {power(position)}: skipped (--quick)")
            continue
        for key in ("bbp", "bellard"):
            runs = [extract("pi", position, DIGITS, formula=key) for _ in range(3 if position < 10**8 else 1)]
            result = min(runs, key=lambda r: r.seconds)
            times[key, position] = result.seconds
            print(
                f"  position {power(position)} {key:<8} {result.seconds:8.2f} s  "
                f"{result.digits}  ({result.terms} terms, {result.fraction_bits} bits)"
            )

    print("\nsympy.ntheory.bbp_pi.pi_hex_digits, same digits, same run")
    from sympy.ntheory.bbp_pi import pi_hex_digits

    for position in (10**6, 10**7):
        if args.quick and position >= 10**7:
            print(f"  position {power(position)}: skipped (--quick)")
            continue
        t0 = time.perf_counter()
        theirs = pi_hex_digits(position, DIGITS).upper()  # sympy counts the leading 3 as digit 0
        t_sympy = time.perf_counter() - t0
        ours = extract("pi", position, DIGITS)
        fastest = min(
            times.get(("bbp", position), ours.seconds), times.get(("bellard", position), ours.seconds)
        )
        agree = "agree" if theirs == ours.digits else f"DIFFER ({theirs} vs {ours.digits})"
        print(
            f"  position {power(position)}: sympy {t_sympy:.1f} s, spotcheck {fastest:.2f} s, "
            f"ratio {t_sympy / fastest:.0f}x; digits {agree}"
        )

    print("\nworker threads, position 10^7, BBP")
    one = best_of(lambda: extract("pi", 10**7, DIGITS, formula="bbp", workers=1), 2)
    two = best_of(lambda: extract("pi", 10**7, DIGITS, formula="bbp", workers=2), 2)
    print(f"  1 worker {one:.2f} s, 2 workers {two:.2f} s, speed-up {one / two:.2f}x")


if __name__ == "__main__":
    main()
