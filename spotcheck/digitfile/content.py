"""What the content is before any layout is read: text or binary, packed hex, UTF-16, line endings.

Binary content (control bytes, or mostly bytes >= 0x80) is *packed hex* (two
hex digits per byte, high nibble first) when the caller says so, when the name
ends in ``.bin`` or ``.hexbin`` before any compression suffix, or when its first
bytes are those of a known constant (:func:`packed_reading`); text stored as
UTF-16 is recognised by its byte order mark (:func:`utf16_encoding`); any other
binary content is refused.  :func:`newline_of` names the line ending.
"""

from __future__ import annotations

import os

from spotcheck.digitfile.guess import match_constant
from spotcheck.digitfile.writers import TYPESET_SEPARATORS
from spotcheck.errors import DigitFileError

__all__ = [
    "PACKED_SUFFIXES",
    "first_control",
    "looks_binary",
    "newline_of",
    "packed_reading",
    "utf16_encoding",
]

PACKED_SUFFIXES = (".bin", ".hexbin")
_TEXT_BYTES = bytes(range(0x20, 0x7F)) + b"\t\n\r\f\v"


def looks_binary(head: bytes) -> bool:
    """True for content that is not text: control bytes or mostly non-ASCII."""
    sample = TYPESET_SEPARATORS.sub(b" ", head[:4096])  # typeset blanks between groups are text
    if not sample:
        return False
    odd = sample.translate(None, _TEXT_BYTES)
    if not odd:
        return False
    controls = odd.translate(None, bytes(range(0x80, 0x100)))
    return bool(controls) or len(odd) > 0.3 * len(sample)


def first_control(head: bytes) -> int:
    """Index of the first byte of ``head`` that is not text (0 when there is none in its first 4096)."""
    return next((i for i, c in enumerate(head[:4096]) if c not in _TEXT_BYTES), 0)


_COMPRESSION_SUFFIXES = (".gz", ".gzip", ".bz2", ".xz")


_UTF16_MARKS = ((b"\xff\xfe", "utf-16le"), (b"\xfe\xff", "utf-16be"))


def utf16_encoding(head: bytes) -> str | None:
    """``"utf-16le"`` or ``"utf-16be"`` when the content starts with that byte order mark, else None."""
    for prefix, encoding in _UTF16_MARKS:
        if head.startswith(prefix):
            return encoding
    return None


def packed_reading(head: bytes, path: str, packed: bool | None) -> bool:
    """The packed-binary rule: True to read the content as packed hex, False for text.

    ``packed`` (the caller's choice) wins; otherwise text content is text, and
    binary content is packed hex when the name ends in one of ``PACKED_SUFFIXES``
    (before any compression suffix) or its first 32 bytes are the leading hex
    digits of a known constant; else text when it starts with a UTF-16 byte
    order mark.  Any other binary content is an error.
    """
    if packed is not None:
        return packed
    if not looks_binary(head):
        return False
    bare = os.path.basename(path).lower()
    for suffix in _COMPRESSION_SUFFIXES:
        if bare.endswith(suffix):
            bare = bare[: -len(suffix)]
            break
    if bare.endswith(PACKED_SUFFIXES):
        return True
    digits = head[:32].hex().upper()
    if match_constant(digits, None, 16, len(digits)).name is not None:
        return True
    if utf16_encoding(head) is not None:
        return False  # text stored as UTF-16 (the reader decodes it)
    at = first_control(head)
    raise DigitFileError(
        f"{os.path.basename(path)}: binary content (byte 0x{head[at]:02X} at byte {at}): not digit text, "
        "not gzip/bzip2/xz, and not packed hex digits of a known constant "
        "(name it *.bin to read it as packed hex digits)"
    )


def newline_of(head: bytes) -> str | None:
    """The line ending of the first line break: ``"\\n"``, ``"\\r\\n"``, ``"\\r"`` or None."""
    cr, lf = head.find(b"\r"), head.find(b"\n")
    if cr < 0 and lf < 0:
        return None
    if cr < 0 or (0 <= lf < cr):
        return "\n"
    return "\r\n" if head[cr + 1 : cr + 2] == b"\n" else "\r"
