"""Plain result objects of the checks.  A mismatch is a result, never an exception.

Every result has ``to_dict()`` (JSON-ready, the schema documented in
``spotcheck/checks/schema.py``) and ``exit_code``: 0 when everything checked
matches, 1 when a certified digit differs.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

from .schema import SCHEMA_VERSION
from .stats import false_match_chance, scattered_damage_bound

__all__ = [
    "Note",
    "LabelFinding",
    "FileFacts",
    "WindowCheck",
    "VerifyResult",
    "LocateResult",
    "MismatchRun",
    "ScanResult",
]


@dataclass(frozen=True)
class Note:
    """Something a report says beside its verdict, as a code and its numbers.

    The checks say what happened; the report layer (``spotcheck.report.notes``) words it.
    JSON carries both: ``{"code": ..., **data}`` and the sentence.
    """

    code: str
    data: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, **self.data}


MATCH, MISMATCH, INCOMPLETE, UNCONFIRMED = "match", "mismatch", "incomplete", "unconfirmed"
EXIT_UNCONFIRMED = 3
"""``locate`` found no wrong digit but compared only windows: isolated damage is not ruled out."""


@dataclass(frozen=True)
class LabelFinding:
    """The first position label that disagrees with the digits read: damage, not bad input.

    A user who deleted or inserted digits by accident has such a file; the
    digits are still checked, and the file is reported inconsistent (exit 1).
    """

    kind: str
    """``label-mismatch`` (the label has the wrong value) or ``label-missing``."""
    line: int | None
    byte_offset: int | None
    position: int | None
    """Position of the first digit of the line the label sits on."""
    expected: int | None
    """The value the digit count implies."""
    found: str | None
    """The label as written."""
    total: int = 1
    """Label findings in the file (the first is described above)."""
    end: str | None = None
    """Which end of its line the label sits at: ``"start"`` or ``"end"``."""


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
    label_finding: LabelFinding | None = None
    """The first label that disagrees with the digits (None: labels consistent, absent or ignored)."""
    first: int = 1
    """Position in the expansion of the file's first digit: 1, or ``P`` for a slice that begins
    deeper in it.  Every position a result gives counts from the expansion's start."""
    first_how: str = "start"
    """How ``first`` was learnt: ``start``, ``given``, ``labels`` or ``labels and engine digits``."""

    @property
    def last(self) -> int:
        """Position of the last digit under check."""
        return self.first + self.checked - 1


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
    notes: tuple[Note, ...] = ()
    """What the row is, as codes and numbers (worded in ``spotcheck.report.notes``; JSON ``note``)."""
    base: int = 16
    """Base in which ``position``, ``expected`` and ``found`` are written."""
    prefix: int | None = None
    """For radix-conversion checks: the decimal digits converted (the prefix length)."""

    def to_dict(self) -> dict[str, Any]:
        out = {k: v for k, v in asdict(self).items() if k != "notes"}
        out["notes"] = [n.to_dict() for n in self.notes]
        return out


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
    warnings: list[Note] = field(default_factory=list, kw_only=True)
    """What went wrong beside the check without changing its answer (a damaged checkpoint record, a failed
    write); the JSON report words them in ``warnings`` and gives the codes in ``warning_codes``."""

    @property
    def any_mismatch(self) -> bool:
        return any(not c.match for c in self.checks)

    full_through_value = 0  # overridden by results that ran a full comparison from the first digit

    @property
    def full_through(self) -> int:
        """Digits ``file.first..N`` compared with a full computation (0: none)."""
        return self.full_through_value

    @property
    def covered(self) -> list[tuple[int, int]]:
        """Merged ``(first, last)`` ranges of digits (in the file's base) that were compared."""
        spans: list[tuple[int, int]] = []
        if self.full_through:
            spans.append((self.file.first, self.full_through))
        for c in self.checks:
            if c.position < 1:
                continue
            if c.base != self.file.base:
                if c.prefix:  # a radix conversion of the prefix: every decimal digit of it
                    spans.append((1, min(c.prefix, self.file.checked)))
                continue
            spans.append((c.position, c.position + max(len(c.found), 1) - 1))
        spans.sort()
        out: list[tuple[int, int]] = []
        for a, b in spans:
            if out and a <= out[-1][1] + 1:
                out[-1] = (out[-1][0], max(out[-1][1], b))
            else:
                out.append((a, b))
        return out

    @property
    def covered_digits(self) -> int:
        return sum(b - a + 1 for a, b in self.covered)

    @property
    def exhaustive(self) -> bool:
        """True when every digit under check was compared."""
        return self.covered == [(self.file.first, self.file.last)]

    @property
    def labels_consistent(self) -> bool:
        return self.file.label_finding is None

    @property
    def exit_code(self) -> int:
        return 1 if self.any_mismatch or not self.labels_consistent else 0

    @property
    def verdict(self) -> str:
        if self.any_mismatch:
            return MISMATCH
        return INCOMPLETE if self.interrupted else MATCH

    def _base_dict(self, command: str) -> dict[str, Any]:
        return {
            "command": command,
            "verdict": self.verdict,
            "schema_version": SCHEMA_VERSION,
            "file": asdict(self.file),
            "method": self.method,
            "checks": [c.to_dict() for c in self.checks],
            "seconds": round(self.seconds, 3),
            "evaluations": self.evaluations,
            "interrupted": self.interrupted,
            "labels_consistent": self.labels_consistent,
            "exhaustive": self.exhaustive,
            "covered": [list(r) for r in self.covered],
            "covered_digits": self.covered_digits,
            "warning_codes": [w.to_dict() for w in self.warnings],
        }


