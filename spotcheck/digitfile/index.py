"""The index pass: the first pass over a text digit file at open; it validates every byte and builds the index.

The pass validates every byte, counts the digits, checks position labels and
builds what random access needs, in bounded memory (one chunk of
``CHUNK_BYTES`` at a time, read with ``pread`` or from the decompressor).
Its result, label checks and errors are ``passrules.py``'s, shared with the
read-and-check pass.

While the compiled loops serve (``USE_STREAM_LOOPS``), every layout they read
goes through them (``onepass.index_pass``: ``first_mismatch`` on a chunk that
follows the regular unit, ``extract`` / ``extract_labelled`` on any other).  The
loops below are the reference that the tests compare the compiled ones with, and
they serve a layout the compiled loops do not read:

* **regular**: the file repeats one unit (a line, or a group of a file without
  line breaks).  A whole chunk is checked with ``first_mismatch`` against the
  unit repeated; nothing else is needed, and position -> byte offset is
  arithmetic afterwards;
* **indexed**: any other unlabelled layout.  A chunk is validated with one
  ``translate(None, allowed)``; every ``INDEX_STEP`` bytes the digits are
  counted and a sparse index entry (position, byte offset, line) is kept;
* **labelled**: lines with position labels are walked line by line (labels
  must be read one by one to be checked), with index entries at line starts.
  A chunk whose labels all agree is checked with list operations instead
  (``LabelMeaning.expect_all``); for labels at both ends each column is checked
  against its own meaning.

The first unit that breaks the regular pattern moves the pass to the indexed
loop; index entries for the part already seen are filled in by arithmetic.
"""

from __future__ import annotations

import os
from itertools import accumulate

from spotcheck.digitfile import loops
from spotcheck.digitfile import passrules as rules
from spotcheck.digitfile.charsets import WS, allowed_set, class_table, digit_set
from spotcheck.digitfile.detect import Detection
from spotcheck.digitfile.onepass import index_pass
from spotcheck.digitfile.passrules import (
    TAIL_DIGITS,
    IndexResult,
    Progress,
    check_line,
    finish_labels,
    label_checks,
    new_result,
    read_whole_lines,
    split_for_pass,
    stray_error,
)
from spotcheck.digitfile.source import ByteSource
from spotcheck.digitfile.syntax import LabelMeaning, LabelSyntax
from spotcheck.errors import DigitFileError

__all__ = ["build_index", "USE_STREAM_LOOPS"]

USE_STREAM_LOOPS = loops.LOOPS == "c"
"""The pass goes through the compiled loops of the read-and-check pass
(``onepass.index_pass``: the same rules, findings and errors; a regular chunk is
still checked by ``first_mismatch`` alone) when they read the layout; False keeps
the loops below for every layout (the tests' reference)."""


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
        fast = index_pass(src, plan, strict_labels=strict_labels, progress=progress)
        if fast is not None:
            return fast
    total = src.size_bytes
    d1 = len(plan.seg_digits)
    tail = plan.seg_digits[-TAIL_DIGITS:]
    res = new_result(plan)
    name = os.path.basename(src.path)
    if plan.syntax is not None:
        return _scan_labelled(src, plan, base, res, tail, strict_labels, progress, total, name)
    off, pos = plan.seg_end, d1
    line = plan.first_line_no + (1 if plan.seg_end > plan.digits_offset else 0)
    unit = plan.template
    if unit and b"d" in unit and b"?" not in unit:
        width = unit.count(b"d")
        p = len(unit)
        k = max(1, rules.CHUNK_BYTES // p)
        n = k * p
        units = unit * k
        table = class_table(base)
        prev = b""
        keep = (TAIL_DIGITS // width + 2) * p  # bytes of the previous chunk that hold the last digits
        while True:
            data = src.read_at(off, n)
            if len(data) == n and loops.first_mismatch(data, units, table) < 0:
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
            step = max(1, rules.INDEX_STEP // p)
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
        data = src.read_at(off, rules.CHUNK_BYTES)
        if not data:
            break
        bad = data.translate(None, allowed)
        if bad:
            at = data.find(bad[:1])
            raise stray_error(src, plan, base, off + at, data[at])
        step = rules.INDEX_STEP
        for i in range(0, len(data), step):
            blk = data[i : i + step]
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
    # One check per label column: the start and the end label for "both", else the one column.
    checks = label_checks(plan, strict, name)
    meanings = tuple(check.meaning for check in checks)
    d1 = len(plan.seg_digits)
    allowed = allowed_set(base)
    digit_bytes = digit_set(base)
    off, pos, line = plan.seg_end, d1, plan.first_line_no + 1
    step = rules.INDEX_STEP
    last_index = -step
    chunk = min(rules.CHUNK_BYTES, rules.LABELLED_CHUNK_BYTES)  # line lists cost ~5 times the chunk in memory
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
            bodies: list[bytes] = []
            pieces = data.split(b"\n")
            if data.endswith(b"\n"):
                pieces.pop()
            for text in pieces:
                found, b0, b1, how = split_for_pass(
                    syntax, meaning, text[:-1] if text.endswith(b"\r") else text, pos, digit_bytes
                )
                body = text[b0:b1]
                bodies.append(body)
                nd = len(body) - len(body.translate(None, digit_bytes))
                check_line(checks, found, pos, nd, line, off + lo, how)
                if how is not None:
                    res.recovered.append(off + lo)
                if nd:
                    if off + lo - last_index >= step:
                        res.index_pos.append(pos + 1)
                        res.index_off.append(off + lo)
                        res.index_line.append(line)
                        last_index = off + lo
                    pos += nd
                lo += len(text) + 1
                line += 1
            if not data.endswith(b"\n"):
                line -= 1  # the piece after the chunk's last line break is not a line
            cleaned = b"".join(bodies)  # the lines as the line rule read them
        tail = (tail + cleaned.translate(None, WS)[-TAIL_DIGITS:])[-TAIL_DIGITS:]
        off += len(data)
        if progress:
            progress(src.stored_bytes_done(off), total)
    finish_labels(res, checks, plan)
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
    got = list(map(int, found)) if radix == 10 else [int(f, 16) for f in found]
    return got == meaning.expect_all(ends)


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
    expected = meaning.expect_all(ends)
    if expected is None or [int(f, syntax.radix) for f in found] != expected:
        return None
    n = len(pieces)
    step = max(1, n * rules.INDEX_STEP // max(1, len(data)))
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
