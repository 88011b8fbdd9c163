"""Certified evaluation of ``frac(2^d * C)`` and certified hex digits.

The fractional part is accumulated in fixed point with ``P = 64 * words``
fractional bits, as an integer mod ``2^P``.  Every rounding is a floor, so the
error is one-sided and counted:

* head terms (``k < K``, modular exponentiation): each floored once, so the
  exact head sum lies in ``[H, H + n_head)`` ulps (``ulp = 2^-P``);
* tail terms (``K <= k < K_t``): each ``floor(sigma^k c 2^(P-(ek-D)) / N)``,
  exact sum in ``[T, T + n_tail)``;
* the remainder after ``K_t`` is at most ``R`` ulps in absolute value, with
  ``R = ceil(2 * sum|c_j| * 2^(P - (e K_t - D)) / q)`` (geometric series with
  ratio ``2^-e <= 1/2`` and ``N >= q``).

So the true value lies in ``[H + T - R, H + T + n_head + n_tail + R]`` ulps,
mod ``2^P``.  Digits are *certified* when both ends of that interval share
them; an interval that wraps past 1 shares no first digit.  When too few
digits are certified the window is evaluated again with another 64 bits, and
if that never settles them, :class:`CertificationError` is raised: a digit is
never guessed.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from spotcheck.engine.blocks import BlockRequest, HeadSum, sum_blocks
from spotcheck.engine.plan import RunPlan
from spotcheck.engine.series import Series
from spotcheck.errors import CertificationError

__all__ = [
    "Interval",
    "frac_interval",
    "interval_from",
    "certified_hex_prefix",
    "window_digits",
    "MAX_WORDS",
]

# --- tuning -----------------------------------------------------------------
# Extra bits kept beyond the digits asked for, on top of log2(terms).
GUARD_BITS = 12
# Widest window one evaluation serves (64 * 8 = 512 fractional bits, about
# 115 hex digits); longer requests are served by several windows.
WINDOW_MAX_WORDS = 8
# Give up (CertificationError) beyond this many words for one window.
MAX_WORDS = 64
# (The block size is in plan.py: BLOCK_K.)
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Interval:
    """``[lo, hi] * 2^-bits`` (mod 1) contains ``frac(2^d * C)``."""

    lo: int
    hi: int
    bits: int
    terms: int
    terms_loaded: int = 0
    """Head terms taken from a checkpoint rather than computed (included in ``terms``)."""
    blocks_loaded: int = 0
    blocks_computed: int = 0

    @property
    def width_log2(self) -> float:
        """log2 of the interval's width (e.g. -100.5 for a width of about 2^-100.5)."""
        return math.log2(max(self.hi - self.lo, 1)) - self.bits

    def contains(self, value_fixed: int, value_bits: int) -> bool:
        """Does the interval contain ``value_fixed * 2^-value_bits`` (mod 1)?"""
        shift = value_bits - self.bits
        lo = self.lo % (1 << self.bits)
        hi = lo + (self.hi - self.lo)
        v = value_fixed % (1 << value_bits)
        for wrap in (0, 1):  # the interval may reach past 1
            vv = v + (wrap << value_bits)
            if shift >= 0:
                if (lo << shift) <= vv <= (hi << shift):
                    return True
            elif lo <= (vv << -shift) <= hi:
                return True
        return False


def head_fixed(series: Series, d: int, words: int, plan: RunPlan | None = None) -> HeadSum:
    """The whole head sum at bit offset ``d`` (a :class:`~spotcheck.engine.blocks.HeadSum`).

    ``plan`` says how: block size, runner, journal, progress (default: one
    thread, nothing else).  Every block result is checked before it is added.
    """
    plan = plan or RunPlan.local(series)
    request = BlockRequest(series, d, words, plan.block_size(d))
    return sum_blocks(request, runner=plan.runner, journal=plan.journal, on_block=plan.on_block)


