"""``locate``: the first wrong digit, by bisection when the tail is wrong, else by a scan."""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any

from spotcheck.digitfile import DigitFile

from .common import (
    HexOracle,
    Progress,
    clamp_window,
    common_rows,
    distinct_rows,
    open_run,
    with_run_facts,
)
from .full import is_full, locate_full
from .request import CheckRequest, make_request
from .results import FileFacts, LocateResult, Note, WindowCheck
from .scan import estimate_scan, scan_open

__all__ = ["locate_file", "DEFAULT_BUDGET", "AFTER_SAMPLES"]

# --- tuning -----------------------------------------------------------------
DEFAULT_BUDGET = 180.0  # seconds a fallback scan may take
AFTER_SAMPLES = 4  # windows checked after the first wrong digit
# ---------------------------------------------------------------------------


def locate_file(path: str, request: CheckRequest | None = None, **options: Any) -> LocateResult:
    """Find the first wrong digit of a digit file (its position), or say what was ruled out.

    ``request`` (or ``options``, its fields) as for :func:`spotcheck.checks.verify.verify_file`;
    ``full_seconds`` (:data:`DEFAULT_BUDGET` when None) is what a full comparison may take.
    """
    request = make_request(request, **options)
    run = open_run(path, request)
    df, facts, oracle = run.df, run.facts, run.oracle
    progress = request.progress
    with run:
        if is_full(facts.constant):  # no digit-extraction formula: every digit against Arb
            return locate_full(df, facts, progress=progress)
        full_seconds = request.full_seconds_or(DEFAULT_BUDGET)
        if facts.base == 10:
            from .decimal import locate_decimal

            return with_run_facts(
                run,
                locate_decimal(
                    df,
                    facts,
                    window=request.window,
                    full_seconds=full_seconds,
                    reference=request.reference,
                    oracle=oracle,
                    progress=progress,
                ),
            )
        locator = _HexLocator(df, facts, request.window, full_seconds, request.reference, oracle, progress)
        return with_run_facts(run, locator.run())


def rest_after(checks: list[WindowCheck]) -> str | None:
    after = [c for c in checks if c.kind == "after"]
    if not after:
        return None
    wrong = sum(not c.match for c in after)
    return "wrong" if wrong == len(after) else "right-again" if wrong == 0 else "mixed"


