"""The first pass over a text digit file: it validates every byte and builds the index.

The pass validates every byte, counts the digits, checks position labels and
builds what random access needs, in bounded memory (one chunk of
``CHUNK_BYTES`` at a time, read with ``pread`` or from the decompressor).

Three loops, fastest first:

* **regular**: the file repeats one unit (a line, or a group of a file without
  line breaks).  A whole chunk is checked with one ``bytes.translate`` into
  character classes and one comparison with the unit repeated; nothing else is
  needed, and position -> byte offset is arithmetic afterwards;
* **indexed**: any other unlabelled layout.  A chunk is validated with one
  ``translate(None, allowed)``; every ``INDEX_STEP`` bytes the digits are
  counted and a sparse index entry (position, byte offset, line) is kept;
* **labelled**: lines with position labels are walked line by line (labels
  must be read one by one to be checked), with index entries at line starts.
  A chunk whose labels all agree is checked with list operations instead; for
  labels at both ends each column is checked against its own meaning.

The first unit that breaks the regular pattern moves the pass to the indexed
loop; index entries for the part already seen are filled in by arithmetic.
"""

from __future__ import annotations

import os
from array import array
from collections.abc import Callable
from dataclasses import dataclass, field
from itertools import accumulate

from spotcheck.digitfile.charsets import HEX_LETTERS, WS, allowed_set, class_table, digit_set
from spotcheck.digitfile.detect import Detection, LabelMeaning, LabelSyntax
from spotcheck.digitfile.model import Finding
from spotcheck.digitfile.source import ByteSource
from spotcheck.errors import DigitFileError, LabelError

__all__ = ["IndexResult", "build_index", "line_of", "Progress", "CHUNK_BYTES", "INDEX_STEP"]

# --- tuning -----------------------------------------------------------------
CHUNK_BYTES = 8 << 20  # bytes examined per step of the pass
LABELLED_CHUNK_BYTES = 2 << 20  # bytes of labelled lines examined per step
INDEX_STEP = 64 << 10  # bytes between sparse index entries (a window read parses at most this much)
TAIL_DIGITS = 64  # last digits kept for inspect
MAX_FINDINGS = 20  # findings of one kind kept in full; the rest are counted


def first_mismatch_py(data: bytes, units: bytes, table: bytes) -> int:
    """Index of the first byte of ``data`` whose class (``table``) differs from ``units``, or -1."""
    classes = data.translate(table)
    if classes == units[: len(data)]:
        return -1
    for i, (a, b) in enumerate(zip(classes, units, strict=False)):
        if a != b:
            return i
    return len(data)  # units shorter than data: not reached by the pass


first_mismatch = first_mismatch_py
FIRST_PASS = "python"
if os.environ.get("SPOTCHECK_PURE", "").strip().lower() not in ("1", "true", "yes", "on"):
    try:
        from spotcheck.digitfile._index import (  # type: ignore[import-not-found]
            first_mismatch as _first_mismatch_c,
        )
    except ImportError:  # the optional extension was not built: the Python twin serves
        pass
    else:
        first_mismatch = _first_mismatch_c
        FIRST_PASS = "c"

USE_STREAM_LOOPS = FIRST_PASS == "c"
"""The pass goes through the compiled loops of the read-and-check stream
(``stream.index_pass``: the same rules, findings and errors; a regular chunk is
still checked by ``first_mismatch`` alone) when they know the layout; False keeps
the loops below for every layout (the tests' reference)."""

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


class _LabelCheck:
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
        want = self.meaning.expect(before, nd)
        if want is None or self.syntax.value(label) != want:
            self.mismatch(label, before, nd, line, offset)

    def mismatch(self, label: bytes, before: int, nd: int, line: int, offset: int) -> None:
        want = self.meaning.expect(before, nd)
        text = label.decode("ascii")
        if want is None:
            n = before + nd if self.meaning.kind == "through" else before
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


