"""Opening a digit file and detecting its layout: what both ways of reading a file start with.

:func:`open_digit_file` (``reader.py``) and :func:`open_stream` (``stream.py``)
check their arguments with :func:`check_open_arguments` (so both accept the
same ``labels``), open the source read-only (``source.open_source``) and call
:func:`detect_source`: the head of the content, the packed-binary rule
(``content.packed_reading``), text stored as UTF-16 (``source.Utf16Source``),
CR-only line breaks (:class:`CarriageReturns`), what general-purpose software
writes around the digits (``writers.Rewritten``: continuation backslashes,
typeset separators, marks, footer lines, page breaks, all seen as blanks), then ``detect.detect_text`` and,
when the digits alone cannot tell, the base the constant decides.
"""

from __future__ import annotations

import os

from spotcheck.digitfile.content import (
    first_control,
    looks_binary,
    newline_of,
    packed_reading,
    utf16_encoding,
)
from spotcheck.digitfile.detect import HEAD_BYTES, Detection, check_labels, detect_text
from spotcheck.digitfile.guess import guess_constant
from spotcheck.digitfile.source import ByteSource, Utf16Source
from spotcheck.digitfile.writers import Rewritten, writer_rules
from spotcheck.errors import DigitFileError, UsageError

__all__ = ["CarriageReturns", "check_open_arguments", "detect_source"]


def check_open_arguments(base: object, labels: object) -> None:
    """Refuse a ``base`` other than 10, 16 or None, and a ``labels`` that is not one of ``LABEL_CHOICES``."""
    if base is not None and base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base!r}")
    check_labels(labels)


class CarriageReturns:
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


def detect_source(
    src: ByteSource,
    base: int | None,
    packed: bool | None,
    labels: str | None,
    first_position: int | None = None,
) -> tuple[ByteSource, Detection | None, bytes]:
    """Detection alone: ``(source, detection, head)``; the detection is None for packed hex.
    ``first_position``: the caller's word on the position of the file's first digit (``slices.py``).

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
        src = CarriageReturns(src)  # type: ignore[assignment]
        head = head.replace(b"\r", b"\n")
    rules = writer_rules(src, head, eof)
    if rules is not None:  # bytes general-purpose software writes around the digits, seen as blanks
        src = Rewritten(src, rules)  # type: ignore[assignment]
        head = src.read_at(0, HEAD_BYTES)
    plan = detect_text(head, eof, src.path, base, labels, first_position=first_position)
    if cr_only:
        plan.newline = "\r"
    if plan.base is None:
        plan.base, plan.base_how = _resolve_base(plan)
    return src, plan, head


def _resolve_base(plan: Detection) -> tuple[int, str]:
    head = plan.head_digits.decode("ascii")
    for b in (10, 16):
        name, _, _ = guess_constant(head, plan.integer_part, b, len(head))
        if name is not None:
            return b, f"decided by the constant: the digits match {name} in base {b}"
    return 10, f"assumed decimal: no letter A-F among the {plan.sample_digits} digits"
