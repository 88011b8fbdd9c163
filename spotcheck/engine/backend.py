"""The one place that decides which head-sum kernel runs.

``head_sum`` is the compiled kernel (``spotcheck.engine._kernel``) when it was
built and ``SPOTCHECK_PURE`` is not set to a true value, else the pure
Python/gmpy2 twin.  The kernel runs the fastest path the CPU offers, or the
one ``SPOTCHECK_KERNEL`` names (``portable`` is the baseline); a name that is
unknown or not offered makes every head sum raise ``UsageError`` (the CLI
prints one error line and exits 2) instead of silently running another.
``BACKEND`` records the choice ("c" or "python") and ``BACKEND_NOTE`` says why
and names the path in use and the paths offered, for ``spotcheck --version``
and the pytest header.

The compiled kernel only accepts machine-sized arguments.  Its limits are
read from the extension itself (``MAX_MODULUS``, ``MAX_EXPONENT``,
``MAX_COEFFICIENT``, ``MAX_WORDS``), and :func:`kernel_split` is the one place
that decides which terms of a head sum go to the kernel and which to the twin
(:func:`head_block` sums a block that way; :func:`head_block_comb` sums one
block for a comb of windows, cutting the comb at the kernel's ``MAX_COMB``).

It also chooses for the digit-file layer's loops (:func:`digitfile_loops`): the
compiled extension ``spotcheck.digitfile._index`` when it was built (and has
every loop) and ``SPOTCHECK_PURE`` is not set, else their Python twins; the same
rule as for the kernel, asked once.  The extension is a C module without Python
imports of its own; it is imported by name at the first call (from
``digitfile.loops`` as it loads, or for ``--version``), never when this module
loads, so the engine does not depend on the layer above it.
"""

from __future__ import annotations

import functools
import importlib
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from spotcheck.engine.head_py import head_sum_comb_py, head_sum_py
from spotcheck.engine.series import Series

__all__ = [
    "BACKEND",
    "BACKEND_NOTE",
    "DigitfileLoops",
    "digitfile_loops",
    "pure_requested",
    "KERNEL_MAX_MODULUS",
    "KERNEL_MAX_EXPONENT",
    "KERNEL_MAX_COEFFICIENT",
    "KERNEL_MAX_WORDS",
    "KERNEL_MAX_COMB",
    "KERNEL_MAX_COMB_STEP",
    "Split",
    "head_block",
    "head_block_comb",
    "head_sum",
    "head_sum_comb",
    "head_sum_py",
    "kernel_k_limit",
    "kernel_split",
]

HeadSum = Callable[
    [int, int, int, int, int, int, int, bool, Sequence[int], Sequence[int], int], tuple[int, int]
]

# How much slower the pure-Python head sum is per term than the compiled kernel's
# fastest path; the one figure the CLI and the README quote.  Measured 2026-12-05
# (AMD EPYC, 2 vCPUs, avx2 fma bmi2 adx, no avx512, load 2.5; pi BBP, 128 bits,
# benchmarks/kernel.py's ns_per_term): 946-990 ns against 6.04-6.47 ns at
# position 10^7 (146-164x in three runs), 988-1022 ns against 8.25 ns at 10^9
# (120-124x); past the kernel's limit (2 * 10^18) 1,151 ns against 9.5 ns for
# the avx2 path at 10^11 (121x).
PURE_SLOWDOWN = 150

_PURE_ENV = "SPOTCHECK_PURE"
_KERNEL_ENV = "SPOTCHECK_KERNEL"  # forces one path of the compiled kernel (_kernel.paths())

HeadSumComb = Callable[
    [int, int, int, int, int, int, int, int, int, bool, Sequence[int], Sequence[int], int],
    list[tuple[int, int]],
]

head_sum: HeadSum
_kernel_head_sum: HeadSum | None = None
head_sum_comb: HeadSumComb
_kernel_head_sum_comb: HeadSumComb | None = None


def pure_requested() -> bool:
    """True when ``SPOTCHECK_PURE`` asks for the Python twins of every compiled loop."""
    return os.environ.get(_PURE_ENV, "").strip().lower() in ("1", "true", "yes", "on")


if pure_requested():
    BACKEND = "python"
    _PURE_WHY = f"{_PURE_ENV} is set"
    BACKEND_NOTE = f"pure-Python path ({_PURE_WHY})"