def _sum_from(series: Series, big_d: int, k: int, bits: int) -> tuple[int, int, int]:
    """Exact-rational sum of every term from ``k`` on, in ulps of ``2^-bits``, not reduced.

    Returns ``(value, terms, remainder_bound)``: each term is floored, and the
    terms not summed are at most ``remainder_bound`` ulps in absolute value.
    """
    # Stop once 2^(bits - (e k - D)) * 2 sum|c| / q is below one ulp.
    stop_excess = bits + series.abs_coefficient_sum.bit_length() + 2
    value, terms = 0, 0
    pairs = list(zip(series.js, series.cs))
    while series.e * k - big_d < stop_excess:
        up = bits - (series.e * k - big_d)  # the term is c * 2^up / N ulps
        sign = -1 if (series.alternating and k & 1) else 1
        for j, c in pairs:
            n = series.modulus(k, j)
            value += (sign * c << up) // n if up >= 0 else (sign * c) // (n << -up)
            terms += 1
        k += 1
    up = bits - (series.e * k - big_d)
    num = 2 * series.abs_coefficient_sum  # geometric ratio <= 1/2 and N >= q
    rem = -(-(num << up) // series.q) if up >= 0 else -(-num // (series.q << -up))
    return value, terms, rem


def tail_fixed(series: Series, d: int, bits: int) -> tuple[int, int, int]:
    """Tail sum at bit offset ``d``: ``(value, terms, remainder_bound)`` in ulps of ``2^-bits``."""
    return _sum_from(series, d - series.shift, series.head_length(d), bits)


def value_bounds(series: Series, bits: int) -> tuple[int, int]:
    """``(lo, hi)`` with ``lo <= C * 2^bits <= hi``: the whole constant, integer part included.

    Sums every term as an exact small fraction, so it is only for modest
    ``bits`` (leading digits, integer part, detection).
    """
    value, terms, rem = _sum_from(series, -series.shift, 0, bits)
    return value - rem, value + terms + rem


def frac_interval(series: Series, d: int, words: int, plan: RunPlan | None = None) -> Interval:
    """A certified interval for ``frac(2^d * C)`` with ``64 * words`` fractional bits."""
    if d < 0:
        raise ValueError("bit offset must be >= 0")
    return interval_from(series, d, words, head_fixed(series, d, words, plan))


def interval_from(series: Series, d: int, words: int, head: HeadSum) -> Interval:
    """The certified interval at bit offset ``d`` from a finished head sum and the tail."""
    bits = 64 * words
    tail, n_tail, rem = tail_fixed(series, d, bits)
    base = (head.value + tail) % (1 << bits)
    return Interval(
        lo=base - rem,
        hi=base + head.terms + n_tail + rem,
        bits=bits,
        terms=head.terms + n_tail,
        terms_loaded=head.terms_loaded,
        blocks_loaded=head.blocks_loaded,
        blocks_computed=head.blocks_computed,
    )


def certified_hex_prefix(interval: Interval, limit: int) -> str:
    """The leading hex digits (at most ``limit``) shared by both ends of ``interval``."""
    bits = interval.bits
    lo = interval.lo % (1 << bits)
    hi = lo + (interval.hi - interval.lo)
    n = 0
    for i in range(1, min(limit, bits // 4) + 1):
        if lo >> (bits - 4 * i) == hi >> (bits - 4 * i):
            n = i
        else:
            break
    return format(lo >> (bits - 4 * n), f"0{n}X") if n else ""


def words_for(series: Series, d: int, digits: int) -> int:
    """Fixed-point words that should certify ``digits`` hex digits at offset ``d``."""
    terms = (series.head_length(d) + 64) * len(series.js)
    need = 4 * digits + terms.bit_length() + GUARD_BITS
    return max(2, -(-need // 64))


def window_digits(
    series: Series,
    d: int,
    count: int,
    plan: RunPlan | None = None,
    *,
    words: int | None = None,
) -> tuple[str, Interval]:
    """Exactly ``count`` certified hex digits of ``frac(2^d C)``, from one window.

    Starts at ``words`` 64-bit words (default: enough for ``count`` digits and
    the error bound) and evaluates with one more word until the digits are
    certified.
    """
    words = words or words_for(series, d, count)
    while True:
        interval = frac_interval(series, d, words, plan)
        digits = certified_hex_prefix(interval, count)
        if len(digits) == count:
            return digits, interval
        if words >= MAX_WORDS:
            raise CertificationError(
                f"could not certify {count} digits at bit offset {d} with {64 * words} fractional bits"
            )
        words += 1


def window_capacity(series: Series, d: int) -> int:
    """Hex digits one window of ``WINDOW_MAX_WORDS`` words serves at offset ``d``."""
    terms = (series.head_length(d) + 64) * len(series.js)
    return max(1, (64 * WINDOW_MAX_WORDS - terms.bit_length() - GUARD_BITS) // 4)


def extract_hex(
    series: Series,
    position: int,
    count: int,
    plan: RunPlan | None = None,
) -> tuple[str, list[Interval], float]:
    """Certified hex digits ``position .. position + count - 1``; also the windows' intervals."""
    t0 = time.perf_counter()
    out: list[str] = []
    intervals: list[Interval] = []
    p = position
    remaining = count
    while remaining > 0:
        d = 4 * (p - 1)
        n = min(remaining, window_capacity(series, d))
        digits, interval = window_digits(series, d, n, plan)
        out.append(digits)
        intervals.append(interval)
        p += n
        remaining -= n
    return "".join(out), intervals, time.perf_counter() - t0
