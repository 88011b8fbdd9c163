"""The engine against sources outside the project."""

from __future__ import annotations

import re

import pytest
from hypothesis import example, given
from hypothesis import strategies as st

from spotcheck.engine import backend
from spotcheck.engine.api import extract, hex_digits, leading_digits
from spotcheck.engine.evaluate import (
    Interval,
    certified_hex_prefix,
    frac_interval,
    window_digits,
)
from spotcheck.engine.series import series_of
from spotcheck.errors import UsageError
from spotcheck.formulas import PI_BBP, PI_BELLARD

from .reference import pi_fraction_fixed, pi_hex

FAST = backend.BACKEND == "c"
PI_FORMULAS = [PI_BBP, PI_BELLARD]

# Bailey, Borwein, Plouffe, Math. Comp. 66 (1997), table of hex digits of pi
# beginning at position 10^6 (with our convention: digit 1 is the first after
# the point); sympy's pi_hex_digits(10**6) agrees (checked in test_sympy_table_entry).
BBP_TABLE_1E6 = "26C65E52CB4593"
BBP_TABLE_1E7 = "17AF5863EFED8D"  # same table, position 10^7

# Blowfish P-array (B. Schneier, "Description of a New Variable-Length Key,
# 64-Bit Block Cipher (Blowfish)", 1993): the first 144 hex digits of pi after
# the point, as 18 words of 32 bits.  Typed from memory of the published
# listing; test_blowfish_matches_mpfr checks what was typed against MPFR.
BLOWFISH_P = (
    "243F6A88 85A308D3 13198A2E 03707344 A4093822 299F31D0 082EFA98 EC4E6C89 452821E6 "
    "38D01377 BE5466CF 34E90C6C C0AC29B7 C97C50DD 3F84D5B5 B5470917 9216D5D9 8979FB1B"
).replace(" ", "")


def test_blowfish_matches_mpfr() -> None:
    assert BLOWFISH_P == pi_hex(144)


@pytest.mark.parametrize("formula", PI_FORMULAS, ids=lambda f: f.key)
def test_blowfish_p_array(formula) -> None:
    assert extract(formula, 1, 144).digits == BLOWFISH_P


@pytest.mark.parametrize("formula", ["bbp", "bellard"])
def test_paper_table_position_1e6(formula) -> None:
    if not FAST and formula == "bbp":
        pytest.skip("pure path: one formula at 10^6 is enough")
    assert hex_digits("pi", 1_000_000, 14, formula=formula) == BBP_TABLE_1E6


def test_convention_other_side() -> None:
    # One position later, the table's digits shift left by one.
    later = hex_digits("pi", 1_000_001, 14)
    assert later.startswith(BBP_TABLE_1E6[1:])
    assert later == hex_digits("pi", 1_000_000, 15)[1:]


@pytest.mark.slow
@pytest.mark.skipif(not FAST, reason="10^7 needs the compiled kernel")
@pytest.mark.parametrize("formula", ["bbp", "bellard"])
def test_paper_table_position_1e7(formula) -> None:
    assert hex_digits("pi", 10_000_000, 14, formula=formula) == BBP_TABLE_1E7


def test_sympy_table_entry() -> None:
    sympy_bbp = pytest.importorskip("sympy.ntheory.bbp_pi")
    if not FAST:
        pytest.skip("sympy at 10^6 takes several seconds; covered on the compiled run")
    # sympy's argument counts the leading 3 as digit 0: equal to our 1-based position.
    assert sympy_bbp.pi_hex_digits(1_000_000, 14).upper() == BBP_TABLE_1E6


@given(position=st.integers(1, 20_000), count=st.integers(1, 30))
@example(position=1, count=1)
@example(position=19_999, count=14)
def test_against_sympy(position: int, count: int) -> None:
    sympy_bbp = pytest.importorskip("sympy.ntheory.bbp_pi")
    # sympy.ntheory.bbp_pi.pi_hex_digits (general-purpose library); its n counts from 0 at the "3".
    assert hex_digits("pi", position, count) == sympy_bbp.pi_hex_digits(position, count).upper()


@pytest.mark.parametrize("formula", PI_FORMULAS, ids=lambda f: f.key)
def test_every_window_of_first_20000(formula) -> None:
    # Reference: gmpy2/MPFR const_pi.  Windows of 100 tile all 20,000 digits.
    truth = pi_hex(20_000)
    width = 100
    for p in range(1, 20_001, width):
        assert extract(formula, p, width).digits == truth[p - 1 : p - 1 + width], p


@given(position=st.integers(1, 19_000), count=st.integers(1, 200))
@example(position=1, count=200)
@example(position=18_801, count=200)
def test_certified_digits_never_disagree_with_mpfr(position: int, count: int) -> None:
    truth = pi_hex(20_000)
    for f in PI_FORMULAS:
        assert extract(f, position, count).digits == truth[position - 1 : position - 1 + count]


