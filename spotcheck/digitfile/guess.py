"""Which constant is this?  Compare a file's leading digits with the engine's.

Every constant of the registry (:func:`spotcheck.formulas.all_constants`) is
scored by how many of the file's first ``GUESS_DIGITS`` digits agree with its
certified leading digits (:func:`~spotcheck.engine.api.leading_digits`, cached
per constant and base), position by position, not only the common prefix; a
constant whose leading digits cannot be had is skipped.  A constant is named
when its integer part (if the file has one) agrees and either

* the first ``min(MIN_MATCH, count)`` digits agree (a short file agrees in full), or
* the agreement cannot be chance: the binomial chance of as many agreeing
  digits, times the number of constants tried, is below ``MAX_CHANCE``
  (so a file whose first digit is damaged is still recognised).
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
]

# --- tuning -----------------------------------------------------------------
GUESS_DIGITS = 64  # leading digits compared
MIN_MATCH = 12  # a common prefix this long names a constant
MAX_CHANCE = 1e-12  # largest chance of a coincidental agreement that still names a constant


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
    need = max(1, min(MIN_MATCH, count, len(head)))
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
        named = prefix >= need or chance(agreed, len(head), base) * max(1, tried) <= MAX_CHANCE
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
