"""``DigitFile``: a digit file after its pass, read at any position.

A :class:`DigitFile` is made from a source, its ``Detection`` and the pass's
``IndexResult`` (or from neither, for packed hex) by ``reader.py``
(``open_digit_file``) or by a finished ``DigitStream``.  ``read(position,
count)`` is O(1) arithmetic for a regular layout and a sparse-index lookup plus
at most a few ``INDEX_STEP`` bytes of parsing for any other; labelled lines are
split by the plan's ``LabelSyntax`` as the pass split them.  Every window read is
checked again to be digits only (a file changed since its pass is an error,
never a reading).
"""

from __future__ import annotations

import bisect
import operator
from collections.abc import Iterator
from types import TracebackType

from spotcheck.digitfile.charsets import WS, digit_set
from spotcheck.digitfile.detect import Detection
from spotcheck.digitfile.guess import ConstantMatch
from spotcheck.digitfile.model import Finding, InspectResult, Layout
from spotcheck.digitfile.passrules import INDEX_STEP, IndexResult, split_for_pass
from spotcheck.digitfile.source import ByteSource
from spotcheck.errors import DigitFileError, UsageError

__all__ = ["DigitFile", "EDGE_DIGITS"]

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
        self.first_positions: tuple[int, ...] = (1,) if detection is None else detection.first_positions
        """Where the first digit may lie in the expansion (two positions when a start label leaves
        0- or 1-based open); ``first_how``: ``start``, ``given`` or ``labels`` (``slices.py``)."""
        self.first_how = "start" if detection is None else detection.first_how

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
            for lo, b0, b1 in self._line_bodies(data, pos - 1):
                end = data.find(b"\n", lo)
                end = len(data) if end < 0 else end
                mask[lo : lo + b0] = b" " * b0
                mask[lo + b1 : end] = b" " * (end - lo - b1)
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
            if plan.syntax is not None and self._holds_recovered(off, len(data)):
                before = scan.index_pos[i] - 1 + have
                data_digits = b"".join(data[a + b0 : a + b1] for a, b0, b1 in self._line_bodies(data, before))
            elif plan.syntax is not None:
                data_digits = plan.syntax.strip(data)
            else:
                data_digits = data
            digits = data_digits.translate(None, WS)
            got.append(digits)
            have += len(digits)
            off += len(data)
        return b"".join(got)[skip : skip + n]

    def _holds_recovered(self, off: int, size: int) -> bool:
        """True when a line whose label the pass recovered (``passrules.recover_label``) starts
        in ``[off, off + size)``."""
        rec = self._scan.recovered if self._scan is not None else []
        i = bisect.bisect_left(rec, off)
        return i < len(rec) and rec[i] < off + size

    def _line_bodies(self, data: bytes, before: int) -> Iterator[tuple[int, int, int]]:
        """``(line start, body start, body end)`` of each line of ``data`` (read from a line start
        after ``before`` digits), split by the pass's own line rule (``split_for_pass``)."""
        plan = self._plan
        assert plan is not None and plan.syntax is not None and self.base is not None
        digits = digit_set(self.base)
        lo = 0
        for text in data.split(b"\n"):
            line = text[:-1] if text.endswith(b"\r") else text
            _, b0, b1, _ = split_for_pass(plan.syntax, plan.meaning, line, before, digits)
            body = text[b0:b1]
            before += len(body) - len(body.translate(None, digits))
            yield lo, b0, b1
            lo += len(text) + 1

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
            first_positions=self.first_positions,
            first_how=self.first_how,
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
