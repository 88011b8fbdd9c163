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

The compiled kernel only accepts machine-sized arguments; ``kernel_k_limit``
gives the first k from which a series' moduli leave its range, and the engine
sends those terms to the twin.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence

from spotcheck.engine.head_py import head_sum_py
from spotcheck.engine.series import Series

__all__ = ["BACKEND", "BACKEND_NOTE", "head_sum", "head_sum_py", "kernel_k_limit", "KERNEL_MAX_WORDS"]

HeadSum = Callable[
    [int, int, int, int, int, int, int, bool, Sequence[int], Sequence[int], int], tuple[int, int]
]

# Limits of the compiled kernel's integer arithmetic (see _kernel.c).
KERNEL_MAX_MODULUS = 1 << 63  # every N = q (m k + j)^s must be below this
KERNEL_MAX_EXPONENT = (1 << 64) - 1  # D - e k must fit in an unsigned 64-bit word
KERNEL_MAX_COEFFICIENT = 1 << 62  # |c_j| below this
KERNEL_MAX_WORDS = 16  # at most 64 * 16 fractional bits

_PURE_ENV = "SPOTCHECK_PURE"
_KERNEL_ENV = "SPOTCHECK_KERNEL"  # forces one path of the compiled kernel (_kernel.paths())

head_sum: HeadSum
_kernel_head_sum: HeadSum | None = None

if os.environ.get(_PURE_ENV, "").strip().lower() in ("1", "true", "yes", "on"):
    BACKEND = "python"
    BACKEND_NOTE = f"pure Python/gmpy2 ({_PURE_ENV} is set)"
else:
    try:
        from spotcheck.engine import _kernel  # type: ignore[attr-defined]
        from spotcheck.engine._kernel import head_sum as _kernel_head_sum  # type: ignore[import-not-found,no-redef]
    except ImportError as exc:  # the extension was not built
        BACKEND = "python"
        BACKEND_NOTE = f"pure Python/gmpy2 (compiled kernel not available: {exc})"
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

            BACKEND_NOTE = f"compiled C kernel refused: {_problem}"
        else:
            _why_path = f"{_KERNEL_ENV} is set" if _forced else "the fastest this CPU offers"
            BACKEND_NOTE = (
                f"compiled C kernel, path {_kernel.active_path()} ({_why_path}; this CPU offers: {_offered}; "
                f"{_kernel.ARITHMETIC} arithmetic)"
            )

head_sum = _kernel_head_sum if _kernel_head_sum is not None else head_sum_py


def kernel_k_limit(series: Series) -> int:
    """First k at which the compiled kernel can no longer take the series (0 if never)."""
    if _kernel_head_sum is None or BACKEND != "c":
        return 0
    if any(abs(c) >= KERNEL_MAX_COEFFICIENT for c in series.cs):
        return 0
    # Largest k with q * (m k + j_max)^s < 2^63.
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
