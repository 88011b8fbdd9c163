"""What every pass over a text digit file shares: its result, its label checks, its errors.

Two passes read a text file's digit lines: the index pass (``index.py``, at
open) and the read-and-check pass (``onepass.py``, which the index pass also
uses through the compiled loops, and which ``DigitStream`` hands out digits
from).  Both build the same :class:`IndexResult`, check labels with the same
:class:`LabelCheck` (one per label column; each asks the column's
``LabelMeaning``, the one label rule), report a stray byte with the same
:func:`stray_error` and read labelled text in whole lines
(:func:`read_whole_lines`).  The settings here (``CHUNK_BYTES``,
``INDEX_STEP``, ...) are read at run time, so a test may change them.
"""

from __future__ import annotations

import os
from array import array
from collections.abc import Callable
from dataclasses import dataclass, field

from spotcheck.digitfile.charsets import HEX_LETTERS
from spotcheck.digitfile.detect import Detection
from spotcheck.digitfile.model import Finding
from spotcheck.digitfile.source import ByteSource
from spotcheck.digitfile.syntax import LabelMeaning, LabelSyntax
from spotcheck.errors import DigitFileError, LabelError

__all__ = [
    "CHUNK_BYTES",
    "INDEX_STEP",
    "LABELLED_CHUNK_BYTES",
    "IndexResult",
    "LabelCheck",
    "Progress",
    "TAIL_DIGITS",
    "check_line",
    "finish_labels",
    "label_checks",
    "line_of",
    "new_result",
    "read_whole_lines",
    "recover_label",
    "split_for_pass",
    "stray_error",
]

# --- tuning -----------------------------------------------------------------
CHUNK_BYTES = 8 << 20  # bytes examined per step of the index pass (and of line_of)
INDEX_STEP = 64 << 10  # bytes between sparse index entries (a window read parses at most this much)
LABELLED_CHUNK_BYTES = 2 << 20  # labelled lines read per step by either pass: the longest line accepted
TAIL_DIGITS = 64  # last digits kept for inspect
MAX_FINDINGS = 20  # findings of one kind kept in full; the rest are counted

Progress = Callable[[int, int], None]
"""``progress(done, total)`` in bytes of the file as stored: for a compressed
file, the compressed bytes consumed so far out of the file's size."""


@dataclass
class IndexResult:
    count: int
    """Digits after the point, first line included."""
    regular: bool
    unit: bytes | None
    unit_digits: int
    unit_cols: list[int]
    region_start: int
    index_pos: array = field(default_factory=lambda: array("q"))
    index_off: array = field(default_factory=lambda: array("q"))
    index_line: array = field(default_factory=lambda: array("q"))
    last_digits: bytes = b""
    findings: list[Finding] = field(default_factory=list)
    label_meaning: str | None = None
    end_label_meaning: str | None = None
    """For labels at both ends: what the end labels count (``label_meaning``: the start labels)."""
    content_bytes: int = 0
    recovered: list[int] = field(default_factory=list)
    """Byte offsets of the lines whose label ``recover_label`` found (the random-access read
    reads the stretches holding them line by line, by the same rule)."""


def line_of(src: ByteSource, offset: int) -> tuple[int, int]:
    """``(line, column)`` of byte ``offset``, both 1-based, from one pass that counts line
    breaks from the start (the column in bytes, however long the line)."""
    lines, pos, line_start = 1, 0, 0
    while pos < offset:
        data = src.read_at(pos, min(CHUNK_BYTES, offset - pos))
        if not data:
            break
        breaks = data.count(b"\n")
        if breaks:
            lines += breaks
            line_start = pos + data.rfind(b"\n") + 1
        pos += len(data)
    return lines, offset - line_start + 1


def stray_error(src: ByteSource, plan: Detection, base: int, offset: int, byte: int) -> DigitFileError:
    name = os.path.basename(src.path)
    line, col = line_of(src, offset)
    ch = repr(chr(byte)) if 0x20 <= byte < 0x7F else f"byte 0x{byte:02X}"
    where = f"at byte {offset} (line {line}, column {col})"
    if base == 10 and byte in HEX_LETTERS:
        if plan.explicit_base:
            return DigitFileError(f"{name}: {ch} {where} is not a decimal digit, but base 10 was requested")
        return DigitFileError(
            f"{name}: mixed bases: hex digit {ch} {where}, but the first {plan.sample_digits} digits are all decimal"
        )
    what = "hex" if base == 16 else "decimal"
    return DigitFileError(f"{name}: stray character {ch} {where}: not a {what} digit, space or line break")


