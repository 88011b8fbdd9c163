"""Speed of the compiled head-sum kernel, per run-time path (issues 3 and 14).

    python benchmarks/kernel.py            # everything (sympy at 10^7 takes about 100 s)
    python benchmarks/kernel.py --quick    # the per-path table and the digits below 10^8 only
    python benchmarks/kernel.py --against OLD.so   # this build against another, side by side

Prints, for every kernel path this CPU offers (``_kernel.paths()``), ns per
head-sum term at positions 10^6, 10^7, 10^8, 10^9 and 10^11 (pi, BBP and
Bellard, 128 fractional bits; sampled blocks of k spread over the head, deep
in the sum for the big positions) and the ratio to the ``portable`` path (the
kernel as shipped before the vector paths), all measured in this one run,
best of KERNEL_REPEATS per block.  Then wall times for 14 certified hex
digits on the default path and on ``portable``, sympy's ``pi_hex_digits``,
the pure twin, and 1 against 2 worker threads.  The machine may be shared:
compare ratios from one run, not figures across runs.

``--against FILE`` loads another build of the extension (a copy of an older
``_kernel*.so``) beside this one in the same process and times both on every
path they share, calls alternated, best of AGAINST_ROUNDS: the one
comparison of two kernels that a busy shared machine does not blur.
"""

from __future__ import annotations

import argparse
import importlib.machinery
import importlib.util
import os
import sys
import time
from collections.abc import Callable
from types import ModuleType

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
POSITIONS = (10**6, 10**7, 10**8, 10**9, 10**11)
DIGIT_POSITIONS = (10**6, 10**7, 10**8)
FORMULAS = ("bbp", "bellard")
DIGITS = 14
WORDS = 2  # 128 fractional bits: what 14 digits need up to position ~10^9
SAMPLE_CHUNKS = 6  # k ranges spread over the head (the last one deep in it)
SAMPLE_K = 1 << 12  # k values per chunk
TWIN_K = 1 << 8  # k values per chunk for the (slow) pure twin
REPEATS = 3  # whole extractions
KERNEL_REPEATS = 5  # per sampled chunk (a few ms each); the minimum is kept
AGAINST_ROUNDS = 8  # --against: alternations, the minimum of each is kept
AGAINST_K = 2048  # --against: k per block, three blocks (1/3, 2/3 and the end of the head)
FLAGS = ("sse2", "avx2", "fma", "bmi2", "adx", "avx512f", "avx512dq", "avx512vl", "avx512ifma")
# -------------------------------------------------------------------------------


def cpu_flags() -> str:
    """The /proc/cpuinfo flags that decide the kernel paths, present or not."""
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="replace") as fh:
            have = next((set(ln.split(":", 1)[1].split()) for ln in fh if ln.startswith("flags")), set())
    except OSError:
        return "cpu flags: unknown (no /proc/cpuinfo)"
    return "cpu flags: " + " ".join(f if f in have else f"-{f}" for f in FLAGS)


