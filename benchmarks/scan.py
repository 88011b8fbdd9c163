"""`scan` against the reference computation alone, measured in one run (target: ratio <= 1.1).

Usage: python benchmarks/scan.py [--digits 4e6,1e7] [--repeat 3] [--workers 1] [--cache DIR]

For each size, a correct hex file of pi (python-flint's Arb; cached in
--cache, default ~/.cache/spotcheck-bench) is scanned three ways, each in a
fresh process, best of --repeat, alternating:

* reference: the full computation alone, as ``checks/reference.py`` runs it
  (``_compute_digits``: Arb, certified floor, the digit string), in-process;
* library: ``scan_file(path)`` (open and first pass, estimate, the reference
  computation in its child process, the transfer back, the comparison);
* command: ``spotcheck scan PATH --quiet``, from process start to exit.

The ratios divide the library and command times by the reference time.
All three use --workers threads in Arb (default 1, so that the ratio shows
overhead, not threads).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from machine import describe  # noqa: E402

DEFAULT_CACHE = Path(os.path.expanduser("~")) / ".cache" / "spotcheck-bench"

MAKE = r"""
import os, sys
from spotcheck.checks.reference import _compute_digits
n, path = int(sys.argv[1]), sys.argv[2]
whole, digits = _compute_digits("pi", 16, n, "arb", 1)
assert whole == "3" and digits.startswith("243F6A88")
tmp = path + ".part"
with open(tmp, "w") as fh:
    fh.write("3.\n")
    for i in range(0, n, 64):
        fh.write(digits[i : i + 64] + "\n")
os.replace(tmp, path)
"""

REFERENCE = r"""
import json, sys, time
from spotcheck.checks.reference import _compute_digits
n, threads = int(sys.argv[1]), int(sys.argv[2])
t = time.perf_counter()
_compute_digits("pi", 16, n, "arb", threads)
print(json.dumps({"seconds": time.perf_counter() - t}))
"""

LIBRARY = r"""
import json, sys, time
from spotcheck.checks import scan_file
if __name__ == "__main__":
    t = time.perf_counter()
    r = scan_file(sys.argv[1], workers=int(sys.argv[2]))
    print(json.dumps({"seconds": time.perf_counter() - t, "verdict": r.verdict, "compared": r.digits_compared}))
"""


def pi_hex_file(n: int, cache: Path) -> tuple[Path, float]:
    """A correct file of n hex digits of pi (made once, then reused), and the seconds making it took."""
    cache.mkdir(parents=True, exist_ok=True)
    path = cache / f"pi-hex-{n}.txt"
    t0 = time.perf_counter()
    if not path.exists():
        subprocess.run([sys.executable, "-c", MAKE, str(n), str(path)], check=True)
    return path, time.perf_counter() - t0


def _json(code: str, *args: str) -> dict:
    out = subprocess.run([sys.executable, "-c", code, *args], check=True, capture_output=True, text=True)
    result: dict = json.loads(out.stdout)
    return result


def _command(path: Path, workers: int) -> float:
    t = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "spotcheck", "scan", str(path), "--quiet", "--workers", str(workers)],
        capture_output=True,
    )
    seconds = time.perf_counter() - t
    if done.returncode != 0:
        raise SystemExit(f"scan exited {done.returncode}: {done.stderr.decode()}")
    return seconds


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--digits", default="4e6,1e7")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=1)
    ap.add_argument("--cache", type=Path, default=DEFAULT_CACHE)
    args = ap.parse_args()
    print(describe())
    print(f"threads in Arb: {args.workers} (reference, library and command alike)")
    print(f"{'hex digits':>12} {'reference':>10} {'library':>9} {'command':>9} {'lib/ref':>8} {'cmd/ref':>8}")
    for n in (int(float(x)) for x in args.digits.split(",")):
        path, made = pi_hex_file(n, args.cache)
        ref, lib, cmd = [], [], []
        for _ in range(args.repeat):
            ref.append(_json(REFERENCE, str(n), str(args.workers))["seconds"])
            r = _json(LIBRARY, str(path), str(args.workers))
            if r["verdict"] != "match" or r["compared"] != n:
                raise SystemExit(f"scan of the correct file said {r}")
            lib.append(r["seconds"])
            cmd.append(_command(path, args.workers))
        best_ref, best_lib, best_cmd = min(ref), min(lib), min(cmd)
        print(
            f"{n:>12,} {best_ref:>9.2f}s {best_lib:>8.2f}s {best_cmd:>8.2f}s "
            f"{best_lib / best_ref:>8.3f} {best_cmd / best_ref:>8.3f}   (best of {args.repeat}; file made in "
            f"{made:.0f} s, 0 = cached)",
            flush=True,
        )
    print("target: scan within 1.1 times the reference computation alone")


if __name__ == "__main__":
    main()
