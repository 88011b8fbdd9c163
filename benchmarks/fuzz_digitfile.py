"""Fuzz the digit-file reader: generated layouts and mutated files, judged against the writer.

Half the inputs are correct files in random layouts of the model (they must
read back exactly, or be refused as ambiguous and then read exactly with the
labels option); half are mutated (a byte flipped, inserted or deleted anywhere,
the first lines weighted; a label changed; a line doubled or dropped): they must
be refused with a place named, or read with digits that differ only where the
mutation put them, or carry a finding, or be proven another correct file: the
mutated bytes are exactly what the writer makes of the digits read (a lost line
break that merges a header line with the first digit line, say).  Prints crashes, hangs (> 5 s) and
silent misreads; all three must be 0 (exit 1 otherwise).

    python benchmarks/fuzz_digitfile.py --inputs 100000 --seed 1
"""

from __future__ import annotations

import argparse
import os
import random
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from tests.fuzz.mutate import Tally, one_input  # noqa: E402


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--inputs", type=int, default=100_000)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    rng = random.Random(args.seed)
    tally = Tally()
    t0 = time.perf_counter()
    directory = "/dev/shm" if os.path.isdir("/dev/shm") else None
    with tempfile.TemporaryDirectory(dir=directory) as d:
        for i in range(args.inputs):
            one_input(rng, tally, d, mutate=i % 2 == 1)
    dt = time.perf_counter() - t0
    print(f"inputs {tally.inputs} (seed {args.seed}) in {dt:.0f} s")
    print(
        f"read exactly or acceptably {tally.exact}, refused {tally.refused}, with findings {tally.findings}"
    )
    print(f"crashes {tally.crashes}  hangs {tally.hangs}  silent misreads {tally.misreads}")
    print(f"refusals that name no place {tally.unplaced}")
    print(f"read as another valid file (proven byte for byte, not a misread) {tally.another_valid}")
    for e in tally.examples:
        print("  " + e[:600])
    return 0 if tally.crashes == tally.hangs == tally.misreads == tally.unplaced == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
