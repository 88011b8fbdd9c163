"""Throughput of the digit-file pass on labelled layouts: start, end and both ends.

Writes one file per layout (random digits, the labels right), opens each in a
fresh process three times (``digitfile.py``'s child, the fastest pass is
reported), and prints MB/s, the ratio to ``wc -l`` on the same file and the
ratio to the start-labelled file, all measured in this run.  The files were
just written, so they come from the page cache: these are CPU figures.

    PYTHONPATH=. python benchmarks/labels.py             # 128 MiB a layout
    PYTHONPATH=. python benchmarks/labels.py --mib 512
"""

from __future__ import annotations

import argparse
import os
import random
import tempfile
from collections.abc import Callable

from digitfile import random_digits, run_child, wc_seconds  # noqa: E402  (this folder is first on sys.path)
from machine import describe  # noqa: E402

MIB = 1 << 20
TO_HEX = bytes(b"0123456789ABCDEF"[i % 16] for i in range(256))


def groups(line: bytes, k: int) -> bytes:
    return b" ".join(line[j : j + k] for j in range(0, len(line), k))


def start_colon(d: bytes, count: int) -> bytes:
    return b"%10d: " % count + d


def end_colon(d: bytes, count: int) -> bytes:
    return d + b" : %d" % (count + len(d))


def end_blanks(d: bytes, count: int) -> bytes:
    return groups(d, 10) + b"  %d" % (count + len(d))


def both_colon(d: bytes, count: int) -> bytes:
    return b"%d: " % (count + 1) + groups(d, 10) + b" : %d" % (count + len(d))


def both_blanks(d: bytes, count: int) -> bytes:
    return b"%10d  " % (count + 1) + d + b"  %d" % (count + len(d))


def both_hex_dump(d: bytes, count: int) -> bytes:
    return b"%08x  " % (count // 2) + groups(d, 8) + b"  %08x" % ((count + len(d)) // 2)


LAYOUTS: tuple[tuple[str, Callable[[bytes, int], bytes], int, int], ...] = (
    # name, line maker, digits a line, base
    ("start ':'", start_colon, 100, 10),
    ("end ':'", end_colon, 100, 10),
    ("end blanks, groups", end_blanks, 50, 10),
    ("both ':', groups", both_colon, 50, 10),
    ("both blanks", both_blanks, 100, 10),
    ("both hex byte offsets", both_hex_dump, 32, 16),
)


def write(path: str, size: int, make: Callable[[bytes, int], bytes], width: int, base: int) -> int:
    rng = random.Random(2026)
    d = random_digits(width * 1000, rng)
    if base == 16:
        d = rng.randbytes(width * 1000).translate(TO_HEX)
    lines = [d[i : i + width] for i in range(0, len(d), width)]
    count = written = 0
    with open(path, "wb") as f:
        while written < size:
            chunk = bytearray()
            for line in lines:
                chunk += make(line, count) + b"\n"
                count += width
            f.write(chunk)
            written += len(chunk)
    return written


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--mib", type=int, default=128, help="size of each file in MiB (default 128)")
    args = ap.parse_args()
    print(describe())
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    base_speed = None
    with tempfile.TemporaryDirectory(prefix="spotcheck-bench-") as tmp:
        for name, make, width, base in LAYOUTS:
            path = os.path.join(tmp, "labelled.txt")
            size = write(path, args.mib * MIB, make, width, base)
            r = run_child(path)
            wc = wc_seconds(path)
            os.remove(path)
            speed = size / 1e6 / r["seconds"]
            base_speed = base_speed or speed
            print(
                f"{name:<24} {size / 1e6:7.0f} MB  {speed:6.0f} MB/s  {r['seconds'] / wc:5.1f} x wc -l  "
                f"{speed / base_speed:5.2f} x start ':'  peak RSS {r['peak'] / MIB:4.0f} MiB  "
                f"{r['digits']:>12,} digits"
            )


if __name__ == "__main__":
    main()
