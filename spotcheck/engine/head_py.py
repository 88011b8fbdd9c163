"""The head sum in pure Python with gmpy2: the reference twin of the C kernel.

It has no limit on position, modulus or precision, and is the fallback when
the compiled kernel is not built or a modulus is beyond the kernel's range.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import cache
from typing import Any

__all__ = ["head_sum_py"]


@cache
def _arithmetic() -> tuple[Any, Any]:
    """``(mpz, powmod)`` of gmpy2, imported on the twin's first use (it costs a command's
    start-up 20-40 ms, and the compiled kernel does not need it); ints without gmpy2."""
    try:  # gmpy2 is a hard dependency, but keep the twin usable without it.
        from gmpy2 import mpz, powmod
    except ImportError:  # pragma: no cover - exercised only without gmpy2
        return int, pow
    return mpz, powmod


def head_sum_py(
    big_d: int,
    k0: int,
    k1: int,
    m: int,
    s: int,
    e: int,
    q: int,
    alternating: bool,
    js: Sequence[int],
    cs: Sequence[int],
    words: int,
) -> tuple[int, int]:
    """Fixed-point head sum over ``k0 <= k < k1``; return ``(value, terms)``.

    ``value`` is ``sum floor(2^P * frac(sigma^k c_j 2^(D - e k) / N_kj)) mod 2^P``
    with ``P = 64 * words`` and ``N_kj = q (m k + j)^s``.  Each term is rounded
    down, so the exact sum (mod 2^P, in units of 2^-P) lies in
    ``[value, value + terms)``.  Requires ``D - e*k >= 0`` for every k in range.
    """
    if k1 <= k0:
        return 0, 0
    if big_d - e * (k1 - 1) < 0:
        raise ValueError("head range reaches a negative exponent")
    bits = 64 * words
    mask = (1 << bits) - 1
    mpz, powmod = _arithmetic()
    total = mpz(0)
    pairs = list(zip(js, cs, strict=True))
    for k in range(k0, k1):
        exponent = big_d - e * k
        negate = alternating and (k & 1)
        mk = m * k
        for j, c in pairs:
            n = q * mpz(mk + j) ** s
            r = powmod(2, exponent, n) * (-c if negate else c) % n
            total += (r << bits) // n
    return int(total & mask), (k1 - k0) * len(pairs)
