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
    "TO_UPPER",
]

DEC = b"0123456789"
HEX = b"0123456789ABCDEFabcdef"
HEX_LETTERS = b"ABCDEFabcdef"
WS = b" \t\r\n"
"""Whitespace allowed between digits: spaces and tabs group, CR/LF end lines."""

TO_UPPER = bytes.maketrans(b"abcdef", b"ABCDEF")

# A label is a decimal number set off from the digits by ':' or '|'.
_SEP = rb"[ \t]*[:|][ \t]*"
LABEL_START = re.compile(rb"^[ \t]*\d+" + _SEP, re.M)
LABEL_END = re.compile(_SEP + rb"\d+[ \t]*(?=\r?$)", re.M)


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


def strip_labels(data: bytes, labels: str | None) -> bytes:
    """``data`` without its position labels (``data`` must start at a line start
    for start labels)."""
    if labels == "start":
        return LABEL_START.sub(b"", data)
    if labels == "end":
        return LABEL_END.sub(b"", data)
    return data
