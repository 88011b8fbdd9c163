"""Constants with no digit-extraction formula, evaluated in full (e, sqrt(2), Euler's gamma, ...).

python-flint's Arb evaluates the constant to a working precision of ``b``
bits and returns a **ball** ``[m - r, m + r]`` that contains the true value.
The digits of a request are read off ``floor(x * base^N)`` (``N`` = the last
position asked for), taken only when that floor is the same integer at both
ends of the ball (``unique_fmpz``); otherwise the precision grows and the
evaluation repeats.  So every digit returned is certified, and since the floor
of the true value is what a digit file holds, a file truncated inside a run of
9s (or Fs) compares equal: no carry trap.

MPFR (gmpy2) computes the same constants by its own code; :func:`mpfr_value` is
the second, independent reference (``scan --reference mpfr`` and the tests).

Cost: a request at position ``p`` evaluates the constant to about ``4 p`` bits
(hex) or ``3.33 p`` (decimal), unlike digit extraction; the highest-precision
ball of each constant is kept, so later requests at or below it are cheap.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from typing import Any

from spotcheck.errors import CertificationError, UsageError
from spotcheck.formulas import Constant

__all__ = [
    "FULL_NAMES",
    "arb_value",
    "mpfr_value",
    "MAX_FULL_BITS",
    "floor_scaled_arb",
    "certified_digits",
    "full_bits",
    "clear_cache",
    "extract_fields",
    "leading",
]

# --- tuning -----------------------------------------------------------------
GUARD_BITS = 64  # bits beyond the last digit asked for
MAX_FULL_BITS = 1 << 30  # refuse evaluations above this (about 2 GiB of working memory)
# ---------------------------------------------------------------------------


def _arb_table() -> dict[str, Callable[[], Any]]:
    from flint import arb

    return {
        "e": lambda: arb(1).exp(),
        "sqrt2": lambda: arb(2).sqrt(),
        "sqrt3": lambda: arb(3).sqrt(),
        "golden-ratio": lambda: (1 + arb(5).sqrt()) / 2,
        "euler-gamma": arb.const_euler,
        "log10": lambda: arb(10).log(),
        "zeta5": lambda: arb(5).zeta(),
    }


def _mpfr_table() -> dict[str, Callable[[], Any]]:
    import gmpy2

    return {
        "e": lambda: gmpy2.exp(1),
        "sqrt2": lambda: gmpy2.sqrt(2),
        "sqrt3": lambda: gmpy2.sqrt(3),
        "golden-ratio": lambda: (1 + gmpy2.sqrt(5)) / 2,
        "euler-gamma": gmpy2.const_euler,
        "log10": lambda: gmpy2.log(10),
        "zeta5": lambda: gmpy2.zeta(5),
    }


FULL_NAMES = frozenset(("e", "sqrt2", "sqrt3", "golden-ratio", "euler-gamma", "log10", "zeta5"))
"""The constants this module evaluates (their registry entries are in spotcheck/formulas.py)."""


def arb_value(name: str) -> Callable[[], Any]:
    """Arb expression of a full-evaluation constant (call it at the current ``flint.ctx.prec``)."""
    return _arb_table()[name]


def mpfr_value(name: str) -> Callable[[], Any]:
    """MPFR expression of a full-evaluation constant (call it inside a ``gmpy2.context``)."""
    return _mpfr_table()[name]


# name -> (bits, ball): the highest-precision evaluation made so far.
_cache: dict[str, tuple[int, Any]] = {}


def clear_cache() -> None:
    _cache.clear()


def _ball(name: str, bits: int) -> tuple[int, Any]:
    got = _cache.get(name)
    if got is not None and got[0] >= bits:
        return got
    from flint import ctx

    old = ctx.prec
    ctx.prec = bits
    try:
        x = arb_value(name)()
    finally:
        ctx.prec = old
    _cache[name] = (bits, x)
    return bits, x


def radius_log2(name: str) -> float:
    """log2 of the radius of the cached ball of ``name`` (-inf when exact or not evaluated)."""
    got = _cache.get(name)
    if got is None:
        return -math.inf
    man, exp = got[1].rad().mid().man_exp()
    return -math.inf if man == 0 else float(int(exp) + int(man).bit_length())


def full_bits(base: int, n: int) -> int:
    """Working bits for the first ``n`` digits in ``base``."""
    return int(n * math.log2(base)) + GUARD_BITS


def floor_scaled_arb(name: str, base: int, n: int, bits: int) -> int | None:
    """``floor(x * base^n)`` when the ball at ``bits`` bits certifies it, else None."""
    from flint import arb, ctx

    prec, x = _ball(name, bits)
    old = ctx.prec
    ctx.prec = prec + 32
    try:
        y = (x * arb(base) ** n).floor()
        v = y.unique_fmpz()
    finally:
        ctx.prec = old
    return None if v is None else int(v)


def certified_digits(name: str, base: int, position: int, count: int) -> tuple[int, str, int]:
    """``(integer part, digits position..position+count-1, bits used)``, certified by the Arb ball."""
    if name not in FULL_NAMES:
        raise UsageError(f"{name!r} is not a full-evaluation constant")
    if base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base}")
    last = position + count - 1
    bits = full_bits(base, last)
    if bits > MAX_FULL_BITS:
        raise UsageError(
            f"{name} has no digit-extraction formula; digits up to position {last:,} need a full "
            f"evaluation to {bits:,} bits (more than {MAX_FULL_BITS:,}, about {2 * MAX_FULL_BITS / 2**30:.0f} GiB)"
        )
    limit = 2 * bits + 4096
    while True:
        v = floor_scaled_arb(name, base, last, bits)
        if v is not None:
            break
        bits += max(64, bits // 8)
        if bits > limit:  # not reachable for an irrational constant
            raise CertificationError(f"could not certify {count} digits of {name} at position {position}")
    if base == 16:
        whole = v >> (4 * last)
        frac = v & ((1 << (4 * count)) - 1)
        return whole, format(frac, "X").zfill(count), bits
    import gmpy2

    whole = int(gmpy2.mpz(v) // gmpy2.mpz(10) ** last)
    frac = gmpy2.mpz(v) % gmpy2.mpz(10) ** count
    return whole, frac.digits(10).zfill(count), bits


def timed_digits(name: str, base: int, position: int, count: int) -> tuple[int, str, int, float]:
    """:func:`certified_digits` and the seconds it took."""
    t0 = time.perf_counter()
    whole, digits, bits = certified_digits(name, base, position, count)
    return whole, digits, bits, time.perf_counter() - t0


def extract_fields(
    constant: Constant, position: int, count: int, formula: str | None = None
) -> dict[str, Any]:
    """The fields of an :class:`~spotcheck.engine.api.DigitResult` for hex digits of a full-evaluation constant."""
    ev = constant.evaluation
    if ev is None:
        raise UsageError(f"{constant.name} has digit-extraction formulas; use extract")
    key = constant.method_key(formula)
    _, digits, bits, seconds = timed_digits(constant.name, 16, position, count)
    return {
        "constant": constant.name,
        "formula": key,
        "formula_notation": ev.notation(),
        "formula_source": ev.source,
        "position": position,
        "digits": digits,
        "width_log2": round(radius_log2(constant.name), 2),
        "fraction_bits": bits,
        "terms": 0,
        "windows": 1,
        "seconds": seconds,
        "backend": "arb (full evaluation)",
    }


def leading(constant: Constant, base: int, count: int) -> tuple[str, str]:
    """``(integer part, first count digits)`` of a full-evaluation constant, as ``leading_digits`` gives them."""
    whole, digits, _ = certified_digits(constant.name, base, 1, count)
    return (format(whole, "X") if base == 16 else str(whole)), digits
