"""The head sum in pure Python with gmpy2: the reference twin of the C kernel.

It has no limit on position, modulus or precision, and is the fallback when
the compiled kernel is not built or a modulus is beyond the kernel's range.

A *comb* is a set of windows at exponents ``D_i = D_0 + i * step`` (bit
offsets ``4 g`` apart for hex positions ``n_0 + i g``); :func:`head_sum_comb_py`
sums all their heads in one pass over the terms.  A term's modulus ``N`` does
not depend on the window, and its exponent in window ``i + 1`` is ``step``
more than in window ``i``, so

    c 2^(D_(i+1) - e k) mod N = (c 2^(D_i - e k) mod N) * (2^step mod N) mod N:

one ladder for the first window whose head holds the term, one for
``2^step mod N``, then one modular product per further window.  The residues
are exact, so every window's terms are floored exactly as
:func:`head_sum_py` floors them for that window alone: the comb shares only
arithmetic, and each window's ``(value, terms)`` is bit for bit the single
window's over the block's ``k`` range clipped to that window's head.
"""

from __future__ import annotations

from bisect import bisect_right
from collections.abc import Sequence
from functools import cache
from typing import Any

__all__ = ["comb_heads", "head_sum_comb_py", "head_sum_py"]


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


def comb_heads(big_d0: int, step: int, count: int, k0: int, k1: int, e: int) -> list[int]:
    """For each window of a comb, the end of its part of ``k0 <= k < k1``.

    Window ``i`` (exponent ``D_i = big_d0 + i * step``) takes the ``k`` of the
    block that lie in its head, ``D_i - e k >= 0``: ``k0 <= k < end_i`` (none
    when ``end_i <= k0``).  The ends never decrease with ``i``.
    """
    ends = []
    for i in range(count):
        big_d = big_d0 + i * step
        if big_d < 0:
            ends.append(k0)
        else:
            ends.append(k1 if e == 0 else max(k0, min(k1, big_d // e + 1)))
    return ends


def head_sum_comb_py(
    big_d0: int,
    step: int,
    count: int,
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
) -> list[tuple[int, int]]:
    """The head sums of a comb of ``count`` windows at ``D_i = big_d0 + i * step``, in one pass.

    Entry ``i`` is ``head_sum_py(D_i, k0, end_i, ...)`` with ``end_i`` the end
    of window ``i``'s head within ``[k0, k1)`` (:func:`comb_heads`), bit for
    bit: ``(value mod 2^P, terms)``, the exact head sum of the window over
    those ``k`` lying in ``[value, value + terms)`` ulps.  ``step >= 0``;
    ``big_d0`` may be negative (windows whose ``D_i < 0`` have no head terms).
    """
    if count < 1:
        raise ValueError("a comb has at least one window")
    if step < 0:
        raise ValueError("the comb's step must be >= 0")
    ends = comb_heads(big_d0, step, count, k0, k1, e)
    pairs = list(zip(js, cs, strict=True))
    bits = 64 * words
    mask = (1 << bits) - 1
    mpz, powmod = _arithmetic()
    totals = [mpz(0)] * count
    for k in range(k0, ends[-1]):
        first = bisect_right(ends, k)  # the first window whose head holds k
        exponent = big_d0 + first * step - e * k
        negate = alternating and (k & 1)
        mk = m * k
        for j, c in pairs:
            n = q * mpz(mk + j) ** s
            factor = powmod(2, step, n)
            r = powmod(2, exponent, n) * (-c if negate else c) % n
            for i in range(first, count):
                totals[i] += (r << bits) // n
                r = r * factor % n
    return [(int(t & mask), (end - k0) * len(pairs)) for t, end in zip(totals, ends, strict=True)]
