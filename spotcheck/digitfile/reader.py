"""Open a digit file, run the pass once, then read digits at any position.

>>> import gzip, os, tempfile
>>> d = tempfile.mkdtemp()
>>> path = os.path.join(d, "pi.txt")
>>> with open(path, "w") as f:
...     _ = f.write("3.243F6A8885 A308D31319\\n8A2E037073 44A4093822\\n")
>>> with open_digit_file(path) as df:
...     (df.base, df.integer_part, df.count, df.constant, df.read(1, 8))
(16, '3', 40, 'pi', '243F6A88')
"""

from __future__ import annotations

import bisect
import operator
import os
import re
from collections.abc import Iterator
from types import TracebackType

from spotcheck.digitfile.charsets import WS
from spotcheck.digitfile.detect import (
    HEAD_BYTES,
    LABEL_CHOICES,
    Detection,
    detect_text,
    first_control,
    looks_binary,
    newline_of,
    packed_reading,
    utf16_encoding,
)
from spotcheck.digitfile.guess import ConstantMatch, explicit_constant, guess_constant, match_constant
from spotcheck.digitfile.index import CHUNK_BYTES, INDEX_STEP, IndexResult, Progress, build_index
from spotcheck.digitfile.model import Finding, InspectResult, Layout
from spotcheck.digitfile.source import ByteSource, Utf16Source, open_source
from spotcheck.errors import DigitFileError, UsageError

__all__ = ["DigitFile", "open_digit_file", "inspect_file", "EDGE_DIGITS"]

EDGE_DIGITS = 64  # first and last digits shown by inspect


