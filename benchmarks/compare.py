"""Throughput, peak memory and arbitration time of ``compare`` (spotcheck/checks/compare.py).

Writes two copies of one hex digit file in different layouts (A: 100 digits a
line; B: 64 digits a line in groups of 8) to a temporary folder, the first
``--true`` digits being true hex digits of pi from gmpy2/MPFR (so the copies'
constant is recognised and the arbitration asks the engine real questions)
and the rest random (identical in both copies, so only their reading costs).
B carries ``--damage`` changed digits inside the true prefix.  Each run of the
comparison is a fresh Python process (peak memory is its own); the fastest of
``--repeat`` is reported with the highest peak.

    PYTHONPATH=. python benchmarks/compare.py                 # 10^8 digits a copy
    PYTHONPATH=. python benchmarks/compare.py --digits 1e9    # the issue's size

Figures: combined input (both files' bytes) per second of wall time of the
whole comparison, opening passes included; the streaming part alone; peak
resident memory; seconds of arbitration per differing run.  Files were just
written, so they come from the page cache: CPU figures.  Targets (issue 15):
at least 500 MB/s combined, under 150 MiB.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import subprocess
import sys
import tempfile
import time

from machine import describe  # noqa: E402  (this folder is first on sys.path)

MIB = 1 << 20
TO_HEX = bytes(b"0123456789ABCDEF"[i % 16] for i in range(256))
TARGET_MBS, TARGET_MIB = 500.0, 150.0


def true_prefix(n: int) -> bytes:
    import gmpy2

    with gmpy2.context(precision=4 * n + 128):
        v = int(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpz(16) ** n))
    return format(v - (3 << (4 * n)), "X").zfill(n).encode()


def write_copy(path: str, digits_of, n: int, width: int, group: int) -> int:
    """Write ``n`` digits (``digits_of(start, count)`` gives them) in one layout; returns the size."""
    step = width * 20_000
    with open(path, "wb") as f:
        f.write(b"3.\n")
        p = 0
        while p < n:
            block = digits_of(p, min(step, n - p))
            lines = []
            for i in range(0, len(block), width):
                line = block[i : i + width]
                if group:
                    line = b" ".join(line[j : j + group] for j in range(0, len(line), group))
                lines.append(line)
            f.write(b"\n".join(lines) + b"\n")
            p += len(block)
    return os.path.getsize(path)


def peak_rss() -> int:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    return 0


def measure(a: str, b: str) -> None:
    """Child process: one comparison, reported as JSON."""
    from spotcheck.checks.compare import compare_files

    t0 = time.perf_counter()
    r = compare_files(a, b)
    wall = time.perf_counter() - t0
    print(
        json.dumps(
            {
                "wall": wall,
                "compare_seconds": r.seconds,
                "arbitration": r.arbitration_seconds,
                "runs": r.runs_total,
                "keep": r.keep,
                "digits": r.digits_compared,
                "peak": peak_rss(),
            }
        )
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--digits", type=float, default=1e8, help="digits per copy (default 1e8)")
    ap.add_argument("--true", type=int, default=1_000_000, help="true leading hex digits of pi (default 1e6)")
    ap.add_argument("--damage", type=int, default=5, help="changed digits in copy B (default 5)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--measure", nargs=2, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.measure:
        measure(*args.measure)
        return
    n = int(args.digits)
    print(describe())
    rng = random.Random(15)
    head = true_prefix(min(args.true, n))
    bad = bytearray(head)
    spots = sorted(rng.sample(range(100, len(head)), args.damage))
    for p in spots:
        bad[p] = b"0123456789ABCDEF"[(b"0123456789ABCDEF".index(bad[p]) + 5) % 16]
    tail_seed = rng.getrandbits(32)

    tile = 1 << 20

    def tile_bytes(i: int) -> bytes:  # the random digits depend on the position only
        return random.Random(tail_seed * 1_000_003 + i).randbytes(tile).translate(TO_HEX)

    def source(prefix: bytes):
        def digits_of(start: int, count: int) -> bytes:
            out = bytearray()
            p, end = start, start + count
            while p < end:
                if p < len(prefix):
                    piece = prefix[p:end]
                else:
                    i, off = divmod(p, tile)
                    piece = tile_bytes(i)[off : off + end - p]
                out += piece
                p += len(piece)
            return bytes(out)

        return digits_of

    with tempfile.TemporaryDirectory(prefix="spotcheck-compare-bench-") as d:
        a, b = os.path.join(d, "a.txt"), os.path.join(d, "b.txt")
        t0 = time.perf_counter()
        size = write_copy(a, source(head), n, 100, 0) + write_copy(b, source(bytes(bad)), n, 64, 8)
        print(
            f"wrote two copies of {n:,} digits ({size / 1e6:,.0f} MB combined) in {time.perf_counter() - t0:.0f} s"
        )
        runs = []
        for _ in range(args.repeat):
            out = subprocess.run(
                [sys.executable, __file__, "--measure", a, b], capture_output=True, text=True, env=os.environ
            )
            if out.returncode != 0:
                sys.exit(f"compare failed:\n{out.stderr}")
            runs.append(json.loads(out.stdout))
    best = min(runs, key=lambda r: r["wall"])
    peak = max(r["peak"] for r in runs) / MIB
    mbs = size / 1e6 / best["wall"]
    stream = size / 1e6 / max(best["compare_seconds"], 1e-9)
    arb = best["arbitration"]
    print(f"runs found: {best['runs']} (damage placed: {args.damage}); keep: {best['keep']}")
    print(
        f"whole comparison (both opening passes + streaming + arbitration): {best['wall']:.2f} s, "
        f"{mbs:,.0f} MB/s combined input (target {TARGET_MBS:.0f}: ratio {mbs / TARGET_MBS:.2f})"
    )
    print(f"streaming side by side and arbitration only: {best['compare_seconds']:.2f} s, {stream:,.0f} MB/s")
    print(f"peak memory: {peak:.0f} MiB (target < {TARGET_MIB:.0f} MiB)")
    if arb:
        print(
            "arbitration per run: "
            + ", ".join(f"{s * 1000:.1f} ms" for s in arb)
            + f" (positions {', '.join(str(p + 1) for p in spots)})"
        )
    walls = ", ".join(f"{r['wall']:.2f}" for r in runs)
    print(f"all walls: {walls} s")


if __name__ == "__main__":
    main()