class LabelCheck:
    """Checks every label of one column against the count its meaning (from detection) implies.

    ``side`` says which column (``"start"`` or ``"end"``); ``both`` is True when
    the lines carry a label at each end, and the messages then name the end.
    """

    def __init__(
        self, meaning: LabelMeaning, syntax: LabelSyntax, strict: bool, name: str, both: bool = False
    ) -> None:
        self.meaning = meaning
        self.syntax = syntax
        self.strict = strict
        self.name = name
        self.side = syntax.where
        self.what = f"{syntax.where} label" if both else "label"
        self.findings: list[Finding] = []
        self.mismatches = 0
        self.missing = 0

    def feed(self, label: bytes, before: int, nd: int, line: int, offset: int) -> None:
        if not self.meaning.agrees(self.syntax.value(label), before, nd):
            self.mismatch(label, before, nd, line, offset)

    def mismatch(self, label: bytes, before: int, nd: int, line: int, offset: int) -> None:
        want = self.meaning.expect(before, nd)
        text = label.decode("ascii")
        if want is None:
            n = self.meaning.raw(before, nd)
            msg = f"{self.what} {text} disagrees with the digits: {n} digits are not a whole number of bytes"
            want = -1
        else:
            shown = str(want) if self.syntax.radix == 10 else format(want, "X")
            msg = f"{self.what} {text} disagrees with the digits: {self.meaning.explain()} is {shown}"
        if self.strict:
            raise LabelError(f"{self.name}: labels that lie: line {line}: {msg}")
        self.mismatches += 1
        if self.mismatches <= MAX_FINDINGS:
            pos = before + 1 if nd else None
            self.findings.append(
                Finding(
                    "label-mismatch",
                    msg,
                    line=line,
                    byte_offset=offset,
                    position=pos,
                    expected=want,
                    found=text,
                    end=self.side,
                )
            )

    def no_label(self, line: int, offset: int, before: int) -> None:
        self.missing += 1
        at = f" at its {self.side}" if self.what != "label" else ""
        msg = f"a digit line without a position label{at}, unlike the lines around it"
        if self.strict:
            raise LabelError(f"{self.name}: line {line}: {msg}")
        if self.missing <= MAX_FINDINGS:
            self.findings.append(
                Finding(
                    "label-missing", msg, line=line, byte_offset=offset, position=before + 1, end=self.side
                )
            )

    def separator_lost(self, label: bytes, line: int, offset: int, before: int) -> None:
        """A line whose label lost its separator: read as the label (it says what the label must)."""
        self.missing += 1
        text = label.decode("ascii")
        msg = f"the {self.what} {text} has lost its separator (read as the label, not as digits)"
        if self.strict:
            raise LabelError(f"{self.name}: line {line}: {msg}")
        if self.missing <= MAX_FINDINGS:
            self.findings.append(
                Finding(
                    "label-missing",
                    msg,
                    line=line,
                    byte_offset=offset,
                    position=before + 1,
                    found=text,
                    end=self.side,
                )
            )

    def finish(self) -> list[Finding]:
        out = list(self.findings)
        if self.mismatches > MAX_FINDINGS:
            out.append(
                Finding(
                    "label-mismatch",
                    f"{self.mismatches} labels disagree with the digits in all; "
                    f"the first {MAX_FINDINGS} are listed",
                )
            )
        if self.missing > MAX_FINDINGS:
            out.append(Finding("label-missing", f"{self.missing} digit lines have no {self.what} in all"))
        return out


def read_whole_lines(src: ByteSource, off: int, size: int, name: str) -> bytes:
    """Up to ``size`` bytes from ``off``, cut after the last line break (a labelled pass reads whole lines).

    Empty at the end of the file; a line longer than ``size`` is an error.
    """
    data = src.read_at(off, size)
    if len(data) == size:
        cut = data.rfind(b"\n") + 1
        if cut == 0:
            raise DigitFileError(f"{name}: a labelled line at byte {off} is longer than {size} bytes")
        data = data[:cut]
    return data


def new_result(plan: Detection) -> IndexResult:
    """The result of a pass that has read the first digit line (detection's) and nothing more."""
    return IndexResult(
        count=len(plan.seg_digits),
        regular=False,
        unit=None,
        unit_digits=0,
        unit_cols=[],
        region_start=plan.seg_end,
    )


