"""Every built-in formula against general-purpose libraries.

Three independent checks per formula:

* the series itself, summed with mpmath at 1,110 digits, equals mpmath's own
  value of the constant to 1,000 digits;
* the engine's certified hex digits over the first 5,000 positions equal
  mpmath's value converted exactly to hex;
* the engine's certified digits at hypothesis-chosen positions up to 10^5
  equal the digits certified by a python-flint Arb ball.

mpmath and python-flint are general-purpose libraries; neither is a dedicated
digit program, and neither shares code with spotcheck.  Nothing here is
timed.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from fractions import Fraction
from functools import cache

import flint
import mpmath
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck import formulas
from spotcheck.engine.api import extract, leading_digits
from spotcheck.errors import FormulaError, UsageError
from spotcheck.formulas import BUILTIN_CONSTANTS, Constant, Formula, get_constant, register_constant

ALL_FORMULAS = [(c.name, f.key) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
FORMULA_IDS = [f"{name}-{key}" for name, key in ALL_FORMULAS]

# --- references ---------------------------------------------------------------
# Each built-in constant's value from mpmath (general-purpose arbitrary precision
# library), evaluated in the caller's working precision.
MPMATH_VALUE: dict[str, Callable[[], mpmath.mpf]] = {
    "pi": lambda: +mpmath.pi,  # reference: mpmath.pi
    "log2": lambda: mpmath.log(2),  # reference: mpmath.log
    "log3": lambda: mpmath.log(3),  # reference: mpmath.log
    "pi-squared": lambda: mpmath.pi**2,  # reference: mpmath.pi, squared in mpmath
    "catalan": lambda: +mpmath.catalan,  # reference: mpmath.catalan
    "zeta3": lambda: mpmath.zeta(3),  # reference: mpmath.zeta
    "arctan-half": lambda: mpmath.atan(mpmath.mpf(1) / 2),  # reference: mpmath.atan
}

# The same constants as python-flint Arb balls (general-purpose ball arithmetic;
# every ball is a proven enclosure), evaluated at flint.ctx.prec.
ARB_VALUE: dict[str, Callable[[], flint.arb]] = {
    "pi": lambda: flint.arb.pi(),  # reference: python-flint arb.pi
    "log2": lambda: flint.arb.const_log2(),  # reference: python-flint arb.const_log2
    "log3": lambda: flint.arb(3).log(),  # reference: python-flint arb.log
    "pi-squared": lambda: flint.arb.pi() ** 2,  # reference: python-flint arb.pi, squared in Arb
    "catalan": lambda: flint.arb.const_catalan(),  # reference: python-flint arb.const_catalan
    "zeta3": lambda: flint.arb(3).zeta(),  # reference: python-flint arb.zeta
    "arctan-half": lambda: (flint.arb(1) / 2).atan(),  # reference: python-flint arb.atan
}

HEX_WINDOW_DIGITS = 5000  # acceptance: every window of the first 5,000 hex digits
DEEP_POSITION = 100_000  # acceptance: hypothesis positions up to 10^5
DEEP_COUNT = 20
MPMATH_GUARD_DIGITS = 8  # hex digits computed past the last one compared


def test_reference_tables_cover_every_builtin() -> None:
    assert set(MPMATH_VALUE) == set(BUILTIN_CONSTANTS) == set(ARB_VALUE)


@cache
def mpmath_hex(name: str, n: int) -> tuple[int, str]:
    """``(integer part, first n hex digits after the point)`` from mpmath.

    The value is scaled by an exact power of two and floored; MPMATH_GUARD_DIGITS
    extra hex digits are computed and dropped, and they must not be all 0 or all
    F, so an error of a few ulps in mpmath's value cannot reach a compared digit.
    """
    total = n + MPMATH_GUARD_DIGITS
    with mpmath.workprec(4 * total + 64):
        x = MPMATH_VALUE[name]()
        v = int(mpmath.floor(mpmath.ldexp(x, 4 * total)))
    whole, frac = divmod(v, 16**total)
    digits = format(frac, "X").zfill(total)
    guard = digits[n:]
    assert guard.strip("0") and guard.strip("F"), "mpmath reference too close to a digit boundary"
    return whole, digits[:n]


@cache
def arb_bounds(name: str, bits: int) -> tuple[Fraction, Fraction]:
    """Exact lower and upper ends of an Arb ball for the constant at ``bits`` bits."""
    old = flint.ctx.prec
    flint.ctx.prec = bits
    try:
        x = ARB_VALUE[name]()
    finally:
        flint.ctx.prec = old
    mid_man, mid_exp = x.mid().man_exp()
    rad_man, rad_exp = x.rad().man_exp()
    mid = Fraction(int(mid_man)) * Fraction(2) ** int(mid_exp)
    rad = Fraction(int(rad_man)) * Fraction(2) ** int(rad_exp)
    return mid - rad, mid + rad


def arb_certified_hex(name: str, position: int, count: int) -> str:
    """Hex digits ``position .. position+count-1`` shared by both ends of the Arb ball."""
    bits = 4 * (position + count) + 128
    lo, hi = arb_bounds(name, bits)
    shift = 16 ** (position + count - 1)
    a = math.floor(lo * shift) % 16**count
    b = math.floor(hi * shift) % 16**count
    da, db = format(a, "X").zfill(count), format(b, "X").zfill(count)
    n = 0
    while n < count and da[n] == db[n]:
        n += 1
    return da[:n]


# --- the series themselves ------------------------------------------------------


def mpmath_series(f: Formula, dps: int) -> mpmath.mpf:
    """``scale * P(s, b, m, A)`` summed term by term in mpmath at ``dps`` digits."""
    with mpmath.workdps(dps + 10):
        abs_sum = sum(abs(a) for a in f.coefficients)
        # Terms after K are below 2 * sum|a| * |b|^-K (|b| >= 2, denominators >= 1).
        k_max = math.ceil((dps * math.log2(10) + math.log2(abs_sum) + 8) / f.e) + 1
        base = mpmath.mpf(f.base)
        total = mpmath.mpf(0)
        for k in range(k_max):
            inner = mpmath.fsum(
                mpmath.mpf(a) / (f.m * k + j) ** f.s for j, a in enumerate(f.coefficients, 1) if a
            )
            total += inner / base**k
        return total * f.scale.numerator / f.scale.denominator


@pytest.mark.parametrize(("name", "key"), ALL_FORMULAS, ids=FORMULA_IDS)
def test_series_equals_constant_to_1000_digits(name: str, key: str) -> None:
    f = BUILTIN_CONSTANTS[name].formula(key)
    series = mpmath_series(f, 1100)
    with mpmath.workdps(1110):
        reference = MPMATH_VALUE[name]()  # reference: mpmath (see MPMATH_VALUE)
        assert abs(series - reference) < mpmath.mpf(10) ** -1000


@pytest.mark.parametrize(("name", "key"), ALL_FORMULAS, ids=FORMULA_IDS)
def test_leading_digits_match_mpmath(name: str, key: str) -> None:
    f = BUILTIN_CONSTANTS[name].formula(key)
    whole, hex_ref = mpmath_hex(name, 64)  # reference: mpmath
    assert leading_digits(f, 16, 64) == (format(whole, "X"), hex_ref)
    with mpmath.workdps(80):
        dec = mpmath.nstr(MPMATH_VALUE[name](), 75, strip_zeros=False)  # reference: mpmath
    int_part, frac_part = dec.split(".")
    assert leading_digits(f, 10, 60) == (int_part, frac_part[:60])


# --- engine digits over the first 5,000 positions ------------------------------------


@pytest.mark.parametrize(("name", "key"), ALL_FORMULAS, ids=FORMULA_IDS)
def test_first_5000_hex_digits_match_mpmath(name: str, key: str) -> None:
    _, ref = mpmath_hex(name, HEX_WINDOW_DIGITS)  # reference: mpmath, exact hex conversion
    # One request: the engine splits it into its own windows (about 120 digits each).
    whole = extract(name, 1, HEX_WINDOW_DIGITS, formula=key)
    assert whole.digits == ref
    assert whole.formula == key
    # Independent windows of 100 digits at 1, 101, 201, ...: other window edges.
    for p in range(1, HEX_WINDOW_DIGITS + 1, 100):
        assert extract(name, p, 100, formula=key).digits == ref[p - 1 : p + 99], p


@pytest.mark.parametrize(("name", "key"), ALL_FORMULAS, ids=FORMULA_IDS)
@pytest.mark.parametrize(("position", "count"), [(1, 1), (2, 3), (97, 9), (1015, 30), (4077, 200), (5000, 1)])
def test_straddling_requests_match_mpmath(name: str, key: str, position: int, count: int) -> None:
    _, ref = mpmath_hex(name, HEX_WINDOW_DIGITS)  # reference: mpmath, exact hex conversion
    got = extract(name, position, count, formula=key).digits
    assert got == ref[position - 1 : position - 1 + count]


# --- deep positions against Arb --------------------------------------------------------


def _arb_case(name: str, key: str) -> Callable[[int], None]:
    def check(position: int) -> None:
        ref = arb_certified_hex(name, position, DEEP_COUNT)  # reference: python-flint Arb ball
        assert len(ref) >= DEEP_COUNT - 4, "Arb ball certifies too few digits to compare"
        got = extract(name, position, DEEP_COUNT, formula=key).digits
        assert got[: len(ref)] == ref

    return check


@pytest.mark.parametrize(("name", "key"), ALL_FORMULAS, ids=FORMULA_IDS)
def test_deep_digits_match_arb(name: str, key: str) -> None:
    check = _arb_case(name, key)

    @settings(max_examples=4, deadline=None, derandomize=True)
    @given(st.integers(min_value=1, max_value=DEEP_POSITION - DEEP_COUNT + 1))
    @example(1)
    @example(DEEP_POSITION - DEEP_COUNT + 1)  # the last digit compared is digit 10^5
    def run(position: int) -> None:
        check(position)

    run()


# --- the data model ----------------------------------------------------------------


def test_every_builtin_formula_cites_a_source() -> None:
    for c in BUILTIN_CONSTANTS.values():
        assert c.origin == "built-in"
        keys = [f.key for f in c.formulas]
        assert len(keys) == len(set(keys)), c.name
        for f in c.formulas:
            assert len(f.source) > 20, (c.name, f.key)
            assert "formulas.md" not in f.source


def test_notation_of_bbp_pi() -> None:
    # reference: the BBP pi series as published in Math. Comp. 66 (1997), from memory
    assert get_constant("pi").formula("bbp").notation() == "P(1, 16, 8, (4, 0, 0, -2, -1, -1, 0, 0))"


@pytest.mark.parametrize("name", list(BUILTIN_CONSTANTS))
def test_default_formula_is_the_cheapest(name: str) -> None:
    c = BUILTIN_CONSTANTS[name]

    def cost(f: Formula) -> float:  # head terms per bit: nonzero coefficients / log2|b|
        return sum(1 for a in f.coefficients if a) / math.log2(abs(f.base))

    assert cost(c.formula()) == min(cost(f) for f in c.formulas)


def test_default_pi_and_pi_squared_formulas() -> None:
    # Bellard: 7 terms per 10 bits beats BBP's 4 per 4; base 64: 5 per 6 beats 7 per 4.
    assert get_constant("pi").formula().key == "bellard"
    assert get_constant("pi-squared").formula().key == "base64"


def test_formula_by_key_and_unknown_key() -> None:
    pi = get_constant("pi")
    assert pi.formula("bbp").base == 16
    assert pi.formula("bellard").base == -1024
    with pytest.raises(UsageError, match=r"no formula 'nope'.*bbp, bellard"):
        pi.formula("nope")


@pytest.mark.parametrize(
    ("alias", "name"),
    [
        ("pi", "pi"),
        ("PI", "pi"),
        (" Catalan ", "catalan"),
        ("ln2", "log2"),
        ("LN3", "log3"),
        ("pi2", "pi-squared"),
    ],
)
def test_get_constant_names_and_aliases(alias: str, name: str) -> None:
    assert get_constant(alias).name == name


def test_get_constant_unknown_lists_known_names() -> None:
    with pytest.raises(UsageError, match=r"unknown constant 'feigenbaum'.*pi, log2"):
        get_constant("feigenbaum")  # e is known since issue 15 (full evaluation)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"base": 3}, "not a power of two"),
        ({"base": 1}, "does not make the series converge"),
        ({"base": -1}, "does not make the series converge"),
        ({"base": 0}, "does not make the series converge"),
        ({"coefficients": (1, 2)}, "expected m = 1 coefficients, got 2"),
        ({"coefficients": (0,)}, "all coefficients are zero"),
        ({"coefficients": (1.5,)}, "coefficients must be integers"),
        ({"s": 0}, "s must be at least 1"),
        ({"scale": Fraction(0)}, "non-zero rational"),
    ],
)
def test_malformed_formula_raises(kwargs: dict[str, object], message: str) -> None:
    parts: dict[str, object] = {
        "key": "x",
        "s": 1,
        "base": 2,
        "m": 1,
        "coefficients": (1,),
        "scale": Fraction(1, 2),
        "source": "test",
    }
    parts.update(kwargs)
    with pytest.raises(FormulaError, match=message):
        Formula(**parts)  # type: ignore[arg-type]


def test_register_constant(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(formulas, "_registry", dict(formulas._registry))
    log2 = BUILTIN_CONSTANTS["log2"].formula()
    with pytest.raises(FormulaError, match="built-in"):
        register_constant(Constant("pi", "pi again", (log2,)))
    register_constant(Constant("my-log2", "log 2 again", (log2,), origin="test"))
    assert get_constant("MY-LOG2").origin == "test"
    assert "my-log2" in formulas.constant_names()
    # reference: mpmath.log (general-purpose library)
    assert extract("my-log2", 1, 40).digits == mpmath_hex("log2", 40)[1]