class DigitFile:
    """A digit file opened read-only, after its one pass.  Use :func:`open_digit_file`."""

    path: str
    size_bytes: int
    compression: str | None
    base: int
    base_how: str
    count: int
    integer_part: str | None
    layout: Layout
    constant: str | None
    constant_how: str
    findings: list[Finding]

    constant_match: ConstantMatch | None
    """The facts behind a guessed constant (None when the constant was given or packed)."""

    def __init__(
        self,
        src: ByteSource,
        *,
        base: int,
        base_how: str,
        count: int,
        integer_part: str | None,
        layout: Layout,
        findings: list[Finding],
        detection: Detection | None = None,
        index: IndexResult | None = None,
        first: str = "",
        last: str = "",
    ) -> None:
        """A file after its pass: ``detection`` and ``index`` for text, neither for packed hex."""
        self._src: ByteSource | None = src
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression
        self.base, self.base_how, self.count, self.integer_part = base, base_how, count, integer_part
        self.layout, self.findings = layout, list(findings)
        self._plan, self._scan = detection, index
        self._packed = detection is None
        self._first = first  # leading and trailing digits seen by the pass (inspect needs no re-read)
        self._last = last
        self.constant, self.constant_how, self.constant_match = None, "", None

    # -- reading -------------------------------------------------------------
    def read(self, position: int, count: int) -> str:
        """Digits ``position .. position+count-1`` (digit 1 is the first after the point).

        Upper-case for hex; clipped at the end of the file (empty past it).
        """
        p, n = _check_window(position, count)
        if p > self.count or n == 0:
            return ""
        n = min(n, self.count - p + 1)
        src = self._source()
        src.check_unchanged()
        if self._packed:
            b0, b1 = (p - 1) // 2, (p + n - 2) // 2 + 1
            raw = src.read_at(b0, b1 - b0).hex().upper()
            out = raw[(p - 1) % 2 :][:n]
        else:
            out = self._read_text(src, p, n)
        if len(out) != n:
            raise DigitFileError(
                f"{self.path}: expected {n} digits at position {p}, found {len(out)}; was it changed?"
            )
        return out

    def iter_chunks(self, chunk_digits: int = 1 << 20, start: int = 1) -> Iterator[tuple[int, str]]:
        """Stream ``(position of first digit, digits)`` from ``start`` to the end, in order."""
        size = operator.index(chunk_digits)
        if size < 1:
            raise UsageError(f"chunk_digits must be at least 1, got {size}")
        p, _ = _check_window(start, 1)
        while p <= self.count:
            digits = self.read(p, size)
            yield p, digits
            p += len(digits)

    def locate(self, position: int) -> tuple[int, int | None]:
        """``(byte offset, line)`` of a digit; offsets count decompressed bytes, line is None for packed files."""
        p, _ = _check_window(position, 1)
        if p > self.count:
            raise UsageError(f"position {p} is past the last digit ({self.count})")
        plan, scan = self._plan, self._scan
        if self._packed or plan is None or scan is None:
            return (p - 1) // 2, None
        d1 = len(plan.seg_digits)
        if p <= d1:
            return plan.seg_cols[p - 1], plan.first_line_no
        if scan.regular and scan.unit is not None:
            u, r = divmod(p - d1 - 1, scan.unit_digits)
            col = scan.unit_cols[r]
            line = plan.first_line_no + (1 if plan.seg_end > plan.digits_offset else 0)
            line += u * scan.unit.count(b"\n") + scan.unit[:col].count(b"\n")
            return scan.region_start + u * len(scan.unit) + col, line
        i = bisect.bisect_right(scan.index_pos, p) - 1
        off, pos, line = scan.index_off[i], scan.index_pos[i], scan.index_line[i]
        data = self._source().read_at(off, 4 * INDEX_STEP + 4 * (p - pos))
        mask = bytearray(data)
        if plan.syntax is not None:
            # Blank out everything outside each line's body, as the pass split it (index entries of
            # a labelled file sit at line starts).
            lo = 0
            for text in data.split(b"\n"):
                _, b0, b1 = plan.syntax.split_labels(text[:-1] if text.endswith(b"\r") else text)
                mask[lo : lo + b0] = b" " * b0
                mask[lo + b1 : lo + len(text)] = b" " * (len(text) - b1)
                lo += len(text) + 1
        digits = b"0123456789ABCDEFabcdef" if self.base == 16 else b"0123456789"
        for i, c in enumerate(mask):
            if c in digits:
                if pos == p:
                    return off + i, line + data.count(b"\n", 0, i)
                pos += 1
        raise DigitFileError(f"{self.path}: could not locate position {p}; was the file changed?")

    def _read_text(self, src: ByteSource, p: int, n: int) -> str:
        plan, scan = self._plan, self._scan
        assert plan is not None and scan is not None
        d1 = len(plan.seg_digits)
        parts: list[bytes] = []
        if p <= d1:
            parts.append(plan.seg_digits[p - 1 : p - 1 + n])
        q = max(p, d1 + 1)
        last = p + n - 1
        if last >= q:
            if scan.regular and scan.unit is not None:
                a, b = self._offset_regular(q), self._offset_regular(last) + 1
                parts.append(src.read_at(a, b - a).translate(None, WS))
            else:
                parts.append(self._read_indexed(src, q, last - q + 1))
        raw = b"".join(parts)
        if raw.translate(None, b"0123456789ABCDEFabcdef" if self.base == 16 else b"0123456789"):
            # The first pass validated every byte, so this is a file changed since, or a reading
            # of the random-access path that the first pass did not make: never hand it out.
            raise DigitFileError(
                f"{self.path}: the digits at positions {p}-{p + n - 1} do not read as the first pass "
                "read them; was the file changed?"
            )
        out = raw.decode("ascii")
        return out.upper() if self.base == 16 else out

    def _offset_regular(self, p: int) -> int:
        plan, scan = self._plan, self._scan
        assert plan is not None and scan is not None and scan.unit is not None
        u, r = divmod(p - len(plan.seg_digits) - 1, scan.unit_digits)
        return scan.region_start + u * len(scan.unit) + scan.unit_cols[r]

    def _read_indexed(self, src: ByteSource, p: int, n: int) -> bytes:
        plan, scan = self._plan, self._scan
        assert plan is not None and scan is not None
        i = bisect.bisect_right(scan.index_pos, p) - 1
        if i < 0:
            return b""
        off, skip = scan.index_off[i], p - scan.index_pos[i]
        need, have = skip + n, 0
        got: list[bytes] = []
        while have < need:
            ask = max(2 * INDEX_STEP, 2 * (need - have) + 1024)
            data = src.read_at(off, ask)
            if not data:
                break
            if plan.syntax is not None and len(data) == ask:
                cut = data.rfind(b"\n") + 1
                data = data[:cut] if cut else data
            if plan.syntax is not None:
                data_digits = plan.syntax.strip(data)
            else:
                data_digits = data
            digits = data_digits.translate(None, WS)
            got.append(digits)
            have += len(digits)
            off += len(data)
        return b"".join(got)[skip : skip + n]

    # -- life cycle ------------------------------------------------------------
    def _source(self) -> ByteSource:
        if self._src is None:
            raise UsageError(f"{self.path} is closed")
        return self._src

    def close(self) -> None:
        if self._src is not None:
            self._src.close()
            self._src = None

    def __enter__(self) -> DigitFile:
        return self

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None
    ) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"DigitFile({self.path!r}, base={self.base}, count={self.count}, constant={self.constant!r})"

    def inspect(self) -> InspectResult:
        """The summary ``spotcheck inspect`` shows."""
        return InspectResult(
            path=self.path,
            size_bytes=self.size_bytes,
            compression=self.compression,
            base=self.base,
            base_how=self.base_how,
            constant=self.constant,
            constant_how=self.constant_how,
            integer_part=self.integer_part,
            count=self.count,
            layout=self.layout,
            first_digits=self._first[:EDGE_DIGITS] or self.read(1, EDGE_DIGITS),
            last_digits=self._last[-EDGE_DIGITS:]
            or self.read(max(1, self.count - EDGE_DIGITS + 1), EDGE_DIGITS),
            findings=list(self.findings),
        )


