"""``scan``: every digit of a file against an independent full computation."""

from __future__ import annotations

import time
from collections.abc import Iterator
from typing import Any

from spotcheck.digitfile import DigitFile
from spotcheck.errors import UsageError

from .common import Progress, common_rows, needs, open_checked
from .reference import REFERENCES, estimate_reference, memory_budget, reference_digits, require_supported
from .request import CheckRequest, make_request
from .results import FileFacts, MismatchRun, ScanResult, WindowCheck

__all__ = ["scan_file", "scan_open", "estimate_scan", "diff_runs", "merge_runs", "rounded_up_from"]

# --- tuning -----------------------------------------------------------------
CHUNK_DIGITS = 1 << 20  # digits compared per step
MERGE_GAP = 8  # coincidental matches inside a wrong stretch that are merged over
MAX_RUNS_REPORTED = 100
RUN_SAMPLE = 16  # expected/found digits kept per run
# ---------------------------------------------------------------------------


def estimate_scan(facts: FileFacts, reference: str = "arb", upto: int | None = None) -> tuple[float, int]:
    """``(seconds, bytes)`` a full scan of this file (or of its digits up to position ``upto``) is
    expected to need.  The full computation runs from digit 1, whatever the file's first position."""
    n = facts.last if upto is None else min(upto, facts.last)
    seconds, memory = estimate_reference(facts.constant, facts.base, max(n, 1), reference)
    # Reading and comparing: about 1 s per 50 M digits on a slow disk, and the
    # file's digits held one chunk at a time.
    return seconds + max(n - facts.first + 1, 0) / 50e6, memory + 2 * CHUNK_DIGITS


def _differences(a: str, b: str, offset: int) -> Iterator[int]:
    """Positions (``offset`` + index) where ``a`` and ``b`` differ; fast when they mostly agree."""
    if a == b:
        return
    if len(a) <= 64:
        for i, (x, y) in enumerate(zip(a, b)):
            if x != y:
                yield offset + i
        return
    half = len(a) // 2
    yield from _differences(a[:half], b[:half], offset)
    yield from _differences(a[half:], b[half:], offset + half)


def diff_runs(expected: str, found: str, start: int) -> list[tuple[int, int]]:
    """Maximal runs ``(first, last)`` of differing positions; ``start`` is the position of index 0."""
    runs: list[tuple[int, int]] = []
    for p in _differences(expected, found, start):
        if runs and runs[-1][1] == p - 1:
            runs[-1] = (runs[-1][0], p)
        else:
            runs.append((p, p))
    return runs


def merge_runs(runs: list[tuple[int, int, int]], gap: int = MERGE_GAP) -> list[tuple[int, int, int]]:
    """Merge ``(first, last, wrong)`` runs across short gaps inside a long wrong stretch.

    Two runs merge when the matching digits between them number at most
    ``gap`` and fewer than the wrong digits of the longer of the two: in a
    stretch of wrong digits about one in sixteen matches by chance, while two
    separate single-digit flaws stay separate.
    """
    out: list[tuple[int, int, int]] = []
    for first, last, wrong in runs:
        if out:
            pf, pl, pw = out[-1]
            between = first - pl - 1
            if between <= gap and between < max(pw, wrong):
                out[-1] = (pf, last, pw + wrong)
                continue
        out.append((first, last, wrong))
    return out


