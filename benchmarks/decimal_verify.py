"""Decimal `verify` against its irreducible steps, measured in one run (target: ratio <= 1.1).

Usage: python benchmarks/decimal_verify.py [--digits 1e8] [--repeat 2] [--cache DIR]

The irreducible steps of verifying a decimal file of n digits of pi by radix
conversion: the digits into one integer (string to integer), one division
(the value times 16^h by 10^n, which gives its hex digits; computing 10^n is
timed apart and shown; verify itself divides V 2^(4h-n) by 5^n, the same
quotient from a shorter divisor, also timed and shown), and one engine window at the hex position the
division reaches.  Each is timed in a fresh process, on the same file, and so
is `verify_file(path, samples=0)`; best of --repeat for each, alternating.
The ratio divides verify's wall time by the sum of the three steps (and by
the sum with 10^n, the second figure); the CPU-time ratio (verify's whole
process tree, start-up included, over the steps' CPU time) is disturbed much
less by other work on a shared machine.  verify overlaps the engine window
with the conversion (it runs in a child process, the window in the parent),
so on two free CPUs its time can fall below the sum of the steps.

The true decimal file (python-flint's Arb: floor(pi 10^n), about 2 min at
10^8 on this project's machine) is cached in --cache (default
~/.cache/spotcheck-bench) and reused by later runs and by benchmarks/radix.py.
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
import math, os, sys
from flint import arb, ctx
n = int(sys.argv[1]); path = sys.argv[2]
ctx.prec = int(n * math.log2(10)) + 64
v = (arb.pi() * arb(10) ** n).floor().unique_fmpz()
assert v is not None, "precision too low for a unique floor"
s = v.str()
assert s.startswith("3") and len(s) == n + 1
tmp = path + ".part"
with open(tmp, "w") as fh:
    fh.write("3.\n")
    for i in range(1, len(s), 100):
        fh.write(s[i : i + 100] + "\n")
os.replace(tmp, path)
"""

STEPS = r"""
import json, math, sys, time
import gmpy2
from spotcheck.digitfile import open_digit_file
from spotcheck.engine.api import extract
path, n = sys.argv[1], int(sys.argv[2])
df = open_digit_file(path)
s = df.read(1, n)
out, cpu = {}, 0.0
def timed(name, f):
    global cpu
    t, c = time.perf_counter(), time.process_time()
    value = f()
    out[name] = time.perf_counter() - t
    if name != "power":
        cpu += time.process_time() - c
    return value
v = timed("string_to_integer", lambda: gmpy2.mpz(s))
del s
p10 = timed("power", lambda: gmpy2.mpz(10) ** n)
h = int(n * math.log2(10)) // 4 + 2
timed("division", lambda: divmod(v << (4 * h), p10))
t = time.perf_counter(); divmod(v << (4 * h - n), gmpy2.mpz(5) ** n); out["by_5n"] = time.perf_counter() - t
# the window verify asks for: 16 hex digits ending at the determined ones, 16 + 2 beyond
timed("engine_window", lambda: extract("pi", h - 17, 34))
out["cpu"] = cpu
print(json.dumps(out))
"""

VERIFY = r"""
import json, resource, sys, time
from spotcheck.checks import radix, verify_file
peaks = []
close = radix.ChildConverter.close
def closing(self):
    close(self)
    peaks.append(self.peak_bytes or 0)
radix.ChildConverter.close = closing
if __name__ == "__main__":
    t = time.perf_counter()
    r = verify_file(sys.argv[1], samples=0, seed=1)
    dt = time.perf_counter() - t
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    child = max(peaks, default=0)
    print(json.dumps({"seconds": dt, "verdict": r.verdict, "peak_parent": own, "peak_child": child,
                      "evaluations": r.evaluations}))
"""


def pi_decimal_file(n: int, cache: Path) -> tuple[Path, float]:
    """A true file of n decimal digits of pi (made once, then reused), and the seconds making it took."""
    cache.mkdir(parents=True, exist_ok=True)
    path = cache / f"pi-decimal-{n}.txt"
    t0 = time.perf_counter()
    if not path.exists():
        subprocess.run([sys.executable, "-c", MAKE, str(n), str(path)], check=True)
    return path, time.perf_counter() - t0


def _run(code: str, *args: str) -> dict:
    with TreeCpu() as cpu:
        out = subprocess.run([sys.executable, "-c", code, *args], check=True, capture_output=True, text=True)
    result: dict = json.loads(out.stdout)
    result["tree_cpu"] = cpu.seconds
    return result


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--digits", default="1e8")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--cache", type=Path, default=DEFAULT_CACHE)
    args = ap.parse_args()
    n = int(float(args.digits))
    print(describe())
    become_subreaper()
    path, made = pi_decimal_file(n, args.cache)
    print(f"file: {path} ({n:,} true decimal digits of pi; made in {made:.0f} s, 0 = cached)")
    steps: list[dict] = []
    runs: list[dict] = []
    for i in range(args.repeat):
        steps.append(_run(STEPS, str(path), str(n)))
        runs.append(_run(VERIFY, str(path)))
        s, r = steps[-1], runs[-1]
        print(
            f"  round {i + 1}: string->integer {s['string_to_integer']:.2f} s, 10^n {s['power']:.2f} s, "
            f"division {s['division']:.2f} s, engine window {s['engine_window']:.2f} s; "
            f"verify {r['seconds']:.2f} s ({r['verdict']})",
            flush=True,
        )
    best = {k: min(s[k] for s in steps) for k in steps[0] if k != "tree_cpu"}
    core = best["string_to_integer"] + best["division"] + best["engine_window"]
    verify = min(r["seconds"] for r in runs)
    last = runs[-1]
    print(
        f"best of {args.repeat}: string->integer {best['string_to_integer']:.2f} s + division "
        f"{best['division']:.2f} s + engine window {best['engine_window']:.2f} s = {core:.2f} s "
        f"(10^n: {best['power']:.2f} s more; verify divides by 5^n instead, same quotient: "
        f"{best['by_5n']:.2f} s with its power)"
    )
    print(
        f"verify {verify:.2f} s; ratio {verify / core:.3f} to the three steps, "
        f"{verify / (core + best['power']):.3f} with 10^n (target <= 1.1)"
    )
    cpu_verify = min(r["tree_cpu"] for r in runs)
    print(
        f"CPU time: the three steps {best['cpu']:.2f} s, verify's process tree {cpu_verify:.2f} s "
        f"(start-up included); ratio {cpu_verify / best['cpu']:.3f}"
    )
    print(
        f"peak memory: parent {last['peak_parent'] / 2**20:.0f} MiB, conversion child "
        f"{last['peak_child'] / 2**20:.0f} MiB ({last['peak_child'] / n:.1f} bytes per digit); "
        f"engine evaluations {last['evaluations']}"
    )


if __name__ == "__main__":
    main()
