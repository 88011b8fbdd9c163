"""Byte sets and translation tables shared by detection, scanning and reading."""

from __future__ import annotations

import re

__all__ = [
    "DEC",
    "HEX",
    "HEX_LETTERS",
    "WS",
    "digit_set",
    "allowed_set",
    "class_table",
    "LABEL_START",
    "LABEL_END",
    "strip_labels",
    "split_labels",
]

DEC = b"0123456789"
HEX = b"0123456789ABCDEFabcdef"
HEX_LETTERS = b"ABCDEFabcdef"
WS = b" \t\r\n"
"""Whitespace allowed between digits: spaces and tabs group, CR/LF end lines."""

# A label is a decimal number set off from the digits by ':' or '|'.
_SEP = rb"[ \t]*[:|][ \t]*"
LABEL_START = re.compile(rb"^[ \t]*(\d+)" + _SEP, re.M)
LABEL_END = re.compile(_SEP + rb"(\d+)[ \t]*(?=\r?$)", re.M)


def digit_set(base: int) -> bytes:
    return HEX if base == 16 else DEC


def allowed_set(base: int) -> bytes:
    """Every byte that may appear in the digit part of a text file of ``base``."""
    return digit_set(base) + WS


def class_table(base: int) -> bytes:
    """A ``bytes.translate`` table: digit -> ``d``, whitespace kept, anything else -> ``?``."""
    table = bytearray(b"?" * 256)
    for c in digit_set(base):
        table[c] = ord("d")
    for c in WS:
        table[c] = c
    return bytes(table)


# Whole-chunk twins of the two patterns.  Python's re engine scans fast for a
# literal or a character-set prefix but tries ``^`` (multi-line) at every byte,
# so the start pattern begins with the line break itself (the chunk gets one
# prepended) and the end pattern with its separator; the blanks the end pattern
# leaves before the separator are deleted with all other whitespace anyway.
_START_BULK = re.compile(rb"\n[ \t]*(\d+)" + _SEP)
_END_BULK = re.compile(rb"[:|][ \t]*(\d+)[ \t]*(?=\r?$)", re.M)


def strip_labels(data: bytes, labels: str | None) -> bytes:
    """``data`` without its position labels (``data`` must start at a line start
    for start labels)."""
    if labels == "start":
        return _START_BULK.sub(b"\n", b"\n" + data)[1:]
    if labels == "end":
        return _END_BULK.sub(b"", data)
    return data


def split_labels(data: bytes, labels: str) -> tuple[bytes, list[bytes]]:
    """``(data without labels, the label numbers in order)`` in one regex pass."""
    if labels == "start":
        parts = _START_BULK.split(b"\n" + data)
        return b"\n".join(parts[0::2])[1:], parts[1::2]
    parts = _END_BULK.split(data)
    return b"".join(parts[0::2]), parts[1::2]
