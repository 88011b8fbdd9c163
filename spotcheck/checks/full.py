"""``verify`` and ``locate`` for constants evaluated in full (e, sqrt(2), Euler's gamma, ...).

These constants have no digit-extraction formula, so a window deep in the
file costs a full evaluation to its position anyway: the honest check is to
compare **every** digit once.  The comparison is ``scan``'s (certified digits
of one Arb evaluation, in the file's own base: decimal files are compared with
the decimal expansion directly, no hex detour, and the floor of the true value
is what is compared, so a file truncated inside a run of 9s is no mismatch).
It is refused, with the figures, when its memory estimate exceeds the share of
available memory a check may use or its time estimate exceeds
``max_seconds``.

verify and locate delegate here when ``get_constant(facts.constant).evaluation``
is set (see :func:`is_full`).
"""

from __future__ import annotations

from spotcheck.digitfile import DigitFile
from spotcheck.formulas import get_constant

from .common import Progress, needs
from .reference import memory_budget
from .results import FileFacts, LocateResult, Note, ScanResult, VerifyResult, WindowCheck
from .scan import estimate_scan, scan_open

__all__ = [
    "is_full",
    "estimate_full",
    "check_affordable",
    "verify_full",
    "locate_full",
    "DEFAULT_MAX_SECONDS",
]

# --- tuning -----------------------------------------------------------------
DEFAULT_MAX_SECONDS = 600.0  # refuse a full comparison predicted to take longer
MAX_ROWS = 40  # differing runs listed as rows of the report
# ---------------------------------------------------------------------------

METHOD = "full evaluation (Arb), every digit compared"


def is_full(constant: str) -> bool:
    """True for a constant with no digit-extraction formula (checked by full comparison)."""
    return get_constant(constant).evaluation is not None


def estimate_full(facts: FileFacts) -> tuple[float, int]:
    """``(seconds, bytes)`` predicted for comparing every digit of the file."""
    return estimate_scan(facts, "arb")


def check_affordable(facts: FileFacts, max_seconds: float = DEFAULT_MAX_SECONDS) -> None:
    """Raise :class:`UsageError` with the estimate when a full comparison does not fit."""
    seconds, memory = estimate_full(facts)
    have = memory_budget()
    n = facts.checked
    if memory > have or seconds > max_seconds:
        share = min(have / max(memory, 1), max_seconds / max(seconds, 1e-9), 1.0)
        fits = max(1, int(n * share * 0.9))
        raise needs(
            f"{facts.constant} has no digit-extraction formula, so checking {n:,} digits means evaluating it "
            f"in full: about {seconds:,.0f} s and {memory / 2**30:.1f} GiB (limits: {max_seconds:,.0f} s, "
            f"{have / 2**30:.1f} GiB available); check a prefix of {fits:,} digits",
            "limit",
            fits,
        )


def _rows(scan: ScanResult) -> list[WindowCheck]:
    f = scan.file
    rows = list(scan.checks)  # the integer part, when the file has one
    note = Note("full-evaluation-compared", {"digits": scan.digits_compared})
    for r in scan.runs[:MAX_ROWS]:
        rows.append(
            WindowCheck(
                kind="full",
                position=r.start,
                expected=r.expected,
                found=r.found,
                match=False,
                first_difference=r.start,
                notes=(Note("wrong-run", {"wrong": r.wrong, "length": r.length}), note),
                base=f.base,
            )
        )
    if not scan.runs:
        rows.append(
            WindowCheck(
                kind="full",
                position=1,
                expected="",
                found="",
                match=True,
                notes=(note,),
                base=f.base,
            )
        )
    return rows


def verify_full(
    df: DigitFile,
    facts: FileFacts,
    *,
    max_seconds: float = DEFAULT_MAX_SECONDS,
    progress: Progress | None = None,
) -> VerifyResult:
    """Every digit of the file against a full evaluation, as a verify report."""
    check_affordable(facts, max_seconds)
    scan = scan_open(df, facts, reference="arb", progress=progress)
    return VerifyResult(
        file=facts,
        checks=_rows(scan),
        method=METHOD,
        seconds=scan.seconds,
        evaluations=scan.evaluations,
        interrupted=scan.interrupted,
        window=16,
        seed=0,
        tail_position=None,
        random_windows=0,
        full_through_value=scan.digits_compared,
        reference="arb",
        wrong_digits=scan.wrong_digits,
        wrong_runs=scan.runs_total,
        wrong_spans=[(r.start, r.start + r.length - 1) for r in scan.runs],
        rounded_from=scan.rounded_from,
    )


def locate_full(
    df: DigitFile,
    facts: FileFacts,
    *,
    max_seconds: float = DEFAULT_MAX_SECONDS,
    progress: Progress | None = None,
) -> LocateResult:
    """The first wrong digit by comparing every digit with a full evaluation (certain, no model)."""
    check_affordable(facts, max_seconds)
    scan = scan_open(df, facts, reference="arb", progress=progress)
    first = scan.first_mismatch
    n = scan.digits_compared
    if first is None:
        rest = None
        expected = found = ""
        explanation = (
            f"no wrong digit: all {n:,} digits agree with a full evaluation of {facts.constant}"
            if not scan.interrupted
            else f"interrupted after {n:,} digits; none wrong so far"
        )
    else:
        run = scan.runs[0]
        expected, found = run.expected, run.found
        last = run.start + run.length - 1
        rest = (
            "wrong"
            if last >= n - 8 and scan.runs_total == 1
            else "right-again"
            if scan.runs_total == 1
            else "mixed"
        )
        explanation = (
            f"first wrong digit at position {first:,}: every digit was compared with a full evaluation of "
            f"{facts.constant}; {scan.wrong_digits:,} wrong digits in {scan.runs_total:,} runs"
        )
    return LocateResult(
        file=facts,
        checks=_rows(scan),
        method=METHOD,
        seconds=scan.seconds,
        evaluations=scan.evaluations,
        interrupted=scan.interrupted,
        first_mismatch=first,
        expected=expected,
        found=found,
        rest=rest,
        how="scan" if first is not None else "none",
        full_through_value=n,
        explanation=explanation,
        first_is_certain=first is not None,
        rounded_from=scan.rounded_from,
    )