def build_index(
    src: ByteSource,
    plan: Detection,
    base: int,
    *,
    strict_labels: bool = False,
    progress: Progress | None = None,
) -> IndexResult:
    """Run the pass from ``plan.seg_end`` to the end of the content."""
    if USE_STREAM_LOOPS:
        from spotcheck.digitfile.stream import index_pass  # imported here: stream.py imports this module

        fast = index_pass(src, plan, strict_labels=strict_labels, progress=progress)
        if fast is not None:
            return fast
    total = src.size_bytes
    d1 = len(plan.seg_digits)
    tail = plan.seg_digits[-TAIL_DIGITS:]
    res = IndexResult(
        count=d1, regular=False, unit=None, unit_digits=0, unit_cols=[], region_start=plan.seg_end
    )
    name = os.path.basename(src.path)
    if plan.syntax is not None:
        return _scan_labelled(src, plan, base, res, tail, strict_labels, progress, total, name)
    off, pos = plan.seg_end, d1
    line = plan.first_line_no + (1 if plan.seg_end > plan.digits_offset else 0)
    unit = plan.template
    if unit and b"d" in unit and b"?" not in unit:
        width = unit.count(b"d")
        p = len(unit)
        k = max(1, CHUNK_BYTES // p)
        n = k * p
        units = unit * k
        table = class_table(base)
        prev = b""
        keep = (TAIL_DIGITS // width + 2) * p  # bytes of the previous chunk that hold the last digits
        while True:
            data = src.read_at(off, n)
            if len(data) == n and first_mismatch(data, units, table) < 0:
                pos += k * width
                off += n
                prev = data
                if progress:
                    progress(src.stored_bytes_done(off), total)
                continue
            if len(data) < n:
                classes = data.translate(table)
                body = classes.rstrip(WS)
                if body == units[: len(body)]:
                    full, rest = divmod(len(body), p)
                    pos += full * width + unit[:rest].count(b"d")
                    tail = (tail + (prev[-keep:] + data).translate(None, WS))[-TAIL_DIGITS:]
                    res.count, res.regular, res.unit, res.unit_digits = pos, True, unit, width
                    res.unit_cols = [i for i, c in enumerate(unit) if c == ord("d")]
                    res.last_digits, res.content_bytes = tail, off + len(data)
                    if progress:
                        progress(src.stored_bytes_done(off + len(data)), total)
                    return res
            # The pattern breaks in this chunk: index what was regular, then go on indexed.
            units_done = (off - plan.seg_end) // p
            step = max(1, INDEX_STEP // p)
            nl = unit.count(b"\n")
            for j in range(0, units_done, step):
                res.index_pos.append(d1 + j * width + 1)
                res.index_off.append(plan.seg_end + j * p)
                res.index_line.append(line + j * nl)
            line += units_done * nl
            if prev:
                tail = (tail + prev[-keep:].translate(None, WS))[-TAIL_DIGITS:]
            break
    allowed = allowed_set(base)
    while True:
        data = src.read_at(off, CHUNK_BYTES)
        if not data:
            break
        bad = data.translate(None, allowed)
        if bad:
            at = data.find(bad[:1])
            raise stray_error(src, plan, base, off + at, data[at])
        for i in range(0, len(data), INDEX_STEP):
            blk = data[i : i + INDEX_STEP]
            digits = blk.translate(None, WS)
            if digits:
                res.index_pos.append(pos + 1)
                res.index_off.append(off + i)
                res.index_line.append(line)
                pos += len(digits)
                tail = (tail + digits[-TAIL_DIGITS:])[-TAIL_DIGITS:]
            line += blk.count(b"\n")
        off += len(data)
        if progress:
            progress(src.stored_bytes_done(off), total)
    res.count, res.last_digits, res.content_bytes = pos, tail, off
    return res


def _scan_labelled(
    src: ByteSource,
    plan: Detection,
    base: int,
    res: IndexResult,
    tail: bytes,
    strict: bool,
    progress: Progress | None,
    total: int,
    name: str,
) -> IndexResult:
    syntax, meaning = plan.syntax, plan.meaning
    assert syntax is not None and meaning is not None
    both = syntax.where == "both"
    meanings: tuple[LabelMeaning, ...] = (meaning,)
    if both:
        assert plan.end_meaning is not None
        meanings = (meaning, plan.end_meaning)
    # One check per label column: the start and the end labels for "both", else the one column.
    checks = [_LabelCheck(m, s, strict, name, both) for m, s in zip(meanings, syntax.ends, strict=True)]
    d1 = len(plan.seg_digits)
    first_texts = (plan.first_label_text, plan.first_end_label_text) if both else (plan.first_label_text,)
    for check, first_text in zip(checks, first_texts, strict=True):
        if first_text is not None:
            check.feed(first_text.encode(), 0, d1, plan.first_line_no, plan.digits_offset)
        elif d1:
            check.no_label(plan.first_line_no, plan.digits_offset, 0)
    allowed = allowed_set(base)
    digit_bytes = digit_set(base)
    off, pos, line = plan.seg_end, d1, plan.first_line_no + 1
    last_index = -INDEX_STEP
    chunk = min(CHUNK_BYTES, LABELLED_CHUNK_BYTES)  # line lists cost ~5 times the chunk in memory
    while True:
        data = read_whole_lines(src, off, chunk, name)
        if not data:
            break
        cleaned, found_all = syntax.split_all(data)
        if cleaned.translate(None, allowed):
            _raise_labelled_stray(src, plan, base, data, off, syntax, allowed)
        fast = None
        if all(
            _column_agrees(cleaned, found, pos, m, s.radix)
            for found, m, s in zip(found_all[1:], meanings[1:], syntax.ends[1:], strict=True)
        ):  # the end column of "both" first; then the start (or only) column, which also indexes
            fast = _labelled_chunk_fast(
                data, cleaned, found_all[0], off, pos, line, meaning, syntax.ends[0], res
            )
        if fast is not None:
            pos, line = fast
            last_index = res.index_off[-1] if res.index_off else last_index
        else:
            lo = 0
            pieces = data.split(b"\n")
            if data.endswith(b"\n"):
                pieces.pop()
            for text in pieces:
                found, b0, b1 = syntax.split_labels(text[:-1] if text.endswith(b"\r") else text)
                body = text[b0:b1]
                nd = len(body) - len(body.translate(None, digit_bytes))
                for check, label in zip(checks, found, strict=True):
                    if label is not None:
                        check.feed(label, pos, nd, line, off + lo)
                    elif nd:
                        check.no_label(line, off + lo, pos)
                if nd:
                    if off + lo - last_index >= INDEX_STEP:
                        res.index_pos.append(pos + 1)
                        res.index_off.append(off + lo)
                        res.index_line.append(line)
                        last_index = off + lo
                    pos += nd
                lo += len(text) + 1
                line += 1
            if not data.endswith(b"\n"):
                line -= 1  # the piece after the chunk's last line break is not a line
        tail = (tail + cleaned.translate(None, WS)[-TAIL_DIGITS:])[-TAIL_DIGITS:]
        off += len(data)
        if progress:
            progress(src.stored_bytes_done(off), total)
    res.findings = sorted(
        (f for check in checks for f in check.finish()), key=lambda f: (f.line is None, f.line or 0)
    )
    res.label_meaning = meaning.name
    res.end_label_meaning = plan.end_meaning.name if both and plan.end_meaning else None
    res.count, res.last_digits, res.content_bytes = pos, tail, off
    return res


def _column_agrees(cleaned: bytes, found: list[bytes], pos: int, meaning: LabelMeaning, radix: int) -> bool:
    """True when every line of ``cleaned`` has a label in ``found`` and each says what ``meaning`` implies.

    The list-level check of one label column (the end column of a file labelled at
    both ends); False sends the chunk to the line-by-line loop, which records findings.
    """
    pieces = cleaned.translate(None, b" \t\r").split(b"\n")
    if cleaned.endswith(b"\n"):
        pieces.pop()
    if len(found) != len(pieces) or not pieces:
        return False
    ends = list(accumulate(map(len, pieces), initial=pos))
    unit = meaning.unit
    if unit != 1 and any(e % unit for e in ends):
        return False
    got = list(map(int, found)) if radix == 10 else [int(f, 16) for f in found]
    if meaning.kind == "through" and unit == 1:
        return got == ends[1:]
    if meaning.kind == "before":
        expected = [e // unit for e in ends[:-1]]
    elif meaning.kind == "first":
        expected = [e // unit + 1 for e in ends[:-1]]
    else:
        expected = [e // unit for e in ends[1:]]
    return got == expected


def _labelled_chunk_fast(
    data: bytes,
    cleaned: bytes,
    found: list[bytes],
    off: int,
    pos: int,
    line: int,
    meaning: LabelMeaning,
    syntax: LabelSyntax,
    res: IndexResult,
) -> tuple[int, int] | None:
    """Check a chunk whose every line carries a label, with list-level operations only.

    Returns the new ``(position count, line)``, or None when the chunk needs
    the line-by-line loop (a line without label, or a label that disagrees:
    that loop records the findings).
    """
    pieces = cleaned.translate(None, b" \t\r").split(b"\n")
    raw = data.split(b"\n")
    if data.endswith(b"\n"):
        pieces.pop()
        raw.pop()
    if len(found) != len(pieces) or len(raw) != len(pieces) or not pieces:
        return None
    ends = list(accumulate(map(len, pieces), initial=pos))
    unit = meaning.unit
    if any(e % unit for e in ends):
        return None
    if meaning.kind == "before":
        expected = [e // unit for e in ends[:-1]]
    elif meaning.kind == "first":
        expected = [e // unit + 1 for e in ends[:-1]]
    else:
        expected = [e // unit for e in ends[1:]]
    if [int(f, syntax.radix) for f in found] != expected:
        return None
    n = len(pieces)
    step = max(1, n * INDEX_STEP // max(1, len(data)))
    start = off
    for k in range(0, n, step):
        if ends[k + 1] > ends[k]:
            res.index_pos.append(ends[k] + 1)
            res.index_off.append(start)
            res.index_line.append(line + k)
        start += sum(map(len, raw[k : k + step])) + len(raw[k : k + step])
    return ends[-1], line + n


def _raise_labelled_stray(
    src: ByteSource, plan: Detection, base: int, data: bytes, off: int, syntax: LabelSyntax, allowed: bytes
) -> None:
    lo = 0
    for text in data.split(b"\n"):
        _, b0, b1 = syntax.split_labels(text[:-1] if text.endswith(b"\r") else text)
        body = text[b0:b1]
        bad = body.translate(None, allowed)
        if bad:
            at = lo + b0 + body.find(bad[:1])
            raise stray_error(src, plan, base, off + at, data[at])
        lo += len(text) + 1
    # Every line's own split found only allowed bytes, yet the chunk's bulk split did not: the two
    # readings of one label syntax disagree. That is the reader's fault, never a guess to make.
    raise DigitFileError(
        f"{os.path.basename(src.path)}: the labelled lines from byte {off} split two different ways "
        "in spotcheck's reader (a fault of spotcheck, not of the file: please report it with the file)"
    )
