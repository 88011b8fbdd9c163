"""Decimal digit files, validated through radix conversion.

A decimal prefix of ``n`` digits ``V`` says ``x`` lies in ``[V, V + 1) / 10^n``
(the file is truncated, as digit files are by common practice).  Converting
both ends to base 16 gives the hex digits that the prefix *determines*: the
leading digits on which ``floor(V 16^H / 10^n)`` and ``floor((V+1) 16^H / 10^n)``
agree, ``L`` of them.  A prefix check is then two comparisons:

1. **hex window**: hex digits ``L-w+1 .. L`` of the prefix's value against
   certified engine digits.  A wrong decimal digit at position ``q`` changes
   the value's hex digits from about ``q log16(10)`` on, so for any error not
   in the last few decimal digits this window differs, except with chance
   ``16^-w`` (common practice, no single source);
2. **decimal end**: with the window matching, the prefix's hex digits
   ``1..L`` are ``x``'s own; the engine supplies the next ``m`` hex digits, so
   ``x`` is pinned within ``16^-(L+m)`` and ``floor(x 10^n)`` is computed
   exactly (more engine digits when ``x`` sits too close to a decimal
   boundary, as inside a run of 9s).  Comparing it with ``V`` catches errors
   in the last digits too, and names the first wrong decimal digit.

Never a false mismatch: only certified engine digits and exact integer
arithmetic decide; a decimal end that cannot be settled is reported as such.
"""

from __future__ import annotations

import math
import random
import time
from collections.abc import Sequence
from dataclasses import dataclass

import gmpy2

from spotcheck.digitfile import DigitFile
from spotcheck.engine.api import leading_digits

from .common import (
    DEFAULT_WINDOW,
    HexOracle,
    Progress,
    clamp_window,
    common_rows,
    first_difference,
    needs,
    run_plan,
)
from .reference import memory_budget
from .results import FileFacts, LocateResult, VerifyResult, WindowCheck

__all__ = ["prefix_check", "verify_decimal", "locate_decimal", "estimate_conversion_bytes"]

# --- tuning -----------------------------------------------------------------
CONTINUATION_DIGITS = 16  # engine hex digits after the determined ones (first try)
MAX_CONTINUATION = 256  # give up settling the decimal end beyond this
# Peak bytes per decimal digit converted: the digit string, the big integer
# (0.42 bytes/digit) and the products and quotients of the conversion; an
# estimate rounded up from the figures of benchmarks/decimal.py.
BYTES_PER_DIGIT = 10
# ---------------------------------------------------------------------------

_LOG2_10 = math.log2(10)


def estimate_conversion_bytes(n: int) -> int:
    return BYTES_PER_DIGIT * n + (64 << 20)