def _check_window(position: object, count: object) -> tuple[int, int]:
    try:
        p = operator.index(position)  # type: ignore[arg-type]
        n = operator.index(count)  # type: ignore[arg-type]
    except TypeError:
        raise UsageError(f"position and count must be integers, got {position!r} and {count!r}") from None
    if p < 1:
        raise UsageError(f"position must be at least 1 (digit 1 is the first after the point), got {p}")
    if n < 0:
        raise UsageError(f"count must not be negative, got {n}")
    return p, n


def open_digit_file(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    strict_labels: bool = False,
    progress: Progress | None = None,
    labels: str | None = None,
) -> DigitFile:
    """Open a digit file read-only, detect its layout and run the one pass over it.

    ``base`` (10 or 16) overrides detection; ``constant`` overrides the guess.
    ``packed`` forces (True) or forbids (False) reading the file as packed hex;
    by default binary content is packed hex when its name ends in ``.bin`` or
    ``.hexbin`` or its first bytes are those of a known constant.
    ``strict_labels`` turns the first disagreeing position label into a
    :class:`DigitFileError` instead of a finding.  ``labels`` (``"start"``,
    ``"end"``, ``"both"`` or ``"none"``) says where position labels are when
    the layout alone cannot tell.  ``progress(done, total)`` is called after each chunk of
    the pass.
    """
    if base is not None and base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base!r}")
    if labels not in LABEL_CHOICES:
        raise UsageError(f"labels must be start, end, both or none, got {labels!r}")
    src = open_source(path)
    try:
        return _open(src, base, constant, packed, strict_labels, progress, labels)
    except BaseException:
        src.close()
        raise


class _CarriageReturns:
    """A CR-only text file seen with LF line breaks (one byte for one: offsets are kept)."""

    def __init__(self, src: ByteSource) -> None:
        self._inner = src
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression

    def read_at(self, offset: int, n: int) -> bytes:
        return self._inner.read_at(offset, n).replace(b"\r", b"\n")

    def stored_bytes_done(self, offset: int) -> int:
        return self._inner.stored_bytes_done(offset)

    def check_unchanged(self) -> None:
        self._inner.check_unchanged()

    def close(self) -> None:
        self._inner.close()


