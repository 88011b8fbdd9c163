"""Constants with no digit-extraction formula, evaluated in full (spotcheck/engine/full.py).

Outside references: the OEIS decimal tables (the 50-digit prefixes below were
typed from memory, and each is cross-checked here against mpmath), mpmath to
2,000 decimal and 3,000 hex digits, and gmpy2/MPFR (its own implementations of
exp, sqrt, log, zeta and Euler's constant) for windows at any position.
"""

from __future__ import annotations

import json
from functools import lru_cache
from pathlib import Path

import gmpy2
import mpmath
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.checks.compare import compare_files
from spotcheck.cli import run
from spotcheck.digitfile import open_digit_file
from spotcheck.engine import full
from spotcheck.engine.api import extract, hex_digits, leading_digits
from spotcheck.errors import FormulaError, UsageError
from spotcheck.formulas import FULL_CONSTANTS, Constant, get_constant, register_constant

# OEIS tables (typed from memory; cross-checked with mpmath in test_published_tables_agree_with_mpmath).
PUBLISHED = {
    "e": ("A001113", "2.71828182845904523536028747135266249775724709369995"),
    "sqrt2": ("A002193", "1.41421356237309504880168872420969807856967187537694"),
    "sqrt3": ("A002194", "1.73205080756887729352744634150587236694280525381038"),
    "golden-ratio": ("A001622", "1.61803398874989484820458683436563811772030917980576"),
    "euler-gamma": ("A001620", "0.57721566490153286060651209008240243104215933593992"),
    "log10": ("A002392", "2.30258509299404568401799145468436420760110148862877"),
    "zeta5": ("A013663", "1.03692775514336992633136548645703416805708091950191"),
}
NAMES = sorted(PUBLISHED)

MPMATH = {
    "e": lambda: mpmath.e,
    "sqrt2": lambda: mpmath.sqrt(2),
    "sqrt3": lambda: mpmath.sqrt(3),
    "golden-ratio": lambda: mpmath.phi,
    "euler-gamma": lambda: mpmath.euler,
    "log10": lambda: mpmath.log(10),
    "zeta5": lambda: mpmath.zeta(5),
}
MPFR = {
    "e": lambda: gmpy2.exp(1),
    "sqrt2": lambda: gmpy2.sqrt(2),
    "sqrt3": lambda: gmpy2.sqrt(3),
    "golden-ratio": lambda: (1 + gmpy2.sqrt(5)) / 2,
    "euler-gamma": gmpy2.const_euler,
    "log10": lambda: gmpy2.log(10),
    "zeta5": lambda: gmpy2.zeta(5),
}


@lru_cache(maxsize=32)
def mpmath_digits(name: str, base: int, n: int) -> tuple[int, str]:
    """(integer part, first n digits) from mpmath with 40 guard digits, exact integer conversion."""
    with mpmath.workdps(int(n * (1.21 if base == 16 else 1)) + 40):
        v = int(mpmath.floor(MPMATH[name]() * mpmath.mpf(base) ** n))
    whole, frac = divmod(v, base**n)
    return whole, (format(frac, "X") if base == 16 else str(frac)).zfill(n)


@lru_cache(maxsize=32)
def mpfr_digits(name: str, base: int, n: int) -> tuple[int, str]:
    """(integer part, first n digits) from gmpy2/MPFR with 128 guard bits."""
    bits = int(n * (4 if base == 16 else 3.33)) + 128
    with gmpy2.context(precision=bits):
        v = gmpy2.mpz(gmpy2.floor(MPFR[name]() * gmpy2.mpz(base) ** n))
    whole, frac = divmod(v, gmpy2.mpz(base) ** n)
    return int(whole), frac.digits(base).upper().zfill(n)


def test_registry_lists_every_full_constant_with_a_source() -> None:
    assert set(FULL_CONSTANTS) == set(NAMES) == set(full.FULL_NAMES)
    for name in NAMES:
        c = get_constant(name)
        assert c.formulas == () and c.evaluation is not None and c.method == "full evaluation"
        assert PUBLISHED[name][0] in c.evaluation.source
        assert c.method_key() == "arb" and c.evaluation.mpfr
    assert get_constant("phi").name == "golden-ratio" and get_constant("gamma").name == "euler-gamma"


def test_formula_of_a_full_constant_is_a_clear_usage_error() -> None:
    with pytest.raises(UsageError, match="no digit-extraction formula"):
        get_constant("e").formula()
    with pytest.raises(UsageError, match="only method key"):
        get_constant("e").method_key("bbp")
    assert get_constant("pi").method_key() == get_constant("pi").formula().key


