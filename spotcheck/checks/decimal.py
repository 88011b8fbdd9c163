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

import random
import time
from collections.abc import Callable, Sequence

from spotcheck.digitfile import DigitFile
from spotcheck.engine.api import leading_digits

from .common import (
    DEFAULT_WINDOW,
    HexOracle,
    Progress,
    Sampler,
    clamp_window,
    common_rows,
    distinct_rows,
    first_difference,
    needs,
    run_plan,
    sample_notes,
)
from .radix import Converter, PrefixOutcome, open_converter, prefix_steps, run_inline
from .reference import memory_budget
from .results import FileFacts, LocateResult, VerifyResult, WindowCheck

__all__ = [
    "prefix_check",
    "PrefixOutcome",
    "verify_decimal",
    "locate_decimal",
    "estimate_conversion_bytes",
]

# --- tuning -----------------------------------------------------------------
# Peak bytes per decimal digit converted (the child's digit string, the big
# integer, 10^n, the quotient and the division's temporaries), rounded up
# from the figures of benchmarks/radix.py.
BYTES_PER_DIGIT = 7
# Trailing zeros a rounding carry may have left that the rounding test borrows through (a longer
# run of true 9s before a rounded digit is too rare to look for).
MAX_CARRY = 64
# ---------------------------------------------------------------------------


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


def _converter(df: DigitFile, n: int) -> Converter:
    """The file's first ``n`` digits where their conversions run (a child process for large files)."""
    return open_converter(n, df.read, lambda: df.iter_chunks(1 << 22))


