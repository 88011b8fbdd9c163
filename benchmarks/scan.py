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

The ratios divide the library and command times by the reference time:
wall time (the target), and CPU time of the whole process tree (this script
becomes a child subreaper, so the fork server and its children are counted),
which a busy shared machine disturbs much less.
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
from cputime import TreeCpu, become_subreaper  # noqa: E402
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
t, c = time.perf_counter(), time.process_time()
_compute_digits("pi", 16, n, "arb", threads)
print(json.dumps({"seconds": time.perf_counter() - t, "cpu": time.process_time() - c}))
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


def _json(code: str, *args: str) -> tuple[dict, float]:
    """The JSON a script prints, and the CPU seconds of its whole process tree."""
    with TreeCpu() as cpu:
        out = subprocess.run([sys.executable, "-c", code, *args], check=True, capture_output=True, text=True)
    result: dict = json.loads(out.stdout)
    return result, cpu.seconds


def _command(path: Path, workers: int) -> tuple[float, float]:
    t = time.perf_counter()
    with TreeCpu() as cpu:
        done = subprocess.run(
            [sys.executable, "-m", "spotcheck", "scan", str(path), "--quiet", "--workers", str(workers)],
            capture_output=True,
        )
    seconds = time.perf_counter() - t
    if done.returncode != 0:
        raise SystemExit(f"scan exited {done.returncode}: {done.stderr.decode()}")
    return seconds, cpu.seconds


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--digits", default="4e6,1e7")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=1)
    ap.add_argument("--cache", type=Path, default=DEFAULT_CACHE)
    args = ap.parse_args()
    print(describe())
    become_subreaper()
    print(f"threads in Arb: {args.workers} (reference, library and command alike)")
    print(
        f"{'hex digits':>12} {'reference':>10} {'library':>9} {'command':>9} {'lib/ref':>8} {'cmd/ref':>8}"
        f"   CPU: {'ref':>6} {'lib':>6} {'cmd':>6} {'lib/ref':>8} {'cmd/ref':>8}"
    )
    for n in (int(float(x)) for x in args.digits.split(",")):
        path, made = pi_hex_file(n, args.cache)
        ref, lib, cmd = [], [], []
        ref_cpu, lib_cpu, cmd_cpu = [], [], []
        for _ in range(args.repeat):
            r, _ = _json(REFERENCE, str(n), str(args.workers))
            ref.append(r["seconds"])
            ref_cpu.append(r["cpu"])  # the computation alone, not its process's start-up
            r, cpu = _json(LIBRARY, str(path), str(args.workers))
            if r["verdict"] != "match" or r["compared"] != n:
                raise SystemExit(f"scan of the correct file said {r}")
            lib.append(r["seconds"])
            lib_cpu.append(cpu)  # the whole process tree, start-up included
            wall, cpu = _command(path, args.workers)
            cmd.append(wall)
            cmd_cpu.append(cpu)
        best_ref, best_lib, best_cmd = min(ref), min(lib), min(cmd)
        c_ref, c_lib, c_cmd = min(ref_cpu), min(lib_cpu), min(cmd_cpu)
        print(
            f"{n:>12,} {best_ref:>9.2f}s {best_lib:>8.2f}s {best_cmd:>8.2f}s "
            f"{best_lib / best_ref:>8.3f} {best_cmd / best_ref:>8.3f}        {c_ref:>6.2f} {c_lib:>6.2f} "
            f"{c_cmd:>6.2f} {c_lib / c_ref:>8.3f} {c_cmd / c_ref:>8.3f}   (best of {args.repeat}; file made in "
            f"{made:.0f} s, 0 = cached)",
            flush=True,
        )
    print("target: scan within 1.1 times the reference computation alone")


if __name__ == "__main__":
    main()
