"""Plain result objects of the checks.  A mismatch is a result, never an exception.

Every result has ``to_dict()`` (JSON-ready, the schema documented in
``spotcheck/checks/schema.py``) and ``exit_code``: 0 when everything checked
matches, 1 when a certified digit differs.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

from .stats import false_match_chance, scattered_damage_bound

__all__ = ["FileFacts", "WindowCheck", "VerifyResult", "LocateResult", "MismatchRun", "ScanResult"]

MATCH, MISMATCH, INCOMPLETE = "match", "mismatch", "incomplete"


@dataclass(frozen=True)
class FileFacts:
    """What every report names about the file it checked."""

    path: str
    size_bytes: int
    base: int
    count: int
    """Digits after the point."""
    checked: int
    """Digits under check: ``count``, or fewer with ``--limit``."""
    constant: str
    constant_how: str
    formula: str
    compression: str | None
    integer_part: str | None


@dataclass(frozen=True)
class WindowCheck:
    """One comparison of file digits with certified digits."""

    kind: str
    """``tail``, ``head``, ``sample``, ``user``, ``integer-part``, ``bisection``, ``confirm``, ``after``, ``prefix``."""
    position: int
    """1-based position of the window's first digit (0 for the integer part)."""
    expected: str
    found: str
    match: bool
    first_difference: int | None = None
    """Position of the first differing digit in the window, if any."""
    note: str = ""
    base: int = 16
    """Base in which ``position``, ``expected`` and ``found`` are written."""
    prefix: int | None = None
    """For radix-conversion checks: the decimal digits converted (the prefix length)."""


@dataclass
class _Common:
    file: FileFacts
    checks: list[WindowCheck]
    method: str
    """``digit extraction`` (hex files) or ``radix conversion`` (decimal files)."""
    seconds: float
    evaluations: int
    """Engine (or reference) evaluations made."""
    interrupted: bool

    @property
    def any_mismatch(self) -> bool:
        return any(not c.match for c in self.checks)

    @property
    def exit_code(self) -> int:
        return 1 if self.any_mismatch else 0

    @property
    def verdict(self) -> str:
        if self.any_mismatch:
            return MISMATCH
        return INCOMPLETE if self.interrupted else MATCH

    def _base_dict(self, command: str) -> dict[str, Any]:
        return {
            "command": command,
            "verdict": self.verdict,
            "schema_version": 1,
            "file": asdict(self.file),
            "method": self.method,
            "checks": [asdict(c) for c in self.checks],
            "seconds": round(self.seconds, 3),
            "evaluations": self.evaluations,
            "interrupted": self.interrupted,
        }


@dataclass
class VerifyResult(_Common):
    window: int
    seed: int
    tail_position: int | None
    """Where the tail check landed: a match there rules out a persistent error before it."""
    random_windows: int = 0

    @property
    def false_match_chance(self) -> float:
        """Chance that a wrong window of ``window`` hex digits matches by accident: 16^-w."""
        return false_match_chance(self.window, 16)

    @property
    def scattered_bound(self) -> float | None:
        """95% upper bound on the damaged fraction from the clean random windows (None if any differs)."""
        return None if self.any_mismatch else scattered_damage_bound(self.random_windows)

    def to_dict(self) -> dict[str, Any]:
        out = self._base_dict("verify")
        out.update(
            window=self.window,
            seed=self.seed,
            false_match_chance=self.false_match_chance,
            tail_position=self.tail_position,
            scattered_bound=self.scattered_bound,
            random_windows=self.random_windows,
        )
        return out


@dataclass
class LocateResult(_Common):
    first_mismatch: int | None
    expected: str
    """Certified digits from ``first_mismatch`` on (empty when none found)."""
    found: str
    """The file's digits from ``first_mismatch`` on."""
    rest: str | None
    """After the first wrong digit: ``wrong`` (stays wrong), ``right-again`` or ``mixed``."""
    how: str
    """``bisection``, ``scan``, ``head``, ``prefix bisection`` or ``none``."""
    explanation: str
    scan_estimate_seconds: float | None = None
    first_is_certain: bool = False
    """True when every digit before ``first_mismatch`` is known right (up to the
    false-match chance and, for bisection, the persistent-error model)."""

    @property
    def verdict(self) -> str:
        if self.first_mismatch is not None:
            return MISMATCH
        return INCOMPLETE if self.interrupted else MATCH

    @property
    def exit_code(self) -> int:
        return 1 if self.first_mismatch is not None else 0

    def to_dict(self) -> dict[str, Any]:
        out = self._base_dict("locate")
        out.update(
            first_mismatch=self.first_mismatch,
            expected=self.expected,
            found=self.found,
            rest=self.rest,
            how=self.how,
            explanation=self.explanation,
            scan_estimate_seconds=self.scan_estimate_seconds,
            first_is_certain=self.first_is_certain,
        )
        return out


@dataclass(frozen=True)
class MismatchRun:
    start: int
    length: int
    """Span from the run's first to its last wrong digit."""
    wrong: int
    """Wrong digits inside the span (short gaps of coincidental matches are merged in)."""
    expected: str
    """Reference digits at the start of the run (at most 16)."""
    found: str


@dataclass
class ScanResult(_Common):
    reference: str
    """``arb`` (python-flint) or ``mpfr`` (gmpy2)."""
    digits_compared: int
    wrong_digits: int
    runs: list[MismatchRun] = field(default_factory=list)
    runs_total: int = 0

    @property
    def any_mismatch(self) -> bool:
        return self.wrong_digits > 0 or super().any_mismatch

    @property
    def first_mismatch(self) -> int | None:
        return self.runs[0].start if self.runs else None

    def to_dict(self) -> dict[str, Any]:
        out = self._base_dict("scan")
        out.update(
            reference=self.reference,
            digits_compared=self.digits_compared,
            wrong_digits=self.wrong_digits,
            first_mismatch=self.first_mismatch,
            mismatch_runs=[asdict(r) for r in self.runs],
            mismatch_runs_total=self.runs_total,
        )
        return out