def prefix_check(
    digits: str, oracle: HexOracle, window: int, kind: str, *, basis: int | None = None
) -> PrefixOutcome:
    """Validate the decimal prefix ``digits`` (digits 1..n after the point) against the engine.

    The first ``basis`` digits (default: all) pin ``x`` through their hex
    window; the decimal end is then recomputed for all of ``digits``, so with
    a ``basis`` known to be right, the expected digits past it come out too.
    Runs in this process (:mod:`spotcheck.checks.radix` has the steps, and
    the child process that serves whole files).

    >>> from spotcheck.checks.common import HexOracle
    >>> prefix_check("14159265358979323846", HexOracle("pi", "bellard"), 8, "tail").match
    True
    """
    return run_inline(prefix_steps(digits, window, kind, basis), oracle.digits)


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
    asked: int | None = None,
    window: int = DEFAULT_WINDOW,
    sample_seconds: float | None = None,
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
    conv = _converter(df, n)
    plan: list[tuple[str, int]] = [("tail", n)]
    plan += [("user", q) for q in dict.fromkeys(min(n, p + w - 1) for p in at) if q != n]
    # Random prefixes: distinct, none of the lengths checked anyway.
    sampler = Sampler(rng, min(n, 2 * w), n, fixed=[length for _, length in plan])
    room = sampler.room
    plan += [("sample", length) for length in sampler.batch(samples)]

    within: list[Callable[[float], None] | None] = [None]

    def check(kind: str, length: int) -> None:
        out = conv.check(length, oracle.digits, w, kind, tick=within[0])
        checks.extend(out.rows)

    try:
        random_windows, interrupted = run_plan(
            plan, check, sampler.draw, sample_seconds, progress, within=within
        )
        bracket = decimal_bracket(checks, n)
        rounded = None
        if bracket is not None and not interrupted and _may_be_rounded(checks, n, w):
            try:
                rounded = rounded_up_from(conv, df, n, oracle, w)
            except KeyboardInterrupt:
                interrupted = True
            if rounded is not None:  # the digits before it are the true ones: the first wrong is known
                bracket = (rounded, rounded)
    finally:
        conv.close()
    return VerifyResult(
        file=facts,
        checks=distinct_rows(checks),
        method="radix conversion",
        seconds=time.perf_counter() - t0,
        evaluations=oracle.evaluations,
        interrupted=interrupted,
        window=w,
        seed=seed,
        tail_position=n,
        random_windows=random_windows,
        samples_asked=asked,
        sample_room=room,
        notes=sample_notes(asked, samples, room, "prefix", reference=None, compared=False),
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


def _may_be_rounded(checks: Sequence[WindowCheck], n: int, w: int) -> bool:
    """Whether the failing checks leave room for a last digit rounded up (worth one more conversion).

    Rounding up moves the value by less than ``10^-n``: the whole file's hex
    window then differs at most in its last digits (its first half still
    matches unless a carry runs through half the window, chance 16^-(w/2)),
    and decimal digits differ only in the last ``w`` (unless the true digits
    end in a run of ``w`` nines).
    """
    failing = [c for c in checks if not c.match and c.kind != "integer-part"]
    for c in failing:
        if c.prefix is not None and c.prefix < n:  # a shorter prefix is wrong: more than rounding
            return False
        if c.first_difference is None:
            return False
        if c.base == 10 and c.first_difference <= n - w:
            return False
        if c.base == 16 and c.first_difference < c.position + len(c.expected) // 2:
            return False
    return bool(failing)


def rounded_up_from(conv: Converter, df: DigitFile, n: int, oracle: HexOracle, w: int) -> int | None:
    """Where the file's wrong last digits start, when they are the true digits rounded up at digit ``n``.

    That is the case exactly when the file's ``n`` digits, as an integer ``V``,
    are ``V = T + 1`` with ``T`` the true first ``n`` digits and the true digit
    ``n + 1`` at least 5.  Tested by one prefix check: ``T`` (the file's digits
    minus one in the last place) followed by ``0``, whose first ``n`` digits must
    convert to the engine's hex digits and whose decimal end must differ only at
    digit ``n + 1``, where the true digit is 5 or more.  None otherwise.
    """
    k = 1
    while k < min(n, MAX_CARRY) and df.read(n - k + 1, 1) == "0":  # a carry left zeros: borrow through them
        k += 1
    last = df.read(n - k + 1, k)
    if int(last) == 0:  # all zeros: V - 1 would need one digit fewer
        return None
    lowered = str(int(last) - 1).zfill(k)
    out = conv.check(n - k, oracle.digits, w, "confirm", basis=n, suffix=lowered + "0")
    end = out.end
    if not out.match and end is not None and end.first_difference == n + 1:
        true_next = end.expected[n + 1 - end.position]
        if int(true_next) >= 5:
            return n - k + 1 + next(i for i in range(k) if last[i] != lowered[i])
    return None


def locate_decimal(
    df: DigitFile,
    facts: FileFacts,
    *,
    window: int = DEFAULT_WINDOW,
    full_seconds: float = 0.0,
    reference: str = "arb",
    oracle: HexOracle,
    progress: Progress | None = None,
) -> LocateResult:
    """First wrong decimal digit, by bisection over prefix lengths.

    A prefix check is exact up to the window's false-match chance: a prefix
    passes only when every one of its digits is right.  So the passing prefixes
    are exactly those shorter than the first wrong digit, and bisection finds it.
    """
    del full_seconds, reference  # a decimal file needs no full scan: prefixes are checked whole
    t0 = time.perf_counter()
    n = facts.checked
    _check_memory(n)
    w = clamp_window(window, n)
    checks: list[WindowCheck] = []
    checks.extend(common_rows(facts))
    conv = _converter(df, n)
    steps = max(1, n.bit_length() + 1)
    interrupted = False
    first: int | None = None
    bad_end: WindowCheck | None = None
    good, bad = 0, 0
    rounded: int | None = None
    try:
        tail_tick = (lambda f: progress(int(f * steps / 2), steps)) if progress else None
        whole = conv.check(n, oracle.digits, w, "tail", tick=tail_tick)
        checks.extend(whole.rows)
        if not whole.match:
            good, bad = 0, n  # prefix `good` passes, prefix `bad` fails
            bad_end = whole.end
            while bad - good > 1:
                mid = (good + bad) // 2
                out = conv.check(mid, oracle.digits, w, "bisection")
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
            out = conv.check(min(n, bad + w - 1), oracle.digits, w, "confirm", basis=good)
            checks.extend(out.rows)
            bad_end = out.end
            rounded = rounded_up_from(conv, df, n, oracle, w) if first > n - w else None
    except KeyboardInterrupt:
        interrupted = True
    finally:
        conv.close()
    if first is not None:
        expected = bad_end.expected if bad_end is not None and bad_end.position == first else ""
        found = df.read(first, min(w, n - first + 1))
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
        checks=distinct_rows(checks),
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
        rounded_from=rounded if first is not None and not interrupted else None,
    )