@dataclass
class _HexLocator:
    """One ``locate`` run on a hexadecimal file: its checks so far and how to report."""

    df: DigitFile
    facts: FileFacts
    window: int
    full_seconds: float
    reference: str
    oracle: HexOracle
    progress: Progress | None
    checks: list[WindowCheck] = field(default_factory=list)
    t0: float = field(default_factory=time.perf_counter)
    scans: int = 0
    full_through: int = 0
    found_by_bisection: int | None = None
    """A wrong digit bisection found, before a full comparison confirmed it is the first."""

    def __post_init__(self) -> None:
        # Positions count from the expansion's start: the file holds digits first..last.
        self.first, self.last = self.facts.first, self.facts.last
        self.n = self.facts.checked
        self.w = clamp_window(self.window, self.n)
        self.steps_total = max(1, (self.n // self.w).bit_length() + 2 + AFTER_SAMPLES)
        self.checks.extend(common_rows(self.facts))

    # -- plumbing -------------------------------------------------------------
    def step(self, kind: str, position: int, count: int, notes: tuple[Note, ...] = ()) -> WindowCheck:
        c = self.oracle.compare(self.df, kind, position, count, notes=notes)
        self.checks.append(c)
        if self.progress:
            self.progress(min(len(self.checks), self.steps_total), self.steps_total)
        return c

    def scan_before(self, upto: int | None) -> int | None:
        """First wrong digit up to position ``upto`` (the whole file when None) by a full comparison."""
        self.scans += 1
        scan = scan_open(
            self.df,
            self.facts,
            reference=self.reference,
            threads=self.oracle.workers,
            stop_at_first=True,
            upto=upto,
            progress=self.progress,
        )
        if scan.interrupted:
            raise KeyboardInterrupt
        self.full_through = max(self.full_through, scan.runs[0].start - 1 if scan.runs else scan.full_through)
        return scan.runs[0].start if scan.runs else None

    def result(
        self,
        first: int | None,
        how: str,
        explanation: str,
        *,
        rest: str | None = None,
        certain: bool = False,
        scan_estimate: float | None = None,
        interrupted: bool = False,
    ) -> LocateResult:
        expected = found = ""
        if first is not None:
            known = [
                c.expected[first - c.position :]
                for c in self.checks
                if c.base == 16 and c.position <= first < c.position + len(c.expected)
            ]
            if known:  # certified digits already at hand (no engine call after Ctrl-C)
                expected = max(known, key=len)[: self.w]
            else:
                expected = self.oracle.digits(first, min(self.w, self.last - first + 1))
            found = self.oracle.read(self.df, first, len(expected))
        return LocateResult(
            file=self.facts,
            checks=distinct_rows(self.checks),
            method="digit extraction",
            seconds=time.perf_counter() - self.t0,
            evaluations=self.oracle.evaluations + self.scans,
            interrupted=interrupted,
            first_mismatch=first,
            expected=expected,
            found=found,
            rest=rest,
            how=how,
            explanation=explanation,
            scan_estimate_seconds=scan_estimate,
            first_is_certain=certain and first is not None,
            full_through_value=self.full_through,
        )

    def scan_cost(self, seconds: float, upto: int | None) -> str:
        """Why no full comparison ran, and what one would cost."""
        if seconds == float("inf"):
            return f"there is no independent full computation of {self.facts.constant} to compare with"
        what = f"the {upto - self.first + 1:,} digits up to position {upto:,}" if upto else "the whole file"
        return (
            f"comparing {what} with a full computation would take "
            f"{'under 1 s' if seconds < 1 else f'about {seconds:.0f} s'}, beyond the budget of {self.full_seconds:g} s"
        )

    # -- the search -----------------------------------------------------------
    def run(self) -> LocateResult:
        try:
            tail = self.step("tail", self.last - self.w + 1, self.w)
            if tail.match:
                return self.tail_matches()
            assert tail.first_difference is not None
            return self.tail_wrong(tail)
        except KeyboardInterrupt:
            first = self.found_by_bisection
            if first is None:
                return self.result(
                    None, "none", "interrupted before a wrong digit was found", interrupted=True
                )
            return self.result(
                first,
                "bisection",
                f"bisection found a wrong digit at position {first:,} (the window just before it matches); "
                f"interrupted before a full comparison of the {first - self.first:,} digits before it could confirm "
                "that it is the first: an earlier isolated wrong digit is not ruled out",
                rest=rest_after(self.checks),
                interrupted=True,
            )

    def bisect(self, hi: int) -> int:
        """First wrong digit, given digit ``hi`` is wrong and an error, once made, persists.

        Invariant: digits ``first..lo`` are taken as right, digit ``hi`` is known wrong.
        """
        lo, w = self.first - 1, self.w
        while hi - lo > w:
            a = max(lo + 1, min((lo + hi) // 2, hi - w))
            c = self.step("bisection", a, w)
            if c.match:
                lo = a + w - 1
            else:
                assert c.first_difference is not None
                hi = c.first_difference
        last = self.step("bisection", lo + 1, hi - lo)
        assert last.first_difference is not None
        return last.first_difference

    def tail_wrong(self, tail: WindowCheck) -> LocateResult:
        w, last = self.w, self.last
        first: int | None = None
        if tail.position - self.first >= w:  # the head window costs one cheap evaluation
            first = self.step("head", self.first, w).first_difference
        by_bisection = first is None
        if first is None:
            assert tail.first_difference is not None
            first = self.bisect(tail.first_difference)
            self.found_by_bisection = first
            if first > self.first:
                a = max(self.first, first - w)
                self.step("confirm", a, first - a, notes=(Note("window-before-first-wrong"),))
        for i in range(1, AFTER_SAMPLES + 1):
            p = first + 1 + (last - first - w) * i // AFTER_SAMPLES
            if first < p <= last - w + 1 and not any(c.position == p for c in self.checks):
                self.step("after", p, w)
        rest = rest_after(self.checks)
        after_text = {
            "wrong": "the windows checked after it are wrong too",
            "right-again": "the digits after it are right again (isolated damage)",
            "mixed": "some windows after it are right (several separate errors)",
            None: "",
        }[rest]
        if not by_bisection:
            return self.result(
                first,
                "head",
                f"first wrong digit at position {first:,}, in the first window"
                + (f"; {after_text}" if after_text else ""),
                rest=rest,
                certain=True,
            )
        windows = sum(c.kind == "bisection" for c in self.checks)
        found_by = f"bisection over {windows} windows found a wrong digit at {first:,}" + (
            f"; {after_text}" if after_text else ""
        )
        # Bisection assumes an error, once made, persists.  Where a full
        # comparison of the digits before it is affordable, settle it.
        seconds, _ = estimate_scan(self.facts, self.reference, upto=first - 1)
        if first > self.first and seconds <= self.full_seconds:
            earlier = self.scan_before(first - 1)
            if earlier is not None:
                self.step("confirm", earlier, min(w, last - earlier + 1))
                return self.result(
                    earlier,
                    "scan",
                    f"first wrong digit at position {earlier:,}: {found_by}; a full comparison with "
                    f"{self.reference} of the digits before it found this earlier one",
                    rest=rest,
                    certain=True,
                    scan_estimate=seconds,
                )
            return self.result(
                first,
                "bisection",
                f"first wrong digit at position {first:,}: {found_by}; the window just before it matches, "
                f"and a full comparison with {self.reference} of the {first - self.first:,} digits before it found "
                "no wrong digit",
                rest=rest,
                certain=True,
                scan_estimate=seconds,
            )
        return self.result(
            first,
            "bisection",
            f"first wrong digit at position {first:,} if the error persisted once made (as in a "
            f"computation that went astray): {found_by}; the window just before it matches. Earlier "
            f"isolated damage is not ruled out: {self.scan_cost(seconds, first - 1)}",
            rest=rest,
            certain=first == self.first,
            scan_estimate=seconds,
        )

    def tail_matches(self) -> LocateResult:
        w, last = self.w, self.last
        ruled_out = (
            f"the last {w} digits match, so no error persists to the end of the file "
            f"(false-match chance 16^-{w}); any damage is isolated, which bisection cannot find"
        )
        head = self.step("head", self.first, w)
        if not head.match:
            return self.result(
                head.first_difference, "head", f"the first window differs; {ruled_out}", certain=True
            )
        seconds, _ = estimate_scan(self.facts, self.reference)
        if seconds > self.full_seconds:
            return self.result(
                None,
                "none",
                f"{ruled_out}; {self.scan_cost(seconds, None)}",
                scan_estimate=seconds,
            )
        first = self.scan_before(None)
        if first is None:
            return self.result(
                None,
                "scan",
                f"no wrong digit: {ruled_out}, and a full comparison with {self.reference} found none",
                scan_estimate=seconds,
            )
        self.step("confirm", first, min(w, last - first + 1))
        rest = None
        if first + w <= last - w + 1:
            rest = "right-again" if self.step("after", first + w, w).match else "mixed"
        return self.result(
            first,
            "scan",
            f"first wrong digit at position {first:,}, found by a full comparison with {self.reference}; "
            f"{ruled_out}",
            rest=rest,
            certain=True,
            scan_estimate=seconds,
        )
