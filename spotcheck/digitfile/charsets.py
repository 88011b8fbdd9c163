"""Byte sets and translation tables shared by detection, the passes and reading.

No layout rule lives here: labels and separators are syntax.py's, headers detect.py's.
"""

from __future__ import annotations

__all__ = [
    "DEC",
    "HEX",
    "HEX_LETTERS",
    "WS",
    "digit_set",
    "allowed_set",
    "class_table",
    "norm_table",
]

DEC = b"0123456789"
HEX = b"0123456789ABCDEFabcdef"
HEX_LETTERS = b"ABCDEFabcdef"
WS = b" \t\r\n"
"""Whitespace allowed between digits: spaces and tabs group, CR/LF end lines."""


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


def norm_table(base: int) -> bytes:
    """A 256-byte table: each digit of ``base`` -> its upper-case form (other bytes unchanged)."""
    table = bytearray(range(256))
    if base == 16:
        for c in b"abcdef":
            table[c] = c - 32
    return bytes(table)
