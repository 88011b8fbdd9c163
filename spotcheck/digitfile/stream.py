"""Read a digit file once, front to back: its digits chunk by chunk, every byte checked on the way.

:func:`open_digit_file` runs the index pass before the first read, so a caller
that then streams the whole file (``compare``) reads every byte twice.  A
:class:`DigitStream` does both in one read: it opens the file with detection
only (the head), then yields the digits chunk by chunk while validating every
byte exactly as the index pass does (a stray character is the same
:class:`DigitFileError` naming byte offset, line and column; a label that
disagrees is the same :class:`Finding`, or :class:`LabelError` with
``strict_labels``), and builds the index on the way.  The count and the
findings are known at the end of the stream; :meth:`DigitStream.finish` then
hands over a :class:`DigitFile` with random access, no second pass needed.

>>> import os, tempfile
>>> path = os.path.join(tempfile.mkdtemp(), "pi.txt")
>>> with open(path, "w") as f:
...     _ = f.write("3.243F6A8885 A308D31319\\n8A2E037073 44A4093822\\n")
>>> with open_stream(path) as s:
...     (s.base, s.integer_part, s.take(8), len(s.take(100)), s.done)
...     df = s.finish()
(16, '3', b'243F6A88', 32, True)
>>> with df:
...     (df.count, df.constant, df.read(33, 8))
(40, 'pi', 'A4093822')

The pass itself is ``onepass.ReadPass`` (the compiled loops of ``loops.py``,
the rules of ``passrules.py``).  A layout the loops do not read
(``loops.reads``) is read by the index pass first and then streamed (two reads,
never a misreading); packed hex is streamed from its :class:`DigitFile`.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from types import TracebackType

from spotcheck.digitfile import onepass
from spotcheck.digitfile.file import DigitFile
from spotcheck.digitfile.index import build_index
from spotcheck.digitfile.loops import reads
from spotcheck.digitfile.onepass import ReadPass
from spotcheck.digitfile.opening import check_open_arguments, detect_source
from spotcheck.digitfile.reader import open_packed, text_digit_file
from spotcheck.digitfile.source import ByteSource, open_source
from spotcheck.errors import UsageError

__all__ = ["DigitStream", "open_stream"]


class DigitStream:
    """A digit file opened for one sequential read.  Use :func:`open_stream`.

    Known at once: ``path``, ``size_bytes``, ``compression``, ``base``,
    ``base_how``, ``integer_part``, ``head_digits``, and ``how`` the digits are
    read (in one pass; or, for packed hex and layouts the loops do not know,
    from a :class:`DigitFile` opened by the index pass).  ``digits_read`` and
    ``bytes_done`` grow as the stream is read; after the end, :meth:`finish`
    gives the :class:`DigitFile` (count, findings, constant, random access).
    """

    def __init__(
        self,
        src: ByteSource,
        *,
        base: int | None = None,
        constant: str | None = None,
        packed: bool | None = None,
        strict_labels: bool = False,
        labels: str | None = None,
        first_position: int | None = None,
    ) -> None:
        self._src: ByteSource | None = src
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression
        self._constant, self._labels = constant, labels
        self._df: DigitFile | None = None
        self._pass: ReadPass | None = None
        self._buf, self._at = b"", 0
        self.digits_read = 0
        self._stored = 0
        src, plan, head = detect_source(src, base, packed, labels, first_position)
        self._src, self._plan = src, plan
        if plan is None:  # packed hex: two digits per byte, nothing to validate
            self._df = open_packed(src, head, base, constant, None, first_position)
            self.base, self.base_how, self.integer_part = 16, self._df.base_how, None
            self.head_digits = head[:32].hex().upper()
            self.how = "packed"
            self._gen: Iterator[bytes] | None = self._from_file()
            return
        assert plan.base is not None
        self.base, self.base_how, self.integer_part = plan.base, plan.base_how, plan.integer_part
        self.head_digits = plan.head_digits.decode("ascii").upper()
        if not reads(plan):
            scan = build_index(src, plan, plan.base, strict_labels=strict_labels)
            self._df = text_digit_file(src, plan, scan, constant, labels)
            self.how = "index pass, then read"
            self._gen = self._from_file()
        else:
            self._pass = ReadPass(src, plan, strict_labels)
            self.how = "read and checked in one pass"
            self._gen = self._pass.run()

    # -- reading -------------------------------------------------------------
    @property
    def bytes_done(self) -> int:
        """Bytes of the file as stored consumed so far (compressed bytes for a compressed file)."""
        return self._pass.stored if self._pass is not None else self._stored

    @property
    def done(self) -> bool:
        """True once every digit has been handed out."""
        return self._gen is None and self._at >= len(self._buf)

    def chunks(self, copy: bool = True) -> Iterator[bytes]:
        """The remaining digits (upper-case ASCII bytes), chunk by chunk, in order.

        With ``copy=False`` a chunk may be the stream's own buffer (a ``bytearray``),
        valid only until the next chunk is asked for: for callers done with each
        chunk before they take the next, it saves a copy and fresh memory per chunk.
        """
        if self._pass is not None:
            self._pass.reuse = not copy
        if self._at < len(self._buf):
            rest, self._buf, self._at = self._buf[self._at :], b"", 0
            self.digits_read += len(rest)
            yield rest
        while self._gen is not None:
            try:
                piece = next(self._gen)
            except StopIteration:
                self._gen = None
                break
            self.digits_read += len(piece)
            yield piece

    def take(self, n: int) -> bytes:
        """The next ``n`` digits (fewer only at the end of the file)."""
        have = len(self._buf) - self._at
        if self._pass is not None:
            self._pass.reuse = False  # the pieces are joined after the next ones are read
        if have < n:
            parts = [self._buf[self._at :]]
            while have < n and self._gen is not None:
                try:
                    piece = next(self._gen)
                except StopIteration:
                    self._gen = None
                    break
                parts.append(piece)
                have += len(piece)
            self._buf, self._at = b"".join(parts), 0
        out = self._buf[self._at : self._at + n]
        self._at += len(out)
        self.digits_read += len(out)
        return out

    def drain(self) -> None:
        """Read to the end without keeping the digits (the count, findings and index are then known)."""
        for _ in self.chunks():
            pass

    def finish(self) -> DigitFile:
        """The :class:`DigitFile` once every digit was read; it takes over the open file."""
        if not self.done:
            raise UsageError(f"{self.path}: finish() before the end of the stream")
        if self._df is None:
            assert self._plan is not None and self._pass is not None and self._src is not None
            assert self._pass.scan is not None
            self._df = text_digit_file(self._src, self._plan, self._pass.scan, self._constant, self._labels)
        df, self._df, self._src = self._df, None, None
        if df is None:
            raise UsageError(f"{self.path}: finish() was already called")
        return df

    # -- the passes ----------------------------------------------------------
    def _from_file(self) -> Iterator[bytes]:
        df = self._df
        assert df is not None
        for p, digits in df.iter_chunks(onepass.STREAM_CHUNK_BYTES):
            self._stored = df.size_bytes * (p + len(digits) - 1) // df.count
            yield digits.encode("ascii")

    # -- life cycle ----------------------------------------------------------
    def close(self) -> None:
        """Close the file (a :class:`DigitFile` from :meth:`finish` keeps it open until its own close)."""
        self._gen = None
        if self._df is not None:
            self._df.close()
            self._df = None
            self._src = None
        if self._src is not None:
            self._src.close()
            self._src = None

    def __enter__(self) -> DigitStream:
        return self

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None
    ) -> None:
        self.close()  # after finish() the DigitFile owns the file: nothing left to close here

    @property
    def first_positions(self) -> tuple[int, ...]:
        """Where the file's first digit may lie in the expansion (``DigitFile.first_positions``)."""
        if self._plan is not None:
            return self._plan.first_positions
        return (1,) if self._df is None else self._df.first_positions

    def __repr__(self) -> str:
        return f"DigitStream({self.path!r}, base={self.base}, digits_read={self.digits_read})"


def open_stream(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    strict_labels: bool = False,
    labels: str | None = None,
    first_position: int | None = None,
) -> DigitStream:
    """Open a digit file read-only for one sequential read (detection only; no pass yet).

    The arguments are those of :func:`open_digit_file`; the digits come from
    :meth:`DigitStream.take` or :meth:`DigitStream.chunks`, checked as they are
    read, and :meth:`DigitStream.finish` gives the :class:`DigitFile` at the end.
    """
    check_open_arguments(base, labels)
    src = open_source(path)
    try:
        return DigitStream(
            src,
            base=base,
            constant=constant,
            packed=packed,
            strict_labels=strict_labels,
            labels=labels,
            first_position=first_position,
        )
    except BaseException:
        src.close()
        raise