@given(position=st.integers(1, 19_000), words=st.integers(1, 4))
@example(position=1, words=1)
def test_interval_contains_true_value(position: int, words: int) -> None:
    d = 4 * (position - 1)
    bits = 64 * words
    true_fixed = pi_fraction_fixed(4 * 20_000 + 512)
    total = 4 * 20_000 + 512
    # floor(frac(2^d pi) * 2^(bits+64)) from the reference
    v = (true_fixed >> (total - d - bits - 64)) & ((1 << (bits + 64)) - 1)
    for f in PI_FORMULAS:
        iv = frac_interval(series_of(f), d, words)
        assert iv.contains(v, bits + 64)
        assert iv.contains(v + 1, bits + 64)


@given(position=st.integers(1, 19_000), count=st.integers(1, 24))
def test_two_formulas_agree_where_both_certify(position: int, count: int) -> None:
    d = 4 * (position - 1)
    a = certified_hex_prefix(frac_interval(series_of(PI_BBP), d, 2), count)
    b = certified_hex_prefix(frac_interval(series_of(PI_BELLARD), d, 2), count)
    n = min(len(a), len(b))
    assert n >= 1
    assert a[:n] == b[:n]


def test_ambiguous_window_is_refined_not_guessed() -> None:
    # Reference: gmpy2/MPFR const_pi.  Slide a window over each run of three or
    # more 0s or Fs in the first 20,000 hex digits of pi, so that the run sits at
    # the edge of what 128 fractional bits settle and the first interval
    # straddles a digit boundary; the engine must add bits, not guess.
    truth = pi_hex(20_000)
    series = series_of(PI_BELLARD)
    count = 28
    forced = 0
    for run in re.finditer(r"0{3,}|F{3,}", truth):
        for p in range(max(1, run.end() - 34), run.end() - 14):
            first = frac_interval(series, 4 * (p - 1), 2)
            short = certified_hex_prefix(first, count)
            assert short == truth[p - 1 : p - 1 + len(short)]  # what is certified is right
            if len(short) < count and run.start() - 1 <= p - 1 + len(short) < run.end():
                forced += 1
                digits, final = window_digits(series, 4 * (p - 1), count, words=2)
                assert digits == truth[p - 1 : p - 1 + count]
                assert final.bits > first.bits  # it had to evaluate again
    assert forced >= 10  # the search really did hit ambiguous windows


def test_wrapping_interval_certifies_nothing() -> None:
    bits = 128
    top = 1 << bits
    iv = Interval(lo=top - 5, hi=top + 5, bits=bits, terms=10)  # straddles 1.0
    assert certified_hex_prefix(iv, 10) == ""
    iv = Interval(lo=(0x1234 << (bits - 16)) - 3, hi=(0x1234 << (bits - 16)) + 3, bits=bits, terms=6)
    assert certified_hex_prefix(iv, 10) == "123"


@pytest.mark.parametrize(("position", "count"), [(0, 1), (-5, 3), (1, 0), (1, 10**9), (1.5, 2), ("7", 1)])
def test_impossible_requests(position, count) -> None:
    with pytest.raises(UsageError):
        extract("pi", position, count)


def test_unknown_constant_and_formula() -> None:
    with pytest.raises(UsageError, match="unknown constant"):
        extract("tau", 1, 4)
    with pytest.raises(UsageError, match="no formula"):
        extract("pi", 1, 4, formula="nope")


def test_result_object() -> None:
    r = extract("pi", 100, 20, formula="bbp")
    assert r.digits == pi_hex(200)[99:119]
    assert r.formula == "bbp" and r.constant == "pi" and r.position == 100
    assert r.width_log2 < -4 * 20  # narrower than the digits it certifies
    assert r.seconds >= 0 and r.terms > 0


def test_long_request_uses_several_windows() -> None:
    r = extract("pi", 1, 1000)
    assert r.windows > 1
    assert r.digits == pi_hex(1000)


def test_leading_digits_decimal() -> None:
    # Reference: gmpy2/MPFR const_pi.
    from .reference import pi_decimal

    assert leading_digits("pi", 10, 500) == ("3", pi_decimal(500))
    assert leading_digits("pi", 16, 300) == ("3", pi_hex(300))


@pytest.mark.skipif(not FAST, reason="needs the compiled kernel")
def test_fast_path_position_is_the_kernel_boundary() -> None:
    from spotcheck.engine.api import fast_path_position
    from spotcheck.formulas import all_constants

    for c in all_constants():
        for f in c.formulas:
            series = series_of(f)
            limit = backend.kernel_k_limit(series)
            pos = fast_path_position(f)
            assert series.head_length(4 * (pos - 1)) <= limit
            if pos < 10**15:  # a boundary that a deep request can reach
                assert series.head_length(4 * (pos - 1) + 64) > limit
                j = max(series.js)
                assert series.modulus(limit - 1, j) < backend.KERNEL_MAX_MODULUS <= series.modulus(limit, j)
