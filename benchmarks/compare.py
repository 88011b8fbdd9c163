"""Throughput, peak memory and arbitration time of ``compare`` (spotcheck/checks/compare.py).

Writes three copies of one hex digit file in different layouts to a temporary
folder: A, 100 digits a line; B, 64 digits a line in groups of 8; L, 100 digits
a line after a start label (``   1234500: ``, the count of digits before the
line).  The first ``--true`` digits are true hex digits of pi from gmpy2/MPFR
(so the copies' constant is recognised and the arbitration asks the engine
real questions), the rest random (identical in every copy, so only their
reading costs).  B and L carry ``--damage`` changed digits inside the true
prefix.  Two pairs are compared, A with B and A with L; each run is a fresh
Python process (peak memory is its own) and the fastest of ``--repeat`` is
reported with the highest peak.  ``cat A B > /dev/null`` runs in the same
session, interleaved with the comparisons, as the yardstick.

    PYTHONPATH=. python benchmarks/compare.py                 # 10^8 digits a copy
    PYTHONPATH=. python benchmarks/compare.py --digits 1e9    # the issue's size

Figures: combined input (both files' bytes) per second of wall time of the
whole comparison (detection, the one read-and-check pass over each copy,
arbitration); the time ``cat`` takes for the same bytes and the ratio; peak
resident memory (``ru_maxrss``); seconds of arbitration per differing run.
Files were just written, so they come from the page cache: CPU figures.
Targets (issue 15): at least 500 MB/s combined, under 150 MiB.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import resource
import subprocess
import sys
import tempfile
import time

from machine import describe  # noqa: E402  (this folder is first on sys.path)

MIB = 1 << 20
TO_HEX = bytes(b"0123456789ABCDEF"[i % 16] for i in range(256))
TARGET_MBS, TARGET_MIB = 500.0, 150.0
FLAGS = ("sse2", "sse4_2", "avx2", "bmi2", "avx512f", "avx512bw")


def cpu_flags() -> str:
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="replace") as fh:
            have = next((ln.split(":", 1)[1].split() for ln in fh if ln.startswith("flags")), [])
    except OSError:
        return "flags unknown"
    return "flags " + " ".join(f for f in FLAGS if f in have)


def true_prefix(n: int) -> bytes:
    import gmpy2

    with gmpy2.context(precision=4 * n + 128):
        v = int(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpz(16) ** n))
    return format(v - (3 << (4 * n)), "X").zfill(n).encode()


def write_copy(path: str, digits_of, n: int, width: int, group: int, labels: bool = False) -> int:
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
                if labels:
                    line = b"%10d: " % (p + i) + line
                lines.append(line)
            f.write(b"\n".join(lines) + b"\n")
            p += len(block)
    return os.path.getsize(path)


def measure(a: str, b: str) -> None:
    """Child process: one comparison, reported as JSON."""
    from spotcheck.checks.compare import compare_files
    from spotcheck.digitfile.loops import LOOPS

    t0 = time.perf_counter()
    r = compare_files(a, b)
    wall = time.perf_counter() - t0
    print(
        json.dumps(
            {
                "wall": wall,
                "arbitration": r.arbitration_seconds,
                "runs": r.runs_total,
                "starts": [run.start for run in r.runs],
                "keep": r.keep,
                "digits": r.digits_compared,
                "peak": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024,
                "loops": LOOPS,
            }
        )
    )


def cat_seconds(a: str, b: str) -> float:
    t0 = time.perf_counter()
    subprocess.run(["cat", a, b], stdout=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--digits", type=float, default=1e8, help="digits per copy (default 1e8)")
    ap.add_argument("--true", type=int, default=1_000_000, help="true leading hex digits of pi (default 1e6)")
    ap.add_argument("--damage", type=int, default=5, help="changed digits in copies B and L (default 5)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--measure", nargs=2, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.measure:
        measure(*args.measure)
        return
    n = int(args.digits)
    print(describe())
    print(cpu_flags())
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
        a, b, lab = (os.path.join(d, f) for f in ("a.txt", "b.txt", "l.txt"))
        t0 = time.perf_counter()
        size = {
            a: write_copy(a, source(head), n, 100, 0),
            b: write_copy(b, source(bytes(bad)), n, 64, 8),
            lab: write_copy(lab, source(bytes(bad)), n, 100, 0, labels=True),
        }
        print(
            f"wrote three copies of {n:,} digits ({sum(size.values()) / 1e6:,.0f} MB) in {time.perf_counter() - t0:.0f} s"
        )
        for name, (x, y) in (
            ("A (100 a line) vs B (64 a line, groups of 8)", (a, b)),
            ("A vs L (labelled)", (a, lab)),
        ):
            runs, cats = [], []
            for _ in range(args.repeat):
                cats.append(cat_seconds(x, y))
                out = subprocess.run(
                    [sys.executable, __file__, "--measure", x, y],
                    capture_output=True,
                    text=True,
                    env=os.environ,
                )
                if out.returncode != 0:
                    sys.exit(f"compare failed:\n{out.stderr}")
                runs.append(json.loads(out.stdout))
            best = min(runs, key=lambda r: r["wall"])
            total = size[x] + size[y]
            peak = max(r["peak"] for r in runs) / MIB
            mbs = total / 1e6 / best["wall"]
            cat = min(cats)
            print(f"\n{name}: {total / 1e6:,.0f} MB combined, loops: {best['loops']}")
            print(f"  runs found: {best['runs']} (damage placed: {args.damage}); keep: {best['keep']}")
            print(
                f"  whole comparison: {best['wall']:.2f} s, {mbs:,.0f} MB/s combined input "
                f"(target {TARGET_MBS:.0f}: ratio {mbs / TARGET_MBS:.2f}); "
                f"cat of both > /dev/null: {cat:.2f} s ({total / 1e6 / cat:,.0f} MB/s), compare/cat {best['wall'] / cat:.1f} x"
            )
            print(f"  peak memory (ru_maxrss): {peak:.0f} MiB (target < {TARGET_MIB:.0f} MiB)")
            if best["arbitration"]:
                print(
                    "  arbitration per run: "
                    + ", ".join(f"{s * 1000:.1f} ms" for s in best["arbitration"])
                    + f" (runs at {', '.join(f'{p:,}' for p in best['starts'])})"
                )
            print("  all walls: " + ", ".join(f"{r['wall']:.2f}" for r in runs) + " s")


if __name__ == "__main__":
    main()