def load_now() -> str:
    """The 1-minute load average (the machine may be shared: figures under load are higher)."""
    try:
        return f"{os.getloadavg()[0]:.1f}"
    except OSError:  # pragma: no cover - platforms without it
        return "unknown"


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
    """``D`` and SAMPLE_CHUNKS k ranges spread evenly over the head at ``position`` (the last at its end)."""
    d = 4 * (position - 1)
    k_total = series.head_length(d)
    starts = [max(0, k_total * (i + 1) // SAMPLE_CHUNKS - span) for i in range(SAMPLE_CHUNKS)]
    return d - series.shift, [(k0, min(k0 + span, k_total)) for k0 in starts]


def ns_per_term(
    fn: Callable[..., tuple[int, int]], series: Series, position: int, span: int, *pre: str
) -> float:
    """Sum over the sampled chunks of each chunk's fastest of KERNEL_REPEATS runs, per term."""
    big_d, ranges = sample_ranges(series, position, span)
    s = series
    total, terms = 0.0, 0
    for k0, k1 in ranges:
        args = (*pre, big_d, k0, k1, s.m, s.s, s.e, s.q, s.alternating, s.js, s.cs, WORDS)
        total += best_of(lambda args=args: fn(*args), KERNEL_REPEATS)
        terms += (k1 - k0) * len(s.js)
    return total / terms * 1e9


def path_table() -> dict[tuple[str, str, int], float]:
    """ns per term per (formula, path, position); prints the table with ratios to portable."""
    paths = _kernel.paths()
    figures: dict[tuple[str, str, int], float] = {}
    for key in FORMULAS:
        series = series_of(get_constant("pi").formula(key))
        print(
            f"\nns per term (ratio to portable), pi ({key}), {WORDS * 64} fractional bits, "
            f"{SAMPLE_CHUNKS} x {SAMPLE_K} k sampled over the head"
        )
        print(f"{'path':<12}" + "".join(f"{'n = ' + power(p):>16}" for p in POSITIONS))
        # interleaved by position so that a change of machine load hits every path alike
        for p in POSITIONS:
            for name in paths:
                figures[key, name, p] = ns_per_term(_kernel._head_sum_path, series, p, SAMPLE_K, name)
        for name in paths:
            cells = []
            for p in POSITIONS:
                x = figures[key, name, p]
                cells.append(f"{x:>7.1f} ({figures[key, 'portable', p] / x:4.1f}x)")
            print(f"{name:<12}" + "".join(f"{c:>16}" for c in cells))
    print(f"load average after the table: {load_now()}")
    return figures


def load_build(path: str) -> ModuleType:
    """Another build of spotcheck.engine._kernel, loaded beside the installed one."""
    name = "other_build._kernel"  # the init function is found by the last component
    loader = importlib.machinery.ExtensionFileLoader(name, path)
    spec = importlib.util.spec_from_file_location(name, path, loader=loader)
    if spec is None:
        sys.exit(f"cannot load {path}")
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    return module


def against(path: str) -> None:
    """ns per term of the other build and of this one, side by side (Bellard); results must agree."""
    other = load_build(path)
    s = series_of(get_constant("pi").formula("bellard"))
    names = [n for n in _kernel.paths() if n in other.paths()]
    print(f"\n{path} (old) against this build (new), pi (bellard), ns per term, best of {AGAINST_ROUNDS}")
    for p in POSITIONS:
        d = 4 * (p - 1)
        k_total = s.head_length(d)
        calls = [
            (d - s.shift, k0, k1, s.m, s.s, s.e, s.q, s.alternating, s.js, s.cs, WORDS)
            for k0, k1 in [(max(0, k_total * i // 3 - AGAINST_K), k_total * i // 3) for i in (1, 2, 3)]
        ]
        terms = sum(c[2] - c[1] for c in calls) * len(s.js)
        want = [head_sum_py(*c) for c in calls] if p <= 10**7 else [_kernel.head_sum(*c) for c in calls]
        best: dict[tuple[str, str], float] = {}
        for _ in range(AGAINST_ROUNDS):
            for tag, module in (("old", other), ("new", _kernel)):
                for name in names:
                    t0 = time.perf_counter()
                    out = [module._head_sum_path(name, *c) for c in calls]
                    dt = time.perf_counter() - t0
                    assert out == want, f"{tag} build, path {name}: a different sum at {power(p)}"
                    best[tag, name] = min(best.get((tag, name), float("inf")), dt)
        cells = [
            f"{n} {best['old', n] / terms * 1e9:.2f} -> {best['new', n] / terms * 1e9:.2f} "
            f"({best['old', n] / best['new', n]:.2f}x)"
            for n in names
        ]
        print(f"  {power(p)}: " + ", ".join(cells))
    print(f"load average after: {load_now()}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="skip sympy, the twin and the digits at 10^8")
    parser.add_argument("--against", metavar="FILE", help="another build of _kernel to time side by side")
    args = parser.parse_args()

    print(describe())
    print(cpu_flags())
    print(f"backend: {backend.BACKEND_NOTE}")
    print(
        f"paths this CPU offers: {', '.join(_kernel.paths())}; missing: {_kernel.unavailable_paths() or 'none'}"
    )
    if args.against:
        against(args.against)
        return
    figures = path_table()
    default = _kernel.active_path()

    bbp = series_of(get_constant("pi").formula("bbp"))
    if not args.quick:
        twin = ns_per_term(head_sum_py, bbp, 10**7, TWIN_K)
        print(
            f"\npure twin (head_sum_py) at n = 10^7: {twin:.0f} ns per term, "
            f"{twin / figures['bbp', default, 10**7]:.0f}x the {default} path"
        )

    print(f"\n{DIGITS} certified hex digits of pi (Bellard), one worker, path {default} against portable")
    for position in DIGIT_POSITIONS:
        if args.quick and position >= 10**8:
            print(f"  position {power(position)}: skipped (--quick)")
            continue
        times = {}
        for name in (default, "portable"):
            _kernel.select_path(name)
            runs = [
                extract("pi", position, DIGITS, workers=1) for _ in range(REPEATS if position < 10**8 else 1)
            ]
            result = min(runs, key=lambda r: r.seconds)
            times[name] = result.seconds
        _kernel.select_path(default)
        print(
            f"  position {power(position)}: {default} {times[default]:7.2f} s, portable {times['portable']:7.2f} s, "
            f"ratio {times['portable'] / times[default]:.1f}x  {result.digits}  ({result.terms} terms)"
        )

    if not args.quick:
        print("\nsympy.ntheory.bbp_pi.pi_hex_digits, same digits, same run")
        from sympy.ntheory.bbp_pi import pi_hex_digits

        for position in (10**6, 10**7):
            t0 = time.perf_counter()
            theirs = pi_hex_digits(position, DIGITS).upper()  # sympy counts the leading 3 as digit 0
            t_sympy = time.perf_counter() - t0
            ours = min(
                (extract("pi", position, DIGITS, workers=1) for _ in range(REPEATS)), key=lambda r: r.seconds
            )
            agree = "agree" if theirs == ours.digits else f"DIFFER ({theirs} vs {ours.digits})"
            print(
                f"  position {power(position)}: sympy {t_sympy:.1f} s, spotcheck {ours.seconds:.2f} s, "
                f"ratio {t_sympy / ours.seconds:.0f}x; digits {agree}"
            )

    print(f"\nworker threads, position 10^8, Bellard, path {default}")
    one = best_of(lambda: extract("pi", 10**8, DIGITS, workers=1), 2)
    two = best_of(lambda: extract("pi", 10**8, DIGITS, workers=2), 2)
    print(f"  1 worker {one:.2f} s, 2 workers {two:.2f} s, speed-up {one / two:.2f}x")


if __name__ == "__main__":
    main()