@dataclass
class VerifyResult(_Common):
    window: int
    seed: int
    tail_position: int | None
    """Where the tail check landed: a match there rules out a persistent error before it."""
    random_windows: int = 0
    """Random windows checked (distinct; the head, the tail and ``--at`` windows are not among them)."""
    samples_asked: int | None = None
    """Random windows asked for (None: not asked, the default number was sought)."""
    sample_room: int | None = None
    """Distinct positions the random windows were drawn from (None: none were drawn, as when every
    digit was compared instead); fewer than ``samples_asked`` in a short file."""
    notes: list[Note] = field(default_factory=list)
    """What the run did otherwise than asked (``samples-not-drawn``, ``samples-fewer``), as codes and
    numbers; the JSON report words them in ``notes`` and gives the codes in ``note_codes``."""
    full_through_value: int = 0
    """Digits 1..N compared with a full computation (0: sampled windows only)."""
    reference: str | None = None
    """The full computation's library, when one ran."""
    wrong_digits: int | None = None
    """Wrong digits the full comparison found (None when none ran)."""
    wrong_runs: int | None = None
    """Runs of wrong digits the full comparison found (None when none ran)."""
    wrong_spans: list[tuple[int, int]] = field(default_factory=list)
    """``(first, last)`` of the wrong runs the full comparison listed (for the map)."""
    first_wrong_bracket: tuple[int, int] | None = None
    """Decimal files: the first wrong decimal digit lies in ``lo..hi`` (from the prefixes checked)."""
    rounded_from: int | None = None
    """Decimal files: the wrong digits from this position to the end are the true ones rounded up."""
    tail_estimate: dict[str, Any] | None = None
    """The engine's cost estimate for the deepest window (hex files), made before any work."""

    @property
    def false_match_chance(self) -> float:
        """Chance that a wrong window of ``window`` hex digits matches by accident: 16^-w."""
        return false_match_chance(self.window, 16)

    @property
    def scattered_bound(self) -> float | None:
        """95% upper bound on the damaged fraction from the clean random windows (None if any differs)."""
        if self.any_mismatch or self.exhaustive:
            return None
        return scattered_damage_bound(self.random_windows)

    def to_dict(self) -> dict[str, Any]:
        out = self._base_dict("verify")
        out.update(
            window=self.window,
            seed=self.seed,
            false_match_chance=self.false_match_chance,
            tail_position=self.tail_position,
            scattered_bound=self.scattered_bound,
            random_windows=self.random_windows,
            samples_asked=self.samples_asked,
            sample_room=self.sample_room,
            note_codes=[n.to_dict() for n in self.notes],
            reference=self.reference,
            wrong_digits=self.wrong_digits,
            wrong_runs=self.wrong_runs,
            first_wrong_bracket=list(self.first_wrong_bracket) if self.first_wrong_bracket else None,
            rounded_from=self.rounded_from,
            tail_estimate=self.tail_estimate,
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
    full_through_value: int = 0
    """Digits 1..N compared with a full computation (0: none)."""
    first_wrong_bracket: tuple[int, int] | None = None
    """Decimal files, interrupted bisection: the first wrong digit lies in ``lo..hi``."""
    rounded_from: int | None = None
    """Decimal files: the wrong digits from this position to the end are the true ones rounded up."""
    tail_estimate: dict[str, Any] | None = None
    """The engine's cost estimate for the deepest window (hex files), made before any work."""

    @property
    def verdict(self) -> str:
        if self.first_mismatch is not None or self.first_wrong_bracket is not None:
            return MISMATCH
        if self.interrupted:
            return INCOMPLETE
        return MATCH if self.exhaustive else UNCONFIRMED

    @property
    def exit_code(self) -> int:
        if self.verdict == MISMATCH or not self.labels_consistent:
            return 1
        return EXIT_UNCONFIRMED if self.verdict == UNCONFIRMED else 0

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
            first_wrong_bracket=list(self.first_wrong_bracket) if self.first_wrong_bracket else None,
            rounded_from=self.rounded_from,
            tail_estimate=self.tail_estimate,
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
    rounded_from: int | None = None
    """The wrong digits from this position to the end are the true ones rounded up at the last digit."""

    @property
    def any_mismatch(self) -> bool:
        return self.wrong_digits > 0 or super().any_mismatch

    @property
    def first_mismatch(self) -> int | None:
        return self.runs[0].start if self.runs else None

    @property
    def full_through(self) -> int:
        return self.file.first - 1 + self.digits_compared if self.digits_compared else 0

    def to_dict(self) -> dict[str, Any]:
        out = self._base_dict("scan")
        out.update(
            reference=self.reference,
            digits_compared=self.digits_compared,
            wrong_digits=self.wrong_digits,
            first_mismatch=self.first_mismatch,
            mismatch_runs=[asdict(r) for r in self.runs],
            mismatch_runs_total=self.runs_total,
            rounded_from=self.rounded_from,
        )
        return out