else:
    try:
        from spotcheck.engine import _kernel  # type: ignore[attr-defined]
        from spotcheck.engine._kernel import head_sum as _kernel_head_sum  # type: ignore[import-not-found,no-redef]
        from spotcheck.engine._kernel import head_sum_comb as _kernel_head_sum_comb  # type: ignore[import-not-found,no-redef]
    except ImportError as exc:  # the extension was not built
        BACKEND = "python"
        _PURE_WHY = f"compiled kernel not available: {exc}"
        BACKEND_NOTE = f"pure-Python path ({_PURE_WHY})"
    else:
        BACKEND = "c"
        _offered = ", ".join(_kernel.paths())
        _forced = os.environ.get(_KERNEL_ENV, "").strip()
        try:
            if _forced:
                _kernel.select_path(_forced)
        except (ValueError, TypeError) as exc:
            # An unknown or unavailable path is refused, never replaced by another:
            # every head sum raises UsageError, so the CLI exits 2 with one error line.
            _problem = f"{_KERNEL_ENV}={_forced}: {exc} (this CPU offers: {_offered})"

            def _kernel_head_sum(*args: object, _why: str = _problem) -> tuple[int, int]:  # type: ignore[misc]
                from spotcheck.errors import UsageError

                raise UsageError(_why)

            _kernel_head_sum_comb = _kernel_head_sum  # type: ignore[assignment]

            BACKEND_NOTE = f"compiled C kernel refused: {_problem}"
        else:
            _why_path = f"{_KERNEL_ENV} is set" if _forced else "the fastest this CPU offers"
            BACKEND_NOTE = (
                f"compiled C kernel, path {_kernel.active_path()} ({_why_path}; this CPU offers: {_offered}; "
                f"{_kernel.ARITHMETIC} arithmetic)"
            )

head_sum = _kernel_head_sum if _kernel_head_sum is not None else head_sum_py
head_sum_comb = _kernel_head_sum_comb if _kernel_head_sum_comb is not None else head_sum_comb_py


# The compiled kernel's limits, as the extension states them (0 when it was
# not built: then nothing goes to it).  Every modulus N < MAX_MODULUS,
# exponent D - e k <= MAX_EXPONENT, |c_j| < MAX_COEFFICIENT, words <= MAX_WORDS.
try:
    from spotcheck.engine import _kernel as _extension  # type: ignore[attr-defined]
except ImportError:
    _extension = None
KERNEL_MAX_MODULUS: int = int(getattr(_extension, "MAX_MODULUS", 0))
KERNEL_MAX_EXPONENT: int = int(getattr(_extension, "MAX_EXPONENT", 0))
KERNEL_MAX_COEFFICIENT: int = int(getattr(_extension, "MAX_COEFFICIENT", 0))
KERNEL_MAX_WORDS: int = int(getattr(_extension, "MAX_WORDS", 0))
# Windows of one call of the kernel's comb entry (longer combs are cut), and
# the largest step D_(i+1) - D_i it takes (a longer step goes to the twin).
KERNEL_MAX_COMB: int = int(getattr(_extension, "MAX_COMB", 0))
KERNEL_MAX_COMB_STEP: int = int(getattr(_extension, "MAX_COMB_STEP", 0))


@functools.lru_cache(maxsize=256)
def kernel_k_limit(series: Series) -> int:
    """First k at which the compiled kernel can no longer take the series (0 if never)."""
    if _kernel_head_sum is None or BACKEND != "c" or KERNEL_MAX_MODULUS == 0:
        return 0
    if any(abs(c) >= KERNEL_MAX_COEFFICIENT for c in series.cs):
        return 0
    # Largest k with q * (m k + j_max)^s < MAX_MODULUS.
    j_max = max(series.js)
    lo, hi = 0, 1
    while series.q * (series.m * hi + j_max) ** series.s < KERNEL_MAX_MODULUS:
        hi *= 2
    while lo < hi:  # first k whose modulus is too big
        mid = (lo + hi) // 2
        if series.q * (series.m * mid + j_max) ** series.s < KERNEL_MAX_MODULUS:
            lo = mid + 1
        else:
            hi = mid
    return lo


@dataclass(frozen=True)
class Split:
    """Which head terms of one sum go to the compiled kernel: those with ``k < k_split``."""

    k_split: int
    """Terms with ``k < k_split`` run on the kernel, the rest on the twin."""
    reason: str
    """Why the twin takes any terms ("" when it takes none)."""


def kernel_split(series: Series, big_d: int, words: int, k_total: int | None = None) -> Split:
    """The kernel/twin split of a head sum at exponent ``big_d`` with ``words`` words.

    ``k_total`` (default: the whole head) only serves the wording of the
    reason; the split itself depends on the series, ``big_d`` and ``words``.
    """
    head = big_d // series.e + 1 if big_d >= 0 else 0
    total = head if k_total is None else k_total
    if BACKEND != "c" or _kernel_head_sum is None:
        why = _PURE_WHY if BACKEND != "c" else BACKEND_NOTE
        return Split(0, f"the compiled kernel is not in use ({why})")
    if words > KERNEL_MAX_WORDS:
        return Split(
            0, f"{64 * words} bits of precision exceed the compiled kernel's {64 * KERNEL_MAX_WORDS}"
        )
    if big_d > KERNEL_MAX_EXPONENT:
        return Split(0, "the position is beyond the reach of the compiled kernel's 64-bit arithmetic")
    if any(abs(c) >= KERNEL_MAX_COEFFICIENT for c in series.cs):
        return Split(0, "a coefficient of the formula exceeds the compiled kernel's 62-bit limit")
    limit = kernel_k_limit(series)
    if limit >= total:
        return Split(limit, "")
    bits = KERNEL_MAX_MODULUS.bit_length() - 1
    return Split(
        limit,
        f"from term k = {limit:,} on, the moduli q (m k + j)^s reach 2^{bits}, the compiled kernel's limit",
    )


