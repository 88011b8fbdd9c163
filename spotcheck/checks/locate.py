"""``locate``: the first wrong digit, by bisection when the tail is wrong, else by a scan."""

from __future__ import annotations

import time

from spotcheck.digitfile import DigitFile

from .common import DEFAULT_WINDOW, HexOracle, Progress, clamp_window, integer_part_check, open_checked
from .results import FileFacts, LocateResult, WindowCheck
from .scan import estimate_scan, scan_open

__all__ = ["locate_file", "DEFAULT_BUDGET", "AFTER_SAMPLES"]

# --- tuning -----------------------------------------------------------------
DEFAULT_BUDGET = 180.0  # seconds a fallback scan may take
AFTER_SAMPLES = 4  # windows checked after the first wrong digit
# ---------------------------------------------------------------------------


def locate_file(
    path: str,
    *,
    base: int | None = None,
    constant: str | None = None,
    formula: str | None = None,
    window: int = DEFAULT_WINDOW,
    budget: float = DEFAULT_BUDGET,
    reference: str = "arb",
    workers: int = 1,
    limit: int | None = None,
    progress: Progress | None = None,
) -> LocateResult:
    """Find the first wrong digit of a digit file (1-based position), or say what was ruled out."""
    df, facts = open_checked(path, base=base, constant=constant, formula=formula, limit=limit)
    try:
        if facts.base == 10:
            from .decimal import locate_decimal

            return locate_decimal(
                df,
                facts,
                window=window,
                budget=budget,
                reference=reference,
                workers=workers,
                progress=progress,
            )
        return _locate_hex(df, facts, window, budget, reference, workers, progress)
    finally:
        df.close()


def rest_after(checks: list[WindowCheck]) -> str | None:
    after = [c for c in checks if c.kind == "after"]
    if not after:
        return None
    wrong = sum(not c.match for c in after)
    return "wrong" if wrong == len(after) else "right-again" if wrong == 0 else "mixed"