def test_user_constants_cannot_take_a_full_constant_name() -> None:
    with pytest.raises(FormulaError):
        register_constant(Constant("e", "not e", get_constant("log2").formulas))


@pytest.mark.parametrize("name", NAMES)
def test_published_tables_agree_with_mpmath(name: str) -> None:
    _, table = PUBLISHED[name]
    whole, frac = table.split(".")
    assert mpmath_digits(name, 10, len(frac)) == (int(whole), frac)  # memory vs mpmath
    assert leading_digits(name, 10, len(frac)) == (whole, frac)  # spotcheck vs the table


# MPFR's zeta is slow at high precision (about 110 s at 24,500 bits on the
# project's machine, against 0.03 s in Arb), so zeta(5) is checked on shorter spans.
HEX_SPAN = {name: 1000 if name == "zeta5" else 3000 for name in NAMES}
WINDOW_SPAN = {name: 1500 if name == "zeta5" else 6000 for name in NAMES}


@pytest.mark.parametrize("name", NAMES)
def test_first_digits_match_mpmath_and_mpfr(name: str) -> None:
    whole, dec = mpmath_digits(name, 10, 2000)
    assert leading_digits(name, 10, 2000) == (str(whole), dec)
    n = HEX_SPAN[name]
    hwhole, hx = mpmath_digits(name, 16, n)
    assert leading_digits(name, 16, 64) == (format(hwhole, "X"), hx[:64])
    assert hex_digits(name, 1, n) == hx
    assert mpfr_digits(name, 16, n)[1] == hx  # the two outside references agree


@settings(max_examples=20, deadline=None)
@given(name=st.sampled_from(NAMES), fraction=st.floats(0, 1), count=st.integers(1, 80))
@example(name="e", fraction=0.0, count=1)
@example(name="zeta5", fraction=1.0, count=80)
def test_windows_anywhere_match_mpfr(name: str, fraction: float, count: int) -> None:
    span = WINDOW_SPAN[name]
    position = 1 + int(fraction * (span - 1))
    _, ref = mpfr_digits(name, 16, span + 100)
    r = extract(name, position, count)
    assert r.digits == ref[position - 1 : position - 1 + count]
    assert (
        r.formula == "arb"
        and "full evaluation" in r.formula_notation
        and r.width_log2 < -4 * (position + count)
    )


def _run_of(digits: str, ch: str) -> tuple[int, int]:
    """(1-based start, length) of the longest run of ``ch``."""
    best, start = (0, 0), None
    for i, c in enumerate(digits + "x"):
        if c == ch and start is None:
            start = i
        elif c != ch and start is not None:
            best = max(best, (i - start, start + 1))
            start = None
    return best[1], best[0]


@pytest.mark.parametrize("name", ["e", "sqrt2", "euler-gamma"])
def test_truncated_inside_a_run_of_nines_is_certified_floor(name: str) -> None:
    _, dec = mpfr_digits(name, 10, 20000)
    start, length = _run_of(dec, "9")
    assert length >= 3  # a run of at least three 9s within 20,000 digits (found, not assumed)
    for cut in range(start, start + length):  # truncated at each 9 of the run
        _, got, _ = full.certified_digits(name, 10, 1, cut)
        assert got == dec[:cut]


