"""Throughput and peak memory of the digit-file pass (``open_digit_file``).

Writes digit files of random decimal digits to a temporary folder, opens each
in a fresh Python process (so peak memory is the pass's own), prints MB/s and
peak resident memory, and removes the files.  Random digits are fine: the
pass's speed does not depend on which digits it reads.

    PYTHONPATH=. python benchmarks/digitfile.py            # 1 GiB files
    PYTHONPATH=. python benchmarks/digitfile.py --gib 4    # larger

Layouts measured: regular lines (100 digits in groups of 10, the fast loop),
irregular line lengths and labelled lines (on a smaller file), both through
the compiled loops of the read-and-check stream, and gzip (on a smaller file);
for the first four, also the read-and-check stream itself (``open_stream``,
every digit handed out, then ``finish()``).  The files were just
written, so they are read from the page cache: these are CPU figures.  Each
file is opened three times (a fresh process each time) and the fastest pass is
reported, with the highest peak memory of the three.
"""

from __future__ import annotations

import argparse
import gzip
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
TO_DIGIT = bytes(48 + (i % 10) for i in range(256))


def random_digits(n: int, rng: random.Random) -> bytes:
    return rng.randbytes(n).translate(TO_DIGIT)


def block_regular(rng: random.Random, target: int) -> bytes:
    d = random_digits(target // 110 * 100, rng)
    out = bytearray()
    for i in range(0, len(d), 100):
        line = d[i : i + 100]
        out += b" ".join(line[j : j + 10] for j in range(0, 100, 10)) + b"\n"
    return bytes(out)


def block_irregular(rng: random.Random, target: int) -> bytes:
    d = random_digits(target, rng)
    out, i = bytearray(), 0
    while i < len(d):
        w = rng.randint(40, 120)
        out += d[i : i + w] + b"\n"
        i += w
    return bytes(out)


def write_file(path: str, size: int, block: bytes, head: bytes = b"3.") -> int:
    with open(path, "wb") as f:
        f.write(head)
        written = len(head)
        while written < size:
            f.write(block)
            written += len(block)
    return written


def write_blank_labelled(path: str, size: int, rng: random.Random) -> int:
    """``      51 5820974944 ...``: 1-based start positions set off by blanks, groups of 10."""
    d = random_digits(50 * 1000, rng)
    lines = [b" ".join(d[i + j : i + j + 10] for j in range(0, 50, 10)) for i in range(0, len(d), 50)]
    count, written = 0, 0
    with open(path, "wb") as f:
        while written < size:
            chunk = bytearray()
            for line in lines:
                chunk += b"%10d " % (count + 1) + line + b"\n"
                count += 50
            f.write(chunk)
            written += len(chunk)
    return written


def write_labelled(path: str, size: int, rng: random.Random) -> int:
    d = random_digits(100 * 1000, rng)
    lines = [d[i : i + 100] for i in range(0, len(d), 100)]
    count, written = 0, 0
    with open(path, "wb") as f:
        while written < size:
            chunk = bytearray()
            for line in lines:
                chunk += b"%10d: " % count + line + b"\n"
                count += 100
            f.write(chunk)
            written += len(chunk)
    return written


def peak_rss() -> int:
    """Peak resident memory of this process in bytes.

    ``VmHWM`` from /proc is reset by exec; ``ru_maxrss`` is not (it would
    include the parent that wrote the files), so it is only the fallback.
    """
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def measure(path: str, stream: bool = False) -> None:
    """Child process: open the file once (or read it once through the stream) and report."""
    from spotcheck.digitfile import open_digit_file, open_stream

    t0 = time.perf_counter()
    if stream:  # the read-and-check stream: every digit handed out, then the file for random access
        with open_stream(path, constant="pi") as s:
            for _ in s.chunks():
                pass
            opened = s.finish()
    else:
        opened = open_digit_file(path, constant="pi")
    with opened as df:
        seconds = time.perf_counter() - t0
        n, access = df.count, df.layout.access
        # a few random windows, to show the reads after the pass
        rng = random.Random(1)
        t1 = time.perf_counter()
        for _ in range(200):
            df.read(rng.randint(1, n), 64)
        read_ms = (time.perf_counter() - t1) / 200 * 1000
    peak = peak_rss()
    content = df.size_bytes
    print(
        json.dumps(
            {
                "seconds": seconds,
                "digits": n,
                "access": access,
                "bytes": content,
                "peak": peak,
                "read_ms": read_ms,
            }
        )
    )


REPEAT = 3  # passes per file; the fastest is reported (the machine may be shared)


def run_child(path: str, stream: bool = False) -> dict[str, float]:
    runs = []
    for _ in range(REPEAT):
        flag = "--measure-stream" if stream else "--measure"
        out = subprocess.run([sys.executable, __file__, flag, path], capture_output=True, text=True)
        if out.returncode != 0:
            sys.exit(f"measuring {path} failed:\n{out.stderr}")
        runs.append(json.loads(out.stdout))
    best = min(runs, key=lambda r: r["seconds"])
    best["peak"] = max(r["peak"] for r in runs)
    return best


def wc_seconds(path: str) -> float:
    """Best of REPEAT runs of ``wc -l`` on the same file in the same run (the speed reference)."""
    best = float("inf")
    for _ in range(REPEAT):
        t0 = time.perf_counter()
        subprocess.run(["wc", "-l", path], capture_output=True, check=True)
        best = min(best, time.perf_counter() - t0)
    return best


def report(
    label: str, r: dict[str, float], content_bytes: int | None = None, wc: float | None = None
) -> None:
    size = content_bytes or r["bytes"]
    ratio = f"  {r['seconds'] / wc:5.1f} x wc -l ({size / 1e6 / wc:.0f} MB/s)" if wc else ""
    print(
        f"{label:<28} {size / 1e6:9.0f} MB  {size / 1e6 / r['seconds']:7.0f} MB/s  "
        f"peak RSS {r['peak'] / MIB:6.0f} MiB  {r['digits']:>13,} digits  access={r['access']}  "
        f"window read {r['read_ms']:.2f} ms{ratio}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--gib", type=float, default=1.0, help="size of the large files in GiB (default 1)")
    ap.add_argument("--measure", help=argparse.SUPPRESS)
    ap.add_argument("--measure-stream", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.measure or args.measure_stream:
        measure(args.measure or args.measure_stream, stream=bool(args.measure_stream))
        return
    size = int(args.gib * 2**30)
    rng = random.Random(2026)
    print(describe())
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    with tempfile.TemporaryDirectory(prefix="spotcheck-bench-") as tmp:
        path = os.path.join(tmp, "digits.txt")
        for label, block in (
            ("regular (100/10, fast)", block_regular(rng, 64 * MIB)),
            ("irregular lines (indexed)", block_irregular(rng, 64 * MIB)),
        ):
            write_file(path, size, block)
            wc = wc_seconds(path)
            report(label, run_child(path), wc=wc)
            report("  the same, stream", run_child(path, stream=True), wc=wc)
            os.remove(path)
        small = min(size, 256 * MIB)
        for label, writer in (
            ("labelled lines (':')", write_labelled),
            ("labelled lines (blanks)", write_blank_labelled),
        ):
            writer(path, small, rng)
            wc = wc_seconds(path)
            report(label, run_child(path), wc=wc)
            report("  the same, stream", run_child(path, stream=True), wc=wc)
            os.remove(path)
        gz = path + ".gz"
        with gzip.open(gz, "wb", compresslevel=1) as f:
            f.write(b"3.")
            block = block_regular(rng, 16 * MIB)
            for _ in range(small // len(block)):
                f.write(block)
        content = 2 + small // len(block) * len(block)
        report("gzip, regular (content)", run_child(gz), content)
        os.remove(gz)


if __name__ == "__main__":
    main()