def _locate_hex(
    df: DigitFile,
    facts: FileFacts,
    window: int,
    budget: float,
    reference: str,
    workers: int,
    progress: Progress | None,
) -> LocateResult:
    t0 = time.perf_counter()
    w = clamp_window(window, facts.checked)
    oracle = HexOracle(facts.constant, facts.formula, workers=workers)
    n = facts.checked
    checks: list[WindowCheck] = []
    ip = integer_part_check(facts)
    if ip is not None:
        checks.append(ip)
    steps_total = max(1, (n // w).bit_length() + 2 + AFTER_SAMPLES)

    def step(c: WindowCheck) -> WindowCheck:
        checks.append(c)
        if progress:
            progress(min(len(checks), steps_total), steps_total)
        return c

    def result(first: int | None, rest: str | None, how: str, explanation: str, **kw: object) -> LocateResult:
        expected = found = ""
        if first is not None:
            span = min(w, n - first + 1)
            expected, found = kw.pop("expected", None) or oracle.digits(first, span), df.read(first, span)  # type: ignore[assignment]
        return LocateResult(
            file=facts,
            checks=checks,
            method="digit extraction",
            seconds=time.perf_counter() - t0,
            evaluations=oracle.evaluations + int(how == "scan"),
            interrupted=bool(kw.pop("interrupted", False)),
            first_mismatch=first,
            expected=expected,
            found=found,
            rest=rest,
            how=how,
            explanation=explanation,
            scan_estimate_seconds=kw.pop("scan_estimate", None),  # type: ignore[arg-type]
            first_is_certain=bool(kw.pop("certain", False)) and first is not None,
        )

    try:
        tail = step(oracle.compare(df, "tail", n - w + 1, w))
        if tail.match:
            return _tail_matches(df, facts, oracle, checks, budget, reference, result, w)
        assert tail.first_difference is not None
        first: int | None = None
        if tail.position > w:  # the head window costs one cheap evaluation
            head = step(oracle.compare(df, "head", 1, w))
            first = head.first_difference
        if first is None:
            # A computation that went astray stays wrong: bisect between a region
            # assumed right (digits 1..lo) and a digit known wrong (hi).
            lo, hi = 0, tail.first_difference
            while hi - lo > w:
                a = max(lo + 1, min((lo + hi) // 2, hi - w))
                c = step(oracle.compare(df, "bisection", a, w))
                if c.match:
                    lo = a + w - 1
                else:
                    assert c.first_difference is not None
                    hi = c.first_difference
            last = step(oracle.compare(df, "bisection", lo + 1, hi - lo))
            first = last.first_difference
            assert first is not None
            if first > 1:
                a = max(1, first - w)
                step(
                    oracle.compare(
                        df, "confirm", a, first - a, note="the window just before the first wrong digit"
                    )
                )
        for i in range(1, AFTER_SAMPLES + 1):
            p = first + 1 + (n - first - w) * i // AFTER_SAMPLES
            if first < p <= n - w + 1 and not any(c.position == p for c in checks):
                step(oracle.compare(df, "after", p, w))
        rest = rest_after(checks)
        if first <= w:
            what = {"wrong": "; the windows checked after it are wrong too", None: ""}.get(
                rest, f"; after it: {rest}"
            )
            return result(
                first,
                rest,
                "head",
                f"first wrong digit at position {first:,}, in the first window{what}",
                certain=True,
            )
        windows = sum(c.kind == "bisection" for c in checks)
        found_by = f"bisection over {windows} windows found a wrong digit at {first:,}"
        if rest == "wrong":
            found_by += " and the windows checked after it are wrong too"
        elif rest == "right-again":
            found_by += ", but the digits after it are right again (isolated damage)"
        elif rest == "mixed":
            found_by += ", but some windows after it are right (several separate errors)"
        # Bisection assumes an error, once made, persists.  Where a full
        # comparison of the digits before it is affordable, settle it.
        seconds, _ = estimate_scan(facts, reference, upto=first - 1)
        if first > 1 and seconds <= budget:
            scan = scan_open(df, facts, reference=reference, stop_at_first=True, upto=first - 1)
            if scan.runs:
                earlier = scan.runs[0].start
                step(oracle.compare(df, "confirm", earlier, min(w, n - earlier + 1)))
                return result(
                    earlier,
                    rest,
                    "scan",
                    f"first wrong digit at position {earlier:,}: {found_by}; a full comparison with "
                    f"{reference} of the digits before it found this earlier one",
                    scan_estimate=seconds,
                    certain=True,
                )
            return result(
                first,
                rest,
                "bisection",
                f"first wrong digit at position {first:,}: {found_by}; the window just before it matches, "
                f"and a full comparison with {reference} of the {first - 1:,} digits before it found no "
                "wrong digit",
                scan_estimate=seconds,
                certain=True,
            )
        return result(
            first,
            rest,
            "bisection",
            f"first wrong digit at position {first:,} if the error persisted once made (as in a "
            f"computation that went astray): {found_by}; the window just before it matches. Earlier "
            f"isolated damage is not ruled out: comparing the {first - 1:,} digits before it would take "
            f"about {seconds:.0f} s (budget {budget:.0f} s; run `spotcheck scan --limit {first - 1}`)",
            scan_estimate=seconds,
            certain=first == 1,
        )
    except KeyboardInterrupt:
        return result(None, None, "none", "interrupted before a wrong digit was found", interrupted=True)


def _tail_matches(df, facts, oracle, checks, budget, reference, result, w):  # type: ignore[no-untyped-def]
    chance = f"16^-{w}"
    ruled_out = (
        f"the last {w} digits match, so no error persists to the end of the file "
        f"(false-match chance {chance}); any damage is isolated, which bisection cannot find"
    )
    head = oracle.compare(df, "head", 1, w)
    checks.append(head)
    if not head.match:
        return result(
            head.first_difference, None, "head", f"the first window differs; {ruled_out}", certain=True
        )
    seconds, _ = estimate_scan(facts, reference)
    if seconds > budget:
        return result(
            None,
            None,
            "none",
            f"{ruled_out}; a full scan would take about {seconds:.0f} s, beyond the budget of "
            f"{budget:.0f} s: run `spotcheck scan` (or raise --budget) to look for isolated damage",
            scan_estimate=seconds,
        )
    scan = scan_open(df, facts, reference=reference, stop_at_first=True)
    if scan.interrupted:
        return result(None, None, "none", "interrupted during the full comparison", interrupted=True)
    if not scan.runs:
        return result(
            None,
            None,
            "scan",
            f"no wrong digit: {ruled_out}, and a full comparison with {reference} found none",
            scan_estimate=seconds,
        )
    first = scan.runs[0].start
    after = oracle.compare(df, "after", min(first + w, facts.checked - w + 1), w)
    checks.append(oracle.compare(df, "confirm", first, min(w, facts.checked - first + 1)))
    checks.append(after)
    return result(
        first,
        "right-again" if after.match else "mixed",
        "scan",
        f"first wrong digit at position {first:,}, found by a full comparison with {reference}; {ruled_out}",
        scan_estimate=seconds,
        certain=True,
    )
