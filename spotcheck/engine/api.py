"""The engine's public face: certified hex digits of a named constant."""

from __future__ import annotations

import math
import operator
from dataclasses import asdict, dataclass
from typing import Any

from spotcheck.engine import backend
from spotcheck.engine.evaluate import Progress, extract_hex, value_bounds
from spotcheck.engine.series import series_of
from spotcheck.errors import CertificationError, UsageError
from spotcheck.formulas import Formula, get_constant

__all__ = ["DigitResult", "extract", "hex_digits", "leading_digits", "MAX_COUNT", "check_request"]

# A request for more digits than this is refused as a usage error: each window
# of about 100 digits costs a full head sum, so larger counts belong to a full
# computation, not to digit extraction.
MAX_COUNT = 100_000


@dataclass(frozen=True)
class DigitResult:
    """Certified hex digits and how they were obtained."""

    constant: str
    formula: str
    formula_notation: str
    formula_source: str
    position: int
    digits: str
    width_log2: float
    """log2 of the widest certifying interval (about -100 means +-2^-100)."""
    fraction_bits: int
    """Fixed-point fractional bits of the widest window."""
    terms: int
    windows: int
    seconds: float
    backend: str

    @property
    def count(self) -> int:
        return len(self.digits)

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["count"] = self.count
        return out


def check_request(position: object, count: object) -> tuple[int, int]:
    """Validate a (position, count) request; raise :class:`UsageError` if impossible."""
    try:
        p = operator.index(position)  # type: ignore[arg-type]
        n = operator.index(count)  # type: ignore[arg-type]
    except TypeError:
        raise UsageError(f"position and count must be integers, got {position!r} and {count!r}") from None
    if p < 1:
        raise UsageError(f"position must be at least 1 (digit 1 is the first after the point), got {p}")
    if n < 1:
        raise UsageError(f"count must be at least 1, got {n}")
    if n > MAX_COUNT:
        raise UsageError(f"count {n} is too large for digit extraction (at most {MAX_COUNT})")
    return p, n


def resolve_formula(constant: str | Formula, formula: str | None = None) -> tuple[str, Formula]:
    if isinstance(constant, Formula):
        return constant.key, constant
    c = get_constant(constant)
    return c.name, c.formula(formula)


def extract(
    constant: str | Formula,
    position: int,
    count: int = 16,
    *,
    formula: str | None = None,
    workers: int = 1,
    progress: Progress | None = None,
) -> DigitResult:
    """Certified hex digits of ``constant`` from ``position`` (1 = first after the point).

    >>> extract("pi", 1, 8).digits
    '243F6A88'
    """
    p, n = check_request(position, count)
    name, f = resolve_formula(constant, formula)
    digits, intervals, seconds = extract_hex(series_of(f), p, n, workers=workers, progress=progress)
    widest = max(intervals, key=lambda iv: iv.width_log2)
    return DigitResult(
        constant=name,
        formula=f.key,
        formula_notation=f.notation(),
        formula_source=f.source,
        position=p,
        digits=digits,
        width_log2=round(widest.width_log2, 2),
        fraction_bits=widest.bits,
        terms=sum(iv.terms for iv in intervals),
        windows=len(intervals),
        seconds=seconds,
        backend=backend.BACKEND,
    )


def hex_digits(constant: str | Formula, position: int, count: int = 16, *, formula: str | None = None) -> str:
    """Certified hex digits as a string (upper case).

    >>> hex_digits("pi", 1, 8)
    '243F6A88'
    """
    return extract(constant, position, count, formula=formula).digits


def leading_digits(constant: str | Formula, base: int, count: int) -> tuple[str, str]:
    """``(integer_part, digits)``: the certified first ``count`` digits after the point.

    Works in base 16 or 10 from an exact evaluation of the whole series, so it
    also gives the integer part, which digit extraction does not.

    >>> leading_digits("pi", 10, 10)
    ('3', '1415926535')
    """
    if base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base}")
    if not 1 <= count <= 2000:
        raise UsageError("leading_digits serves 1 to 2000 digits")
    _, f = resolve_formula(constant)
    series = series_of(f)
    bits = int(count * math.log2(base)) + 32
    while True:
        lo, hi = value_bounds(series, bits)
        # floor(C * base^count) from both ends; equal means certified.
        a = (lo * base**count) >> bits
        b = (hi * base**count) >> bits
        if a == b:
            sign = "-" if a < 0 else ""
            whole, frac = divmod(abs(a), base**count)
            digits = format(frac, "X") if base == 16 else str(frac)
            return sign + (format(whole, "X") if base == 16 else str(whole)), digits.zfill(count)
        if bits > 64 * count + 4096:
            raise CertificationError(f"could not certify {count} leading digits")
        bits += 64