def head_block(series: Series, big_d: int, k0: int, k1: int, words: int) -> tuple[int, int]:
    """The head sum over ``k0 <= k < k1``, split between the compiled kernel and the twin."""
    split = min(max(kernel_split(series, big_d, words).k_split, k0), k1)
    args = (series.m, series.s, series.e, series.q, series.alternating, series.js, series.cs)
    value, terms = 0, 0
    if split > k0:
        value, terms = head_sum(big_d, k0, split, *args, words)
    if k1 > split:
        v, t = head_sum_py(big_d, split, k1, *args, words)
        value, terms = (value + v) & ((1 << (64 * words)) - 1), terms + t
    return value, terms


_DIGITFILE_EXTENSION = "spotcheck.digitfile._index"
_DIGITFILE_LOOPS = ("first_mismatch", "extract", "extract_labelled")


@dataclass(frozen=True)
class DigitfileLoops:
    """The choice for the digit-file passes' inner loops."""

    module: object | None
    """The compiled extension, or None: the Python twins serve."""
    backend: str
    """``"c"`` or ``"python"``."""
    note: str
    """Why, for ``spotcheck --version`` and the pytest header."""


@functools.cache
def digitfile_loops() -> DigitfileLoops:
    """The choice for the digit-file loops: the compiled extension when it was built and
    ``SPOTCHECK_PURE`` is not set, else the Python twins (``module`` None).

    An extension without one of the loops (built from an older source) is not used either.
    """
    if pure_requested():
        return DigitfileLoops(None, "python", f"Python twins ({_PURE_ENV} is set)")
    try:
        module = importlib.import_module(_DIGITFILE_EXTENSION)
    except ImportError as exc:
        return DigitfileLoops(None, "python", f"Python twins (compiled loops not available: {exc})")
    missing = [name for name in _DIGITFILE_LOOPS if not hasattr(module, name)]
    if missing:
        return DigitfileLoops(
            None, "python", f"Python twins ({_DIGITFILE_EXTENSION} lacks {', '.join(missing)}: rebuild it)"
        )
    return DigitfileLoops(
        module, "c", f"compiled C loops ({_DIGITFILE_EXTENSION}: {', '.join(_DIGITFILE_LOOPS)})"
    )


def head_block_comb(
    series: Series, big_d0: int, step: int, count: int, k0: int, k1: int, words: int
) -> list[tuple[int, int]]:
    """The head sums over ``k0 <= k < k1`` of the windows at ``D_i = big_d0 + i * step``.

    Entry ``i`` is ``head_block(series, D_i, k0, end_i, words)`` with the
    block clipped to window ``i``'s head (``head_py.comb_heads``), bit for
    bit.  Windows with ``D_i < 0`` have no head; one window is a single head
    sum; the kernel takes the terms below the kernel/twin split of the
    deepest window, in combs of at most ``KERNEL_MAX_COMB`` windows, and the
    twin the rest.
    """
    if count < 1 or step < 0:
        raise ValueError("a comb has at least one window and a step >= 0")
    out = [(0, 0)] * count
    start = 0 if big_d0 >= 0 else min(count, (step - 1 - big_d0) // step if step else count)
    if start == count:
        return out
    big_d0 += start * step
    live = count - start
    if live == 1:
        end = k1 if series.e == 0 else min(k1, big_d0 // series.e + 1)
        out[start] = head_block(series, big_d0, k0, end, words) if end > k0 else (0, 0)
        return out
    last = big_d0 + (live - 1) * step
    split = (
        min(max(kernel_split(series, last, words).k_split, k0), k1) if step <= KERNEL_MAX_COMB_STEP else k0
    )
    args = (series.m, series.s, series.e, series.q, series.alternating, series.js, series.cs)
    sums = [(0, 0)] * live
    if split > k0:
        for first in range(0, live, KERNEL_MAX_COMB):
            n = min(KERNEL_MAX_COMB, live - first)
            sums[first : first + n] = head_sum_comb(big_d0 + first * step, step, n, k0, split, *args, words)
    if k1 > split:
        mask = (1 << (64 * words)) - 1
        twin = head_sum_comb_py(big_d0, step, live, split, k1, *args, words)
        sums = [((v + w) & mask, t + u) for (v, t), (w, u) in zip(sums, twin, strict=True)]
    out[start:] = sums
    return out
