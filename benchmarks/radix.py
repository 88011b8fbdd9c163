"""Decimal files through radix conversion: time and peak memory of `verify` for 10^6 .. 10^9 digits.

Usage: python benchmarks/radix.py [--sizes 1e6,1e7,1e8] [--true-max 1e8] [--cache DIR]

Sizes up to --true-max get a true decimal file of pi (python-flint's Arb,
cached in --cache as benchmarks/decimal_verify.py does).  Larger sizes (10^9:
hours with Arb on this project's machine) get a file whose first 10^6
digits are pi's (MPFR) and the rest seeded random digits, and the output
says so: verify does the same work on it (the digits into one integer, one
division, one engine window; none of their costs depends on the digits), but
its hex tail window differs, so the verdict is MISMATCH and the final
decimal check (linear time) is skipped.

Each `verify_file(path, samples=0)` runs in a fresh process; peak memory is
that process's and its conversion child's (ru_maxrss of each).  A size whose
memory estimate (``estimate_conversion_bytes``) does not fit in 70% of the
available memory is not started.  Run 10^9 alone: it takes minutes and
several GiB.
"""

from __future__ import annotations

import argparse
import json
import random
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from decimal_verify import DEFAULT_CACHE, VERIFY, pi_decimal_file  # noqa: E402
from machine import describe  # noqa: E402

TRUE_PREFIX = 10**6  # true digits at the start of a file beyond --true-max


def pi_then_random_file(n: int, cache: Path) -> tuple[Path, float]:
    """pi's first 10^6 decimal digits (MPFR), then seeded random digits, n in all (made once)."""
    import gmpy2

    cache.mkdir(parents=True, exist_ok=True)
    path = cache / f"pi-then-random-decimal-{n}.txt"
    t0 = time.perf_counter()
    if path.exists():
        return path, 0.0
    with gmpy2.context(precision=int(TRUE_PREFIX * 3.33) + 256):
        head = gmpy2.mpz(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpz(10) ** TRUE_PREFIX)).digits(10)[1:]
    rng = random.Random(2026)
    table = bytes(48 + i % 10 for i in range(256))
    tmp = path.with_suffix(".part")
    with open(tmp, "w") as fh:
        fh.write("3.\n")
        written, pending = 0, head
        while written < n:
            if len(pending) < 10**7:
                pending += rng.randbytes(10**7).translate(table).decode("ascii")
            take = min(n - written, len(pending))
            block, pending = pending[:take], pending[take:]
            fh.write("\n".join(block[i : i + 100] for i in range(0, len(block), 100)) + "\n")
            written += len(block)
    tmp.replace(path)
    return path, time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e6,1e7,1e8")
    ap.add_argument("--true-max", default="1e8", help="largest size given a true file of pi")
    ap.add_argument("--cache", type=Path, default=DEFAULT_CACHE)
    args = ap.parse_args()
    sizes = [int(float(x)) for x in args.sizes.split(",")]
    true_max = int(float(args.true_max))
    print(describe())
    from spotcheck.checks.decimal import estimate_conversion_bytes
    from spotcheck.checks.reference import available_memory

    print(
        f"{'digits':>14} {'file':>14} {'make (s)':>9} {'verify (s)':>11} {'parent MiB':>11} "
        f"{'child MiB':>10} {'bytes/digit':>11}  verdict"
    )
    for n in sizes:
        need, have = estimate_conversion_bytes(n), available_memory()
        if need > 0.7 * have:
            print(
                f"{n:>14,}  not started: needs about {need / 2**30:.1f} GiB, {have / 2**30:.1f} GiB available"
            )
            continue
        if n <= true_max:
            path, made = pi_decimal_file(n, args.cache)
            kind = "true pi"
        else:
            path, made = pi_then_random_file(n, args.cache)
            kind = "pi 10^6+random"
        out = subprocess.run(
            [sys.executable, "-c", VERIFY, str(path)], check=True, capture_output=True, text=True
        )
        r = json.loads(out.stdout)
        peak = max(r["peak_parent"], r["peak_child"])
        print(
            f"{n:>14,} {kind:>14} {made:>9.1f} {r['seconds']:>11.2f} {r['peak_parent'] / 2**20:>11.0f} "
            f"{r['peak_child'] / 2**20:>10.0f} {peak / n:>11.2f}  {r['verdict']}",
            flush=True,
        )
    if any(n > true_max for n in sizes):
        print(
            "files past --true-max: pi's first 10^6 digits, then random ones; verify does the same "
            "conversion work, and its verdict there is MISMATCH (the hex tail window differs)"
        )


if __name__ == "__main__":
    main()
