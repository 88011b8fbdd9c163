"""Which constant is this?  Compare a file's leading digits with the engine's.

Every constant of the registry (:func:`spotcheck.formulas.all_constants`) is
scored by how many of the file's first ``GUESS_DIGITS`` digits agree with its
certified leading digits (:func:`~spotcheck.engine.api.leading_digits`, cached
per constant and base), position by position, not only the common prefix; a
constant whose leading digits cannot be had is skipped.  A constant is named
when its integer part (if the file has one) agrees and either

* the first ``MIN_MATCH`` digits agree, or a shorter file agrees in full and
  the chance of that, ``base ** -(digits + integer digits)`` times the
  constants tried, is at most ``SHORT_CHANCE`` (one digit, ``0`` or ``2``,
  agrees with some constant by chance and names none), or
* the agreement cannot be chance: the binomial chance of as many agreeing
  digits, times the number of constants tried, is below ``MAX_CHANCE``
  (so a file whose first digit is damaged is still recognised).

Before a file's digits are said to differ from a constant's from position 1,
:func:`shifted_reading` asks whether dropping a few leading digits (an integer
part written without a point, a label column read as digits) makes them agree
beyond chance; the reader then refuses the file as ambiguous, naming both readings.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

from spotcheck.engine.api import leading_digits
from spotcheck.errors import UsageError
from spotcheck.formulas import all_constants, get_constant

__all__ = [
    "guess_constant",
    "match_constant",
    "ConstantMatch",
    "compare_with",
    "MIN_MATCH",
    "GUESS_DIGITS",
    "reference_digits",
    "ShiftedReading",
    "shifted_reading",
]

# --- tuning -----------------------------------------------------------------
GUESS_DIGITS = 64  # leading digits compared
MIN_MATCH = 12  # a common prefix this long names a constant
MAX_CHANCE = 1e-12  # largest chance of a coincidental agreement that still names a constant
SHORT_CHANCE = 1e-6  # largest chance of a short file agreeing in full that still names a constant
MAX_SHIFT = 8  # leading digits a shifted reading may drop (an integer part, a short label)
WORD_BYTES = (2, 4, 8)  # word sizes a dump may print in machine (little-endian) order
SHIFT_SHARE = 0.9  # and it agrees on this share of the digits examined
SHIFT_CHANCE = 1e-4  # a reading this likely or less by chance is one the file may mean


@dataclass(frozen=True)
class ConstantMatch:
    """The facts behind naming (or not naming) the constant of a file."""

    name: str | None
    agreed: int
    """Leading digits (after the point) that agree with the constant's."""
    examined: int
    """Leading digits compared."""
    prefix: int
    """Leading digits that agree before the first that differs."""
    how: str


@functools.lru_cache(maxsize=256)
def reference_digits(name: str, base: int) -> tuple[str, str]:
    """Certified ``(integer_part, first GUESS_DIGITS digits)`` of ``name`` in ``base``."""
    return leading_digits(name, base, GUESS_DIGITS)


def _common(a: str, b: str) -> int:
    n = 0
    for x, y in zip(a, b, strict=False):
        if x != y:
            break
        n += 1
    return n


def _agreed(a: str, b: str) -> int:
    return sum(x == y for x, y in zip(a, b, strict=False))


def chance(agreed: int, examined: int, base: int) -> float:
    """Probability that ``agreed`` or more of ``examined`` random base-``base`` digits agree."""
    p = 1.0 / base
    return sum(math.comb(examined, k) * p**k * (1 - p) ** (examined - k) for k in range(agreed, examined + 1))


def compare_with(name: str, base: int, head: str, integer_part: str | None) -> tuple[int, bool]:
    """(leading digits that agree as a prefix, whether the integer part agrees or is absent)."""
    ip, ref = reference_digits(name, base)
    return _common(head.upper(), ref), integer_part is None or integer_part == ip


