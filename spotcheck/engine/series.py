"""A formula turned into the integers the head-sum kernels work on.

For a formula ``C = scale * P(s, b, m, A)`` with ``b = sigma * 2^e`` and
``scale = 2^-shift * num / q`` (``num``, ``q`` odd), the fractional part of
``2^d * C`` is

    frac( sum_{k>=0} sum_j  sigma^k * c_j * 2^(D - e*k) / N_kj )

with ``D = d - shift``, ``c_j = num * a_j`` and ``N_kj = q * (m*k + j)^s``.
Terms with ``D - e*k >= 0`` form the *head* (modular exponentiation), the
rest the *tail* (small exact fractions).  Folding the odd part ``q`` of the
scale's denominator into the moduli keeps every step an integer operation.
"""

from __future__ import annotations

from dataclasses import dataclass

from spotcheck.formulas import Formula

__all__ = ["Series", "series_of"]


@dataclass(frozen=True)
class Series:
    """The integer data of one formula, ready for the kernels."""

    m: int
    s: int
    e: int
    q: int
    """Odd part of the scale's denominator, folded into every modulus."""
    shift: int
    """Net power of two taken out of the scale: ``D = d - shift``."""
    alternating: bool
    js: tuple[int, ...]
    """Offsets j (1..m) of the non-zero coefficients."""
    cs: tuple[int, ...]
    """Signed numerators ``c_j = num * a_j`` for those offsets."""

    def head_length(self, d: int) -> int:
        """Number of k values in the head for bit offset ``d`` (``D - e*k >= 0``)."""
        big_d = d - self.shift
        return big_d // self.e + 1 if big_d >= 0 else 0

    def modulus(self, k: int, j: int) -> int:
        return self.q * (self.m * k + j) ** self.s

    @property
    def abs_coefficient_sum(self) -> int:
        return sum(abs(c) for c in self.cs)


def _split_two(n: int) -> tuple[int, int]:
    """``n = 2^v * odd``: return ``(v, odd)`` (sign kept on ``odd``)."""
    v = (abs(n) & -abs(n)).bit_length() - 1
    return v, n >> v


def series_of(formula: Formula) -> Series:
    num_v, num_odd = _split_two(formula.scale.numerator)
    den_v, q = _split_two(formula.scale.denominator)
    pairs = [(j + 1, num_odd * a) for j, a in enumerate(formula.coefficients) if a]
    return Series(
        m=formula.m,
        s=formula.s,
        e=formula.e,
        q=q,
        shift=den_v - num_v,
        alternating=formula.alternating,
        js=tuple(j for j, _ in pairs),
        cs=tuple(c for _, c in pairs),
    )