def _open(
    src: ByteSource,
    base: int | None,
    constant: str | None,
    packed: bool | None,
    strict_labels: bool,
    progress: Progress | None,
    labels: str | None = None,
) -> DigitFile:
    src, plan, head = detect_source(src, base, packed, labels)
    if plan is None:
        return _open_packed(src, head, base, constant, progress)
    assert plan.base is not None
    scan = build_index(src, plan, plan.base, strict_labels=strict_labels, progress=progress)
    return text_digit_file(src, plan, scan, constant)


def detect_source(
    src: ByteSource, base: int | None, packed: bool | None, labels: str | None
) -> tuple[ByteSource, Detection | None, bytes]:
    """Detection alone: ``(source, detection, head)``; the detection is None for packed hex.

    The source returned is the one every later read must use (a CR-only file is
    seen with LF line breaks).  The read-and-check stream (``stream.py``) starts here too.
    """
    name = os.path.basename(src.path)
    head = src.read_at(0, HEAD_BYTES)
    eof = len(head) < HEAD_BYTES
    if not head:
        what = f"its {src.compression} content is empty" if src.compression else "the file is empty"
        raise DigitFileError(f"{name}: {what}")
    if packed_reading(head, src.path, packed):
        return src, None, head
    encoding = utf16_encoding(head)
    if encoding is not None:  # text stored as UTF-16: read as the characters it holds
        src = Utf16Source(src, encoding)
        head = src.read_at(0, HEAD_BYTES)
        eof = len(head) < HEAD_BYTES
        if not head:
            raise DigitFileError(f"{name}: its {src.compression} content is empty")
        if looks_binary(head):  # as for one-byte text: control characters are no digit file
            at = first_control(head)
            raise DigitFileError(
                f"{name}: character U+{head[at]:04X} at byte {2 + 2 * at} of this {encoding} file: "
                "not a digit, space, line break or header text"
            )
    cr_only = newline_of(head) == "\r"
    if cr_only:
        src = _CarriageReturns(src)  # type: ignore[assignment]
        head = head.replace(b"\r", b"\n")
    plan = detect_text(head, eof, src.path, base, labels)
    if cr_only:
        plan.newline = "\r"
    if plan.base is None:
        plan.base, plan.base_how = _resolve_base(plan)
    return src, plan, head


def text_digit_file(src: ByteSource, plan: Detection, scan: IndexResult, constant: str | None) -> DigitFile:
    """The :class:`DigitFile` of a text file once its pass (``scan``) is done."""
    assert plan.base is not None
    name = os.path.basename(src.path)
    src.check_unchanged()
    if scan.count == 0:
        raise DigitFileError(f"{name}: no digits after the radix point")
    df = DigitFile(
        src,
        base=plan.base,
        base_how=plan.base_how,
        count=scan.count,
        integer_part=plan.integer_part,
        layout=_text_layout(src, plan, scan),
        findings=scan.findings,
        detection=plan,
        index=scan,
        first=plan.head_digits.decode("ascii").upper(),
        last=scan.last_digits.decode("ascii").upper(),
    )
    _decide_constant(df, plan.head_digits.decode("ascii"), constant)
    return df


def _resolve_base(plan: Detection) -> tuple[int, str]:
    head = plan.head_digits.decode("ascii")
    for b in (10, 16):
        name, _, _ = guess_constant(head, plan.integer_part, b, len(head))
        if name is not None:
            return b, f"decided by the constant: the digits match {name} in base {b}"
    return 10, f"assumed decimal: no letter A-F among the {plan.sample_digits} digits"


def _decide_constant(df: DigitFile, head: str, constant: str | None) -> None:
    if constant is not None:
        name, how, matched, agrees = explicit_constant(constant, head, df.integer_part, df.base, df.count)
        df.constant, df.constant_how = name, how
        if not agrees:
            df.findings.append(
                Finding(
                    "constant-mismatch",
                    f"the file's leading digits do not match {name} in base {df.base}: "
                    f"only the first {matched} agree",
                    position=matched + 1,
                )
            )
        return
    match = match_constant(head, df.integer_part, df.base, df.count)
    df.constant, df.constant_how, df.constant_match = match.name, match.how, match