def scan_open(
    df: DigitFile,
    facts: FileFacts,
    *,
    reference: str = "arb",
    progress: Progress | None = None,
    stop_at_first: bool = False,
    upto: int | None = None,
    threads: int = 1,
) -> ScanResult:
    """Scan an already opened file, or its digits up to position ``upto`` (``locate`` reuses this).

    Positions count from the expansion's start (the file's first digit is ``facts.first``); the
    full computation runs to the last position compared.
    """
    if reference not in REFERENCES:
        raise UsageError(f"unknown reference {reference!r} (choose from {', '.join(REFERENCES)})")
    require_supported(facts.constant)
    t0 = time.perf_counter()
    n = facts.last if upto is None else min(upto, facts.last)
    origin = facts.first - 1
    seconds, memory = estimate_scan(facts, reference, upto=n)
    budget = memory_budget()
    if memory > budget:
        raise needs(
            f"a full scan of {n:,} digits needs about {memory / 2**30:.1f} GiB of memory "
            f"(available: {budget / 2**30:.1f} GiB)",
            "windows",
        )
    checks: list[WindowCheck] = []
    checks.extend(common_rows(facts))
    share = seconds / (seconds + (n - origin) / 50e6) if seconds > 0 else 0.0

    def tick(elapsed: float) -> None:
        # the computation's share of the bar, from its estimate; then the comparison's
        if progress:
            progress(int(1000 * share * min(0.99, elapsed / max(seconds, 1e-3))), 1000)

    if progress:
        progress(0, 1000)
    raw: list[tuple[int, int, int]] = []
    compared = 0
    interrupted = False
    whole = n == facts.last  # then one digit more: was the last digit rounded up?
    try:
        _, ref = reference_digits(facts.constant, facts.base, n + whole, reference, threads, tick)
    except KeyboardInterrupt:
        interrupted, ref = True, ""
    try:
        for at, chunk in df.iter_chunks(CHUNK_DIGITS) if not interrupted else ():
            pos = at + origin  # the chunk's position in the expansion
            if pos > n:
                break
            chunk = chunk[: n - pos + 1]
            expected = ref[pos - 1 : pos - 1 + len(chunk)]
            for first, last in diff_runs(expected, chunk, pos):
                if raw and raw[-1][1] == first - 1:  # a run across a chunk boundary
                    raw[-1] = (raw[-1][0], last, raw[-1][2] + last - first + 1)
                else:
                    raw.append((first, last, last - first + 1))
            compared = pos - 1 + len(chunk) - origin
            if progress:
                progress(int(1000 * (share + (1 - share) * compared / (n - origin))), 1000)
            if stop_at_first and raw:
                break
    except KeyboardInterrupt:
        interrupted = True
    merged = merge_runs(raw)
    runs = [
        MismatchRun(
            start=first,
            length=last - first + 1,
            wrong=wrong,
            expected=ref[first - 1 : first - 1 + min(RUN_SAMPLE, last - first + 1)],
            found=df.read(first - origin, min(RUN_SAMPLE, last - first + 1)),
        )
        for first, last, wrong in merged[:MAX_RUNS_REPORTED]
    ]
    rounded = None
    if whole and not interrupted and compared == n - origin and len(merged) == 1 and merged[0][1] == n:
        rounded = rounded_up_from(
            df.read(merged[0][0] - origin, n - merged[0][0] + 1), ref, merged[0][0], facts.base
        )
    return ScanResult(
        file=facts,
        checks=checks,
        method=f"full comparison with {reference}",
        seconds=time.perf_counter() - t0,
        evaluations=1,
        interrupted=interrupted,
        reference=reference,
        digits_compared=compared,
        wrong_digits=sum(w for _, _, w in raw),
        runs=runs,
        runs_total=len(merged),
        rounded_from=rounded,
    )


def rounded_up_from(found: str, ref: str, first: int, base: int) -> int | None:
    """``first`` when the file's digits ``found`` (from ``first`` to the end, ``first`` the first wrong one)
    are the true digits rounded up at the last place: one more than the true ones, read as an integer,
    with the true digit after the end at least half the base.  ``ref`` holds the true digits from
    position 1 to one past the end.  None otherwise (or when the stretch is implausibly long).

    >>> rounded_up_from("6", "14159265358", 10, 10)  # pi: digit 10 is 5, digit 11 is 8
    10
    >>> rounded_up_from("7", "14159265358", 10, 10) is None
    True
    """
    end = first + len(found) - 1
    if len(found) > 64 or len(ref) < end + 1:
        return None
    true = ref[first - 1 : end]
    if int(found, base) == int(true, base) + 1 and int(ref[end], base) * 2 >= base:
        return first
    return None


def scan_file(path: str, request: CheckRequest | None = None, **options: Any) -> ScanResult:
    """Compare every digit of the file with a full computation (Arb by default, or MPFR).

    ``request`` (or ``options``, its fields): ``reference``, ``workers`` (threads
    the Arb computation may use) and what the file is.
    """
    import os

    from .reference import CHILD_DIGITS, warm_children

    request = make_request(request, **options)
    try:
        if os.path.getsize(path) >= CHILD_DIGITS // 4:  # a child will compute: let it start meanwhile
            warm_children()
    except OSError:
        pass  # open_checked says what is wrong with the path
    df, facts = open_checked(path, make_request(request, formula=None))
    try:
        return scan_open(
            df, facts, reference=request.reference, progress=request.progress, threads=request.workers
        )
    finally:
        df.close()