def _check_memory(n: int) -> None:
    need, have = estimate_conversion_bytes(n), memory_budget()
    if need > have:
        fits = max(1, (have - (64 << 20)) // BYTES_PER_DIGIT)
        raise needs(
            f"radix conversion of {n:,} decimal digits needs about {need / 2**30:.1f} GiB of memory "
            f"(available: {have / 2**30:.1f} GiB); a prefix of {fits:,} digits or less fits",
            "limit",
            fits,
        )


@dataclass(frozen=True)
class PrefixOutcome:
    window: WindowCheck | None
    """The hex-window comparison (None when the prefix determines no hex digit)."""
    end: WindowCheck | None
    """The decimal-end comparison (None when the window differs or it could not be settled)."""

    @property
    def rows(self) -> list[WindowCheck]:
        """The comparisons made, for a report's list of checks."""
        return [c for c in (self.window, self.end) if c is not None]

    @property
    def match(self) -> bool:
        return all(c is None or c.match for c in (self.window, self.end))

    @property
    def first_wrong(self) -> int | None:
        return self.end.first_difference if self.end is not None and not self.end.match else None


def _first_decimal_difference(a: str, b: str) -> int | None:
    """1-based index of the first difference of two equal-length digit strings."""
    if a == b:
        return None
    lo, hi = 0, len(a)
    while hi - lo > 64:  # halve towards the first difference
        mid = (lo + hi) // 2
        if a[lo:mid] != b[lo:mid]:
            hi = mid
        else:
            lo = mid
    for i in range(lo, hi):
        if a[i] != b[i]:
            return i + 1
    return None


def prefix_check(
    digits: str, oracle: HexOracle, window: int, kind: str, *, basis: int | None = None
) -> PrefixOutcome:
    """Validate the decimal prefix ``digits`` (digits 1..n after the point) against the engine.

    The first ``basis`` digits (default: all) pin ``x`` through their hex
    window; the decimal end is then recomputed for all of ``digits``, so with
    a ``basis`` known to be right, the expected digits past it come out too.
    """
    n = len(digits)
    basis = n if basis is None else basis
    whole = gmpy2.mpz(digits)
    v = whole if basis == n else gmpy2.mpz(digits[:basis] or "0")
    p10_basis = gmpy2.mpz(10) ** basis
    p10 = p10_basis
    h = int(basis * _LOG2_10) // 4 + 2
    a, r = divmod(v << (4 * h), p10)  # one big division serves both ends
    b = a + (r + (1 << (4 * h))) // p10
    # Hex digits the basis determines; none for a very short basis, and then
    # the engine alone pins x from digit 1 on.
    big_l = max(0, (4 * h - (a ^ b).bit_length()) // 4) if basis else 0
    big_a = a >> (4 * (h - big_l))
    w = min(window, big_l)
    found_hex = format(int(big_a & ((1 << (4 * w)) - 1)), "X").zfill(w) if w else ""
    # Enough engine digits past the determined ones to pin x far below 10^-n.
    m = CONTINUATION_DIGITS + max(0, math.ceil(n * _LOG2_10 / 4) - big_l)
    win: WindowCheck | None = None
    p10 = p10_basis if basis == n else gmpy2.mpz(10) ** n  # 10^n once for a whole-file check
    while True:
        engine = oracle.digits(big_l - w + 1, w + m)
        if w:
            expected_hex = engine[:w]
            diff = first_difference(expected_hex, found_hex, big_l - w + 1)
            win = WindowCheck(
                kind=kind,
                position=big_l - w + 1,
                expected=expected_hex,
                found=found_hex,
                match=diff is None,
                first_difference=diff,
                note=f"hex digits determined by the first {basis:,} decimal digits",
                base=16,
                prefix=basis,
            )
            if diff is not None:
                return PrefixOutcome(win, None)
        x = (big_a << (4 * m)) | int(engine[w:], 16)
        shift = 4 * (big_l + m)
        prod = x * p10
        t_lo, t_hi = prod >> shift, (prod + p10) >> shift
        if t_lo == t_hi:
            break
        if m >= MAX_CONTINUATION:  # x is extraordinarily close to a decimal boundary
            return PrefixOutcome(win, None)
        m *= 2
    tail_w = min(window, n)
    if t_lo == whole:  # the common case: no decimal string of the full length needed
        expected_dec = digits[n - tail_w :].rjust(n)
        q = None
    else:
        expected_dec = gmpy2.mpz(t_lo).digits(10).zfill(n)
        q = _first_decimal_difference(expected_dec, digits)
    start = n - tail_w + 1 if q is None else q
    end = WindowCheck(
        kind=kind,
        position=start,
        expected=expected_dec[start - 1 : start - 1 + tail_w],
        found=digits[start - 1 : start - 1 + tail_w],
        match=q is None,
        first_difference=q,
        note=f"decimal digits recomputed from the verified hex digits and {m} engine digits",
        base=10,
        prefix=n,
    )
    return PrefixOutcome(win, end)


def _read_prefix(df: DigitFile, n: int) -> str:
    return df.read(1, n)


def _head_check(facts: FileFacts, df: DigitFile, w: int) -> WindowCheck:
    _, expected = leading_digits(facts.constant, 10, w)
    found = df.read(1, w)
    diff = first_difference(expected, found, 1)
    return WindowCheck("head", 1, expected, found, diff is None, diff, base=10)


def verify_decimal(
    df: DigitFile,
    facts: FileFacts,
    *,
    samples: int,
    seed: int,
    at: Sequence[int],
    window: int = DEFAULT_WINDOW,
    budget: float | None = None,
    oracle: HexOracle,
    progress: Progress | None = None,
) -> VerifyResult:
    """Verify a decimal file: the whole value through radix conversion, plus random prefixes."""
    t0 = time.perf_counter()
    n = facts.checked
    _check_memory(n)
    w = clamp_window(window, n)
    rng = random.Random(seed)
    checks: list[WindowCheck] = []
    checks.extend(common_rows(facts))
    checks.append(_head_check(facts, df, w))
    digits = _read_prefix(df, n)
    plan: list[tuple[str, int]] = [("tail", n)]
    plan += [("user", min(n, p + w - 1)) for p in at]
    lo = min(n, 2 * w)
    plan += sorted(("sample", rng.randint(lo, n)) for _ in range(samples))

    def check(kind: str, length: int) -> None:
        out = prefix_check(digits[:length], oracle, w, kind)
        checks.extend(out.rows)

    random_windows, interrupted = run_plan(plan, check, lambda: rng.randint(lo, n), budget, progress)
    bracket = decimal_bracket(checks, n)
    rounded = None
    if bracket is not None and bracket[0] == bracket[1] and not interrupted:
        rounded = _rounded_last_digits(digits, bracket[0], oracle, w)
    return VerifyResult(
        file=facts,
        checks=checks,
        method="radix conversion",
        seconds=time.perf_counter() - t0,
        evaluations=oracle.evaluations,
        interrupted=interrupted,
        window=w,
        seed=seed,
        tail_position=n,
        random_windows=random_windows,
        first_wrong_bracket=bracket,
        rounded_from=rounded,
    )


def decimal_bracket(checks: Sequence[WindowCheck], n: int) -> tuple[int, int] | None:
    """``(lo, hi)``: where the first wrong decimal digit must lie, from the prefixes checked.

    A prefix passes (both its rows match) only when all its digits are right,
    so the first wrong digit lies after the longest passing prefix and within
    the shortest failing one; a decimal end recomputed from a matching hex
    window names it exactly.  None when no prefix failed.
    """
    by_prefix: dict[int, list[WindowCheck]] = {}
    for c in checks:
        if c.kind == "head" and c.base == 10 and not c.match and c.first_difference is not None:
            return c.first_difference, c.first_difference
        if c.prefix is not None and c.kind != "integer-part":
            by_prefix.setdefault(c.prefix, []).append(c)
    good, bad = 0, None
    for length, rows in by_prefix.items():
        if all(r.match for r in rows):
            good = max(good, length)
        else:
            bad = length if bad is None else min(bad, length)
            for r in rows:
                if r.base == 10 and not r.match and r.first_difference is not None:
                    return r.first_difference, r.first_difference
    if bad is None:
        return None
    return good + 1, min(bad, n)


def _rounded_last_digits(digits: str, first: int, oracle: HexOracle, w: int) -> int | None:
    """``first`` when digits ``first..n`` are the true ones rounded up at the last digit, else None.

    Digits ``1..first-1`` are known right; the true digits ``first..n+1`` are
    recomputed from them and engine digits, and the file's ``first..n`` must
    equal the true ``first..n`` plus one, with true digit ``n+1`` at least 5.
    """
    n = len(digits)
    if n - first + 2 > w or first < 1:
        return None
    out = prefix_check(digits + "0", oracle, max(w, n - first + 2), "confirm", basis=first - 1)
    end = out.end
    if end is None or end.position > first:
        return None
    true = end.expected[first - end.position : first - end.position + n - first + 2]
    if len(true) != n - first + 2:
        return None
    upper, next_digit = true[:-1], int(true[-1])
    found = digits[first - 1 :]
    if next_digit >= 5 and int(found) == int(upper) + 1 and len(str(int(upper) + 1)) <= len(found):
        return first
    return None


def locate_decimal(
    df: DigitFile,
    facts: FileFacts,
    *,
    window: int = DEFAULT_WINDOW,
    budget: float = 0.0,
    reference: str = "arb",
    oracle: HexOracle,
    progress: Progress | None = None,
) -> LocateResult:
    """First wrong decimal digit, by bisection over prefix lengths.

    A prefix check is exact up to the window's false-match chance: a prefix
    passes only when every one of its digits is right.  So the passing prefixes
    are exactly those shorter than the first wrong digit, and bisection finds it.
    """
    del budget, reference  # a decimal file needs no full scan: prefixes are checked whole
    t0 = time.perf_counter()
    n = facts.checked
    _check_memory(n)
    w = clamp_window(window, n)
    checks: list[WindowCheck] = []
    checks.extend(common_rows(facts))
    digits = _read_prefix(df, n)
    steps = max(1, n.bit_length() + 1)
    interrupted = False
    first: int | None = None
    bad_end: WindowCheck | None = None
    good, bad = 0, 0
    try:
        whole = prefix_check(digits, oracle, w, "tail")
        checks.extend(whole.rows)
        if not whole.match:
            good, bad = 0, n  # prefix `good` passes, prefix `bad` fails
            bad_end = whole.end
            while bad - good > 1:
                mid = (good + bad) // 2
                out = prefix_check(digits[:mid], oracle, w, "bisection")
                checks.extend(out.rows)
                if out.match:
                    good = mid
                else:
                    bad, bad_end = mid, out.end
                if progress:
                    progress(min(len(checks), steps), steps)
            # Prefix `bad` = good + 1 fails and prefix `good` passes, so digit `bad` is wrong.
            # Convert a prefix reaching a window past it to recompute the expected digits there.
            first = bad
            out = prefix_check(digits[: min(n, bad + w - 1)], oracle, w, "confirm", basis=good)
            checks.extend(out.rows)
            bad_end = out.end
    except KeyboardInterrupt:
        interrupted = True
    if first is not None:
        expected = bad_end.expected if bad_end is not None and bad_end.position == first else ""
        found = digits[first - 1 : first - 1 + w]
        how_expected = (
            "expected digits recomputed from the verified prefix and engine digits"
            if expected
            else "the expected digit could not be recomputed locally (the value sits too close to a decimal boundary)"
        )
        passing = (
            f"the first {first - 1:,} digits convert to hex digits that match the engine, the first {first:,} do not"
            if first > 1
            else "the first digit alone converts to hex digits that differ from the engine's"
        )
        explanation = f"first wrong decimal digit at position {first:,}: {passing}; {how_expected}"
        rest = None
    elif interrupted and bad:
        expected = found = ""
        explanation = (
            f"interrupted during the bisection: the first wrong decimal digit lies between positions "
            f"{good + 1:,} and {bad:,} (the first {good:,} digits are right, the first {bad:,} are not)"
        )
        rest = None
    elif interrupted:
        expected = found = ""
        explanation = "interrupted before a wrong digit was found"
        rest = None
    else:
        expected = found = ""
        explanation = (
            f"no wrong digit: all {n:,} decimal digits convert to hex digits that match certified engine "
            f"digits (false-match chance 16^-{w}), and the last decimal digits were recomputed exactly"
        )
        rest = None
    return LocateResult(
        file=facts,
        checks=checks,
        method="radix conversion",
        seconds=time.perf_counter() - t0,
        evaluations=oracle.evaluations,
        interrupted=interrupted,
        first_mismatch=first,
        expected=expected,
        found=found,
        rest=rest,
        how="prefix bisection" if first is not None else "none",
        explanation=explanation,
        first_is_certain=first is not None,
        first_wrong_bracket=(good + 1, bad) if first is None and bad else None,
        rounded_from=_rounded_last_digits(digits, first, oracle, w)
        if first is not None and not interrupted
        else None,
    )
