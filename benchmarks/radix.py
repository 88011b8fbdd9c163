"""Decimal files through radix conversion: time and peak memory of `verify` for 10^6, 10^7, 10^8 digits.

Usage: python benchmarks/radix.py [--sizes 1e6,1e7,1e8] [--keep DIR]

Each size gets a true decimal file of pi (python-flint Arb, written to a
temporary folder and removed afterwards); `verify` then runs in a fresh
subprocess so its peak memory (ru_maxrss) is its own.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from machine import describe  # noqa: E402

MAKE = r"""
import sys, math
from flint import arb, ctx
n = int(sys.argv[1]); path = sys.argv[2]
ctx.prec = int(n * math.log2(10)) + 64
v = (arb.pi() * arb(10) ** n).floor().unique_fmpz()
s = v.str()
with open(path, "w") as fh:
    fh.write("3.\n")
    for i in range(1, len(s), 100):
        fh.write(s[i : i + 100] + "\n")
"""

RUN = r"""
import json, resource, sys, time
from spotcheck.checks import verify_file
t0 = time.perf_counter()
r = verify_file(sys.argv[1], samples=0, seed=1)
dt = time.perf_counter() - t0
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
print(json.dumps({"verdict": r.verdict, "seconds": dt, "peak": peak,
                  "engine_evaluations": r.evaluations, "method": r.method}))
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e6,1e7,1e8")
    ap.add_argument("--keep", type=Path, default=None, help="keep the generated files in this folder")
    args = ap.parse_args()
    sizes = [int(float(x)) for x in args.sizes.split(",")]
    print(describe())
    from spotcheck.engine import backend

    print(f"kernel: {backend.BACKEND_NOTE}")
    print(f"{'digits':>12} {'make (s)':>9} {'verify (s)':>11} {'peak MiB':>9} {'bytes/digit':>11}  verdict")
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        for n in sizes:
            path = folder / f"pi-dec-{n}.txt"
            t0 = time.perf_counter()
            if not path.exists():
                subprocess.run([sys.executable, "-c", MAKE, str(n), str(path)], check=True)
            made = time.perf_counter() - t0
            out = subprocess.run(
                [sys.executable, "-c", RUN, str(path)], check=True, capture_output=True, text=True
            )
            r = json.loads(out.stdout)
            print(
                f"{n:>12,} {made:>9.1f} {r['seconds']:>11.2f} {r['peak'] / 2**20:>9.0f} "
                f"{r['peak'] / n:>11.1f}  {r['verdict']}",
                flush=True,
            )


if __name__ == "__main__":
    main()
