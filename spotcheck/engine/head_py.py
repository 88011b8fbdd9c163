"""The head sum in pure Python with gmpy2: the reference twin of the C kernel.

It has no limit on position, modulus or precision, and is the fallback when
the compiled kernel is not built or a modulus is beyond the kernel's range.
"""

from __future__ import annotations

from collections.abc import Sequence

try:  # gmpy2 is a hard dependency, but keep the twin usable without it.
    from gmpy2 import mpz as _mpz
    from gmpy2 import powmod as _powmod
except ImportError:  # pragma: no cover - exercised only without gmpy2
    _mpz = int  # type: ignore[assignment,misc]
    _powmod = pow  # type: ignore[assignment]

__all__ = ["head_sum_py"]


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
    total = _mpz(0)
    pairs = list(zip(js, cs, strict=True))
    for k in range(k0, k1):
        exponent = big_d - e * k
        negate = alternating and (k & 1)
        mk = m * k
        for j, c in pairs:
            n = q * _mpz(mk + j) ** s
            r = _powmod(2, exponent, n) * (-c if negate else c) % n
            total += (r << bits) // n
    return int(total & mask), (k1 - k0) * len(pairs)
