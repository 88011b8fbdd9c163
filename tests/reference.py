"""Full-precision reference values from general-purpose libraries (not from spotcheck).

gmpy2/MPFR ``const_pi`` is correctly rounded at the working precision; 128
guard bits make a wrong truncated digit impossible in practice (it would need
a run of 32 identical hex digits right after the last one kept).
"""

from __future__ import annotations

from functools import lru_cache

import gmpy2

GUARD_BITS = 128


@lru_cache(maxsize=8)
def pi_fraction_fixed(bits: int) -> int:
    """floor(frac(pi) * 2^bits), from gmpy2/MPFR const_pi."""
    with gmpy2.context(precision=bits + GUARD_BITS + 8):
        x = gmpy2.const_pi()
        v = int(gmpy2.floor(x * gmpy2.mpz(2) ** bits))
    return v - (3 << bits)


@lru_cache(maxsize=8)
def pi_hex(n: int) -> str:
    """The first ``n`` hex digits of pi after the point (gmpy2/MPFR)."""
    return format(pi_fraction_fixed(4 * n), "X").zfill(n)


@lru_cache(maxsize=4)
def pi_decimal(n: int) -> str:
    """The first ``n`` decimal digits of pi after the point (gmpy2/MPFR)."""
    bits = int(n * 3.33) + GUARD_BITS
    with gmpy2.context(precision=bits + 8):
        v = gmpy2.mpz(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpz(10) ** n))
    return v.digits(10)[1:]