def test_refused_above_the_precision_limit() -> None:
    with pytest.raises(UsageError, match="full evaluation"):
        full.certified_digits("e", 16, full.MAX_FULL_BITS // 4, 16)


def test_guess_and_checks_on_a_file_of_e(tmp_path: Path) -> None:
    whole, dec = mpfr_digits("e", 10, 3000)
    path = tmp_path / "e.txt"
    path.write_text(f"{whole}." + "\n".join(dec[i : i + 100] for i in range(0, 3000, 100)) + "\n")
    with open_digit_file(path) as df:
        assert df.constant == "e"
    _, hx = mpfr_digits("sqrt2", 16, 2000)
    hpath = tmp_path / "sqrt2.txt"
    hpath.write_text("1." + hx + "\n")
    with open_digit_file(hpath) as df:
        assert df.constant == "sqrt2"
    damaged = tmp_path / "sqrt2-bad.txt"
    damaged.write_text("1." + hx[:999] + ("0" if hx[999] != "0" else "1") + hx[1000:] + "\n")
    r = compare_files(str(hpath), str(damaged))
    assert [(run.start, run.right) for run in r.runs] == [(1000, "A")] and r.keep == "A"


def test_constants_json_lists_the_method(capsys) -> None:
    assert run(["constants", "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    by_name = {c["name"]: c for c in payload["constants"]}
    assert by_name["e"]["method"] == "full evaluation" and by_name["e"]["formulas"] == []
    assert "A001113" in by_name["e"]["evaluation"]["source"]
    assert by_name["pi"]["method"] == "digit extraction"


# --- full comparison for verify/locate (spotcheck/checks/full.py) -------------


def _decimal_file(tmp_path: Path, name: str, digits: str, whole: int) -> str:
    path = tmp_path / f"{name}.txt"
    path.write_text(f"{whole}." + "\n".join(digits[i : i + 100] for i in range(0, len(digits), 100)) + "\n")
    return str(path)


def test_full_verify_and_locate_find_every_wrong_digit(tmp_path: Path) -> None:
    from spotcheck.checks import full as checks_full
    from spotcheck.checks.common import open_checked
    from spotcheck.checks.request import CheckRequest

    whole, dec = mpfr_digits("euler-gamma", 10, 5000)
    bad = dec[:2999] + ("0" if dec[2999] != "0" else "1") + dec[3000:]
    path = _decimal_file(tmp_path, "gamma", bad, whole)
    df, facts = open_checked(path, CheckRequest())
    with df:
        assert checks_full.is_full(facts.constant)
        v = checks_full.verify_full(df, facts)
        loc = checks_full.locate_full(df, facts)
    assert v.exit_code == 1 and [c.position for c in v.checks if not c.match] == [3000]
    assert loc.first_mismatch == 3000 and loc.first_is_certain and loc.rest == "right-again"
    assert loc.expected[0] == dec[2999] and loc.found[0] == bad[2999]


def test_full_verify_truncated_inside_nines_matches(tmp_path: Path) -> None:
    from spotcheck.checks import full as checks_full
    from spotcheck.checks.common import open_checked
    from spotcheck.checks.request import CheckRequest

    whole, dec = mpfr_digits("sqrt2", 10, 20000)
    start, length = _run_of(dec, "9")
    path = _decimal_file(tmp_path, "sqrt2-cut", dec[: start + length - 2], whole)  # ends inside the 9s
    df, facts = open_checked(path, CheckRequest())
    with df:
        assert checks_full.verify_full(df, facts).exit_code == 0


def test_full_comparison_refused_above_the_estimate(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from spotcheck.checks import full as checks_full
    from spotcheck.checks.common import open_checked
    from spotcheck.checks.request import CheckRequest

    whole, dec = mpfr_digits("e", 10, 3000)
    df, facts = open_checked(_decimal_file(tmp_path, "e", dec, whole), CheckRequest())
    monkeypatch.setattr(checks_full, "memory_budget", lambda: 1000)
    with df, pytest.raises(UsageError, match=r"evaluating it in full: about .* GiB .*check a prefix") as info:
        checks_full.verify_full(df, facts)
    fits = getattr(info.value, "value", None)  # the CLI turns parameter "limit" into --limit N
    assert getattr(info.value, "parameter", None) == "limit" and isinstance(fits, int) and 0 < fits < 3000


def test_compare_decimal_copies_of_e_directly(tmp_path: Path) -> None:
    whole, dec = mpfr_digits("e", 10, 4000)

    def flip(d: str, p: int, step: int = 1) -> str:
        return d[: p - 1] + str((int(d[p - 1]) + step) % 10) + d[p:]

    a = _decimal_file(tmp_path, "a", flip(dec, 3500), whole)
    b = _decimal_file(tmp_path, "b", flip(flip(dec, 100), 3500, 2), whole)
    r = compare_files(a, b)
    assert r.method == "full evaluation"
    assert [(run.start, run.right, run.certified) for run in r.runs] == [
        (100, "A", dec[99]),
        (3500, "both wrong", dec[3499]),
    ]
    assert r.keep == "neither"
    # Truncated inside a run of 9s: the longer copy's extra digits are certified right.
    _, dec2 = mpfr_digits("sqrt2", 10, 20000)
    start, length = _run_of(dec2, "9")
    short = _decimal_file(tmp_path, "short", dec2[: start - 1], 1)
    cut = _decimal_file(tmp_path, "cut", dec2[: start + length - 2], 1)
    r = compare_files(short, cut)
    assert r.extra is not None and r.extra.right is True and r.keep == "B"