def match_constant(head: str, integer_part: str | None, base: int, count: int) -> ConstantMatch:
    """Score every known constant against the file's leading digits; name one only beyond chance."""
    head = head.upper()[:GUESS_DIGITS]
    need = MIN_MATCH
    tried = 0
    best: tuple[int, int, str] | None = None
    for const in all_constants():
        try:
            ip, ref = reference_digits(const.name, base)
        except Exception:  # a constant whose leading digits the engine cannot give: skip it
            continue
        tried += 1
        if integer_part is not None and integer_part != ip:
            continue
        agreed, prefix = _agreed(head, ref), _common(head, ref)
        if best is None or (agreed, prefix) > best[:2]:
            best = (agreed, prefix, const.name)
    if best is not None:
        agreed, prefix, name = best
        evidence = prefix + (len(integer_part) if integer_part is not None else 0)
        short = prefix == len(head) == count and float(base) ** -evidence * max(1, tried) <= SHORT_CHANCE
        named = prefix >= need or short or chance(agreed, len(head), base) * max(1, tried) <= MAX_CHANCE
        if named:
            ipn = f"; integer part {integer_part} agrees" if integer_part is not None else ""
            if agreed == len(head) == count:
                how = f"guessed {name}: all {agreed} digits agree{ipn}"
            else:
                how = f"guessed {name}: {agreed} of the first {len(head)} digits agree{ipn}"
            return ConstantMatch(name, agreed, len(head), prefix, how)
    shown = head[:16] + ("..." if len(head) > 16 else "")
    how = (
        f"no known constant agrees beyond chance with the file's leading digits {shown} in base {base}; "
        "name the constant explicitly to check this file"
    )
    return ConstantMatch(None, best[0] if best else 0, len(head), best[1] if best else 0, how)


def guess_constant(head: str, integer_part: str | None, base: int, count: int) -> tuple[str | None, str, int]:
    """``(name or None, sentence saying how, digits that agreed)``."""
    m = match_constant(head, integer_part, base, count)
    return m.name, m.how, m.agreed if m.name else 0


def explicit_constant(
    name: str, head: str, integer_part: str | None, base: int, count: int
) -> tuple[str, str, int, bool]:
    """``(canonical name, how, matched digits, agrees)`` for a constant the caller named."""
    try:
        canonical = get_constant(name).name
    except UsageError:
        raise
    matched, ip_ok = compare_with(canonical, base, head, integer_part)
    need = min(MIN_MATCH, count, len(head))
    agrees = ip_ok and matched >= need
    how = f"given explicitly ({canonical})"
    return canonical, how, matched, agrees


@dataclass(frozen=True)
class ShiftedReading:
    """The file's digits agree with ``name``'s once its first ``dropped`` digits are set aside."""

    name: str
    dropped: str
    agreed: int
    """Digits after the dropped ones that agree with the constant's, position by position."""
    examined: int
    integer_part: bool
    """The dropped digits are the constant's integer part (written without a point)."""
    word: int = 0
    """Bytes a word, when the digits agree once each word's bytes are reversed (a dump that
    prints words in machine order); then nothing is dropped."""


def shifted_reading(
    head: str, integer_part: str | None, base: int, names: list[str]
) -> ShiftedReading | None:
    """A reading that drops up to ``MAX_SHIFT`` leading digits and then agrees with one of ``names``
    beyond chance, where the file's digits as read do not; None when there is none.

    >>> shifted_reading("31415926535897932384", None, 10, ["pi"]).integer_part
    True
    >>> shifted_reading("14159265358979323846", None, 10, ["pi"]) is None
    True
    """
    head = head.upper()[:GUESS_DIGITS]
    tries = max(1, len(names)) * (MAX_SHIFT + len(WORD_BYTES))
    best: tuple[float, ShiftedReading] | None = None
    for name in names:
        try:
            ip, ref = reference_digits(name, base)
        except Exception:  # a constant whose leading digits the engine cannot give: skip it
            continue
        if integer_part is not None and integer_part != ip:
            continue
        if chance(_agreed(head, ref), len(head), base) <= SHIFT_CHANCE:
            continue  # the digits as read explain the file: a damaged digit is damage
        found: list[tuple[float, ShiftedReading]] = []
        for k in range(1, min(MAX_SHIFT, len(head) - 1) + 1):
            rest = head[k:]
            agreed = _agreed(rest, ref)
            p = chance(agreed, len(rest), base)
            found.append((p, ShiftedReading(name, head[:k], agreed, len(rest), head[:k] == ip.upper())))
        for word in WORD_BYTES if base == 16 else ():
            swapped = _machine_order(head, word)
            if len(swapped) >= 2 * word:
                agreed = _agreed(swapped, ref)
                p = chance(agreed, len(swapped), base)
                found.append((p, ShiftedReading(name, "", agreed, len(swapped), False, word)))
        for p, reading in found:
            # A reading the file means agrees all but for damage (a swapped reading of a file that
            # lost one byte agrees on every other byte: beyond chance, yet not what it means).
            nearly = reading.agreed >= SHIFT_SHARE * reading.examined
            if nearly and p * tries <= SHIFT_CHANCE and (best is None or p < best[0]):
                best = (p, reading)
    return best[1] if best else None


def _machine_order(head: str, word: int) -> str:
    """``head`` (hex digits) with the bytes of each ``word``-byte word reversed; a partial word dropped."""
    n = 2 * word
    out = []
    for i in range(0, len(head) - n + 1, n):
        w = head[i : i + n]
        out.append("".join(w[j : j + 2] for j in range(n - 2, -1, -2)))
    return "".join(out)
