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
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

from spotcheck.engine import backend
from spotcheck.engine.series import Series
from spotcheck.errors import CertificationError

__all__ = [
    "Interval",
    "frac_interval",
    "certified_hex_prefix",
    "window_digits",
    "head_blocks",
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
# Head terms per block handed to the kernel; blocks are the unit for worker
# threads, progress callbacks and (later) checkpoints.
BLOCK_K = 1 << 18
# ---------------------------------------------------------------------------

Progress = Callable[[int, int], None]
"""Called as ``progress(done_k, total_k)`` after each head block."""


@dataclass(frozen=True)
class Interval:
    """``[lo, hi] * 2^-bits`` (mod 1) contains ``frac(2^d * C)``."""

    lo: int
    hi: int
    bits: int
    terms: int

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


def head_blocks(k_total: int, block_k: int = BLOCK_K) -> list[tuple[int, int]]:
    """Split ``range(k_total)`` into consecutive ``(k0, k1)`` blocks."""
    return [(k, min(k + block_k, k_total)) for k in range(0, k_total, block_k)]


def _head_block(series: Series, big_d: int, k0: int, k1: int, words: int) -> tuple[int, int]:
    """One block's head sum, split between the compiled kernel and the twin."""
    limit = backend.kernel_k_limit(series) if big_d <= backend.KERNEL_MAX_EXPONENT else 0
    if words > backend.KERNEL_MAX_WORDS:
        limit = 0
    args = (series.m, series.s, series.e, series.q, series.alternating, series.js, series.cs)
    value, terms = 0, 0
    split = min(max(limit, k0), k1)
    if split > k0:
        v, t = backend.head_sum(big_d, k0, split, *args, words)
        value, terms = v, t
    if k1 > split:
        v, t = backend.head_sum_py(big_d, split, k1, *args, words)
        value, terms = value + v, terms + t
    return value, terms


def head_fixed(
    series: Series,
    d: int,
    words: int,
    *,
    workers: int = 1,
    progress: Progress | None = None,
) -> tuple[int, int]:
    """The whole head sum at bit offset ``d``: ``(value mod 2^P, terms)``."""
    big_d = d - series.shift
    k_total = series.head_length(d)
    blocks = head_blocks(k_total)
    mask = (1 << (64 * words)) - 1
    value, terms, done = 0, 0, 0

    def run(block: tuple[int, int]) -> tuple[int, int]:
        return _head_block(series, big_d, block[0], block[1], words)

    if workers > 1 and len(blocks) > 1:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            results = pool.map(run, blocks)
            for (k0, k1), (v, t) in zip(blocks, results):
                value, terms, done = (value + v) & mask, terms + t, done + (k1 - k0)
                if progress:
                    progress(done, k_total)
    else:
        for block in blocks:
            v, t = run(block)
            value, terms, done = (value + v) & mask, terms + t, done + (block[1] - block[0])
            if progress:
                progress(done, k_total)
    return value, terms


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


def frac_interval(
    series: Series,
    d: int,
    words: int,
    *,
    workers: int = 1,
    progress: Progress | None = None,
) -> Interval:
    """A certified interval for ``frac(2^d * C)`` with ``64 * words`` fractional bits."""
    if d < 0:
        raise ValueError("bit offset must be >= 0")
    bits = 64 * words
    head, n_head = head_fixed(series, d, words, workers=workers, progress=progress)
    tail, n_tail, rem = tail_fixed(series, d, bits)
    base = (head + tail) % (1 << bits)
    return Interval(lo=base - rem, hi=base + n_head + n_tail + rem, bits=bits, terms=n_head + n_tail)


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
    *,
    workers: int = 1,
    progress: Progress | None = None,
    words: int | None = None,
) -> tuple[str, Interval]:
    """Exactly ``count`` certified hex digits of ``frac(2^d C)``, from one window.

    Starts at ``words`` 64-bit words (default: enough for ``count`` digits and
    the error bound) and evaluates with one more word until the digits are
    certified.
    """
    words = words or words_for(series, d, count)
    while True:
        interval = frac_interval(series, d, words, workers=workers, progress=progress)
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
    *,
    workers: int = 1,
    progress: Progress | None = None,
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
        digits, interval = window_digits(series, d, n, workers=workers, progress=progress)
        out.append(digits)
        intervals.append(interval)
        p += n
        remaining -= n
    return "".join(out), intervals, time.perf_counter() - t0