def _groups(unit: bytes) -> tuple[int | None, int | None]:
    """(digits per line, group size) read off one unit of character classes."""
    body = unit.rstrip(WS)
    groups = [len(g) for g in re.split(rb"[ \t]+", body.strip()) if g]
    width = sum(groups) if unit.endswith(b"\n") else None
    group = None
    if len(groups) > 1 and len(set(groups[:-1])) == 1 and groups[-1] <= groups[0]:
        group = groups[0]
    elif not unit.endswith(b"\n") and len(groups) == 1 and unit != body:
        group = groups[0]
    return width, group


def _runs(cols: list[int]) -> list[int]:
    """Lengths of the runs of adjacent byte offsets (digit groups)."""
    runs: list[int] = []
    prev = -2
    for c in cols:
        if c == prev + 1:
            runs[-1] += 1
        else:
            runs.append(1)
        prev = c
    return runs


def _text_layout(src: ByteSource, plan: Detection, scan: IndexResult) -> Layout:
    width = group = line_bytes = None
    if scan.count == len(plan.seg_digits):  # one line holds every digit
        runs = _runs(plan.seg_cols)
        if len(runs) > 1 and len(set(runs[:-1])) == 1 and runs[-1] <= runs[0]:
            group = runs[0]
    elif scan.regular and scan.unit is not None:
        width, group = _groups(scan.unit)
        line_bytes = len(scan.unit) if width is not None else None
    elif plan.syntax is not None:
        line = src.read_at(plan.seg_end, 64 << 10)
        line = line[: line.find(b"\n") + 1] if b"\n" in line else line
        body = plan.syntax.strip(line).strip(b" \t") or line
        from spotcheck.digitfile.charsets import class_table

        width, group = _groups(body.translate(class_table(plan.base or 16)))
    return Layout(
        kind="text",
        line_width=width,
        line_bytes=line_bytes,
        group_size=group,
        labels=plan.labels,
        label_meaning=scan.label_meaning,
        end_label_meaning=scan.end_label_meaning,
        header_lines=plan.header_lines,
        digits_offset=plan.digits_offset,
        newline=plan.newline,
        letter_case=plan.letter_case,
        access="regular" if scan.regular else "indexed",
        index_entries=len(scan.index_pos),
    )


def _open_packed(
    src: ByteSource,
    head: bytes,
    base: int | None,
    constant: str | None,
    progress: Progress | None,
) -> DigitFile:
    """Packed binary hex: every byte holds two hex digits, high nibble first; no byte is anything else."""
    name = os.path.basename(src.path)
    if base == 10:
        raise DigitFileError(f"{name}: packed binary holds hex digits, but base 10 was requested")
    last = ""
    if src.compression is None:
        size = src.size_bytes
    else:
        size, tail = 0, b""
        while data := src.read_at(size, CHUNK_BYTES):
            size += len(data)
            tail = (tail + data)[-EDGE_DIGITS:]
            if progress:
                progress(src.stored_bytes_done(size), src.size_bytes)
        last = tail.hex().upper()
    src.check_unchanged()
    df = DigitFile(
        src,
        base=16,
        base_how="packed binary: two hex digits per byte",
        count=2 * size,
        integer_part=None,
        layout=Layout(kind="packed", access="regular"),
        findings=[],
        first=head[:EDGE_DIGITS].hex().upper(),
        last=last,
    )
    _decide_constant(df, head[:32].hex().upper(), constant)
    return df


def inspect_file(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    progress: Progress | None = None,
    labels: str | None = None,
) -> InspectResult:
    """Open, pass over and summarise a digit file (what ``spotcheck inspect`` prints)."""
    with open_digit_file(path, base, constant, packed=packed, progress=progress, labels=labels) as df:
        return df.inspect()