def label_checks(plan: Detection, strict: bool, name: str) -> list[LabelCheck]:
    """One :class:`LabelCheck` per label column of the plan (the start and the end label for
    ``"both"``, else the one column), each fed the first digit line's label."""
    syntax, meaning = plan.syntax, plan.meaning
    assert syntax is not None and meaning is not None
    both = syntax.where == "both"
    meanings: tuple[LabelMeaning, ...] = (meaning,)
    first_texts: tuple[str | None, ...] = (plan.first_label_text,)
    if both:
        assert plan.end_meaning is not None
        meanings = (meaning, plan.end_meaning)
        first_texts = (plan.first_label_text, plan.first_end_label_text)
    checks = [LabelCheck(m, s, strict, name, both) for m, s in zip(meanings, syntax.ends, strict=True)]
    d1 = len(plan.seg_digits)
    for check, first_text in zip(checks, first_texts, strict=True):
        if first_text is not None:
            check.feed(first_text.encode(), 0, d1, plan.first_line_no, plan.digits_offset)
        elif d1:
            check.no_label(plan.first_line_no, plan.digits_offset, 0)
    return checks


def recover_label(
    syntax: LabelSyntax, meaning: LabelMeaning, text: bytes, before: int, digit_bytes: bytes
) -> tuple[bytes, int, int, bool] | None:
    """A label on a line where the syntax finds none, or None.

    The line's outermost number at the label's side (``LabelSyntax.outer_token``)
    is its label when it says exactly what a label there must say, counting the
    digits of the rest of the line: a label whose separator was lost (``:`` or
    ``|`` gone, a blank left), or, for start labels, a line holding nothing but
    a label (a dump's last line, the final offset).  Returns ``(label, body
    start, body end, separator lost)``.  Every pass and the random-access read
    ask this one rule, so they read the line alike.
    """
    if syntax.where == "both":
        return None
    got = syntax.outer_token(text)
    if got is None:
        return None
    label, b0, b1 = got
    body = text[b0:b1]
    nd = len(body) - len(body.translate(None, digit_bytes))
    if nd == 0 and syntax.where != "start":
        return None
    if not meaning.agrees(syntax.value(label), before, nd):
        return None
    return label, b0, b1, nd > 0


def split_for_pass(
    syntax: LabelSyntax, meaning: LabelMeaning | None, text: bytes, before: int, digit_bytes: bytes
) -> tuple[tuple[bytes | None, ...], int, int, str | None]:
    """``(labels, body start, body end, how)`` of one line (no line break) after ``before``
    digits: ``split_labels``, then :func:`recover_label` where it finds no label (``how`` is
    ``"lost"`` for a label whose separator was lost, ``"only"`` for a line holding only its
    label, None when ``split_labels`` read the line)."""
    found, b0, b1 = syntax.split_labels(text)
    if found[0] is None and meaning is not None and syntax.where != "both":
        got = recover_label(syntax, meaning, text, before, digit_bytes)
        if got is not None:
            return (got[0],), got[1], got[2], "lost" if got[3] else "only"
    return found, b0, b1, None


def check_line(
    checks: list[LabelCheck],
    found: tuple[bytes | None, ...],
    before: int,
    nd: int,
    line: int,
    offset: int,
    how: str | None = None,
) -> None:
    """The labels ``found`` on one line (one per column, None where a column has none) checked
    against a line of ``nd`` digits after ``before``; a digit line without a label is recorded,
    and so is a label whose separator was ``lost``."""
    for check, label in zip(checks, found, strict=True):
        if label is not None and how == "lost":
            check.separator_lost(label, line, offset, before)
        elif label is not None:
            check.feed(label, before, nd, line, offset)
        elif nd:
            check.no_label(line, offset, before)


def finish_labels(res: IndexResult, checks: list[LabelCheck], plan: Detection) -> None:
    """Put the label columns' findings (in line order) and meanings on the result."""
    res.findings = sorted(
        (f for check in checks for f in check.finish()), key=lambda f: (f.line is None, f.line or 0)
    )
    assert plan.meaning is not None
    res.label_meaning = plan.meaning.name
    both = plan.syntax is not None and plan.syntax.where == "both"
    res.end_label_meaning = plan.end_meaning.name if both and plan.end_meaning else None
