"""``verify`` of a hex slice deep in pi against the engine time of its own windows.

A slice of ``--digits`` hex digits (default 10^5) beginning at ``--depth`` (default 10^8),
labelled with its first digit's position on every line, is verified with its head, its tail
and 8 random windows (``full_seconds=0``, one worker).  Then each window the check compared is
evaluated again on its own, as ``spotcheck digits --at P --count 16`` does (``extract``), and
the sum of those engine times is the yardstick: the target is verify <= 1.2 x that sum.

The file holds certified digits in the windows the check will compare (their positions follow
from the seed) and seeded random hex digits elsewhere, which the output says: computing the
whole stretch at 10^8 would take far longer than the check, and the windows are all it reads.

Run: ``PYTHONPATH=. python benchmarks/slices.py [--depth N] [--digits N] [--seed N]``.
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from machine import describe  # noqa: E402

from spotcheck.checks import verify_file  # noqa: E402
from spotcheck.engine.api import extract  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--depth", type=int, default=10**8)
    ap.add_argument("--digits", type=int, default=10**5)
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args()
    print(describe())
    p, n, seed = args.depth, args.digits, args.seed
    rng = random.Random(seed)
    digits = [rng.choice("0123456789ABCDEF") for _ in range(n)]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "slice.txt"

        def write() -> None:
            text = "".join(digits)
            lines = [f"{p + i}: {text[i : i + 64]}" for i in range(0, n, 64)]
            path.write_text("\n".join(lines) + "\n")

        # A first run (random digits) tells where the windows fall; put certified digits there.
        write()
        probe = verify_file(str(path), constant="pi", first_position=p, samples=8, seed=seed, full_seconds=0)
        for c in probe.checks:
            digits[c.position - p : c.position - p + len(c.expected)] = list(c.expected)
        write()
        t0 = time.perf_counter()
        result = verify_file(str(path), constant="pi", samples=8, seed=seed, full_seconds=0, workers=1)
        took = time.perf_counter() - t0
        windows = [(c.kind, c.position, len(c.expected)) for c in result.checks]
        engine = 0.0
        for _, position, count in windows:
            engine += extract("pi", position, count, workers=1).seconds
    print(f"slice: {n:,} hex digits of pi from {p:,}, start labels; certified digits in the checked windows,")
    print("       seeded random digits elsewhere")
    print(
        f"verify: {result.verdict}, {len(windows)} windows ({', '.join(sorted({k for k, _, _ in windows}))}),"
    )
    print(f"        first position {result.file.first:,} ({result.file.first_how}), {took:.2f} s wall")
    print(f"sum of the windows' engine time (extract, one worker each): {engine:.2f} s")
    print(f"ratio verify / windows: {took / engine:.3f} (target <= 1.2)")


if __name__ == "__main__":
    main()
