"""Which constant is this?  Compare a file's leading digits with the engine's.

The engine's :func:`~spotcheck.engine.api.leading_digits` gives certified
leading digits of every known constant in base 10 and 16; they are cached per
(constant, base).  A file is taken to hold a constant when at least
``MIN_MATCH`` of its leading digits agree (or all of them, for a shorter
file) and its integer part, if it has one, agrees too.
"""

from __future__ import annotations

import functools

from spotcheck.engine.api import leading_digits
from spotcheck.errors import UsageError
from spotcheck.formulas import constant_names, get_constant

__all__ = ["guess_constant", "compare_with", "MIN_MATCH", "GUESS_DIGITS", "reference_digits"]

# --- tuning -----------------------------------------------------------------
GUESS_DIGITS = 64  # leading digits compared
MIN_MATCH = 12  # agreeing digits needed to name a constant


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


def compare_with(name: str, base: int, head: str, integer_part: str | None) -> tuple[int, bool]:
    """(leading digits that agree, whether the integer part agrees or is absent)."""
    ip, ref = reference_digits(name, base)
    return _common(head.upper(), ref), integer_part is None or integer_part == ip


def guess_constant(head: str, integer_part: str | None, base: int, count: int) -> tuple[str | None, str, int]:
    """``(name or None, sentence saying how, digits that matched)``."""
    head = head.upper()
    need = min(MIN_MATCH, count, len(head))
    best: tuple[int, str] | None = None
    for name in constant_names():
        try:
            matched, ip_ok = compare_with(name, base, head, integer_part)
        except Exception:  # a user-registered constant the engine cannot evaluate
            continue
        if ip_ok and matched >= max(need, 1) and (best is None or matched > best[0]):
            best = (matched, name)
    if best is None:
        shown = head[:16] + ("..." if len(head) > 16 else "")
        return (
            None,
            (
                f"no known constant starts with the file's leading digits {shown} in base {base}; "
                "name the constant explicitly to check this file"
            ),
            0,
        )
    matched, name = best
    return name, _how(name, head, integer_part, matched, count, "guessed"), matched


def _how(name: str, head: str, integer_part: str | None, matched: int, count: int, verb: str) -> str:
    shown = head[:matched][:16] + ("..." if matched > 16 else "")
    ip = f"integer part {integer_part} and " if integer_part is not None else ""
    if matched == len(head):
        what = (
            f"all {matched} digits of the file"
            if matched == count
            else f"the first {matched} digits after the point"
        )
    else:
        what = f"the first {matched} of its {len(head)} leading digits (digit {matched + 1} differs)"
    return f"{verb} {name}: {ip}{what} ({shown}) match its certified leading digits"


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
