"""User formula files: loading, validation errors, registration and digits.

Digit references come from mpmath and python-flint (general-purpose
libraries) or from the built-in constants, each named beside its check.
"""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import mpmath
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from spotcheck import formulas
from spotcheck.engine.api import extract
from spotcheck.errors import FileAccessError, FormulaError
from spotcheck.formula_file import load_formula_file, load_formula_text, parse_scale, register_formula_file
from spotcheck.formulas import BUILTIN_CONSTANTS, Formula, get_constant
from tests.test_formulas import arb_certified_hex, mpmath_hex, mpmath_series

SAMPLES = Path(__file__).resolve().parent.parent / "samples" / "formulas"

PI_TOML = """
[constant]
name = "my-pi"
title = "pi via the 1997 base-16 series"
source = "Bailey, Borwein, Plouffe, Math. Comp. 66 (1997) 903-913"
leading_digits = "243F6A88"

[[constant.formula]]
key = "base16"
s = 1
b = 16
m = 8
coefficients = [4, 0, 0, -2, -1, -1, 0, 0]
scale = "1"
"""


@pytest.fixture(autouse=True)
def private_registry(monkeypatch: pytest.MonkeyPatch) -> None:
    """Each test registers into its own copy of the registry."""
    monkeypatch.setattr(formulas, "_registry", dict(formulas._registry))


def write(tmp_path: Path, text: str, name: str = "f.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def toml_of(name: str, f: Formula) -> str:
    """A formula file for one built-in formula, written the way a user would."""
    coeffs = ", ".join(str(a) for a in f.coefficients)
    return (
        f'[constant]\nname = "{name}"\nsource = "copied from the built-in {f.key}"\n'
        f'[[constant.formula]]\nkey = "{f.key}"\ns = {f.s}\nb = {f.base}\nm = {f.m}\n'
        f'coefficients = [{coeffs}]\nscale = "{f.scale}"\n'
    )


# --- a file equal to a built-in formula ---------------------------------------------


def test_pi_file_gives_the_builtin_digits(tmp_path: Path) -> None:
    path = write(tmp_path, PI_TOML)
    [c] = register_formula_file(path)
    assert c.name == "my-pi" and c.origin == str(path)
    assert c.title == "pi via the 1997 base-16 series"
    f = c.formula()
    builtin = get_constant("pi").formula("bbp")
    assert (f.s, f.base, f.m, f.coefficients, f.scale) == (
        builtin.s,
        builtin.base,
        builtin.m,
        builtin.coefficients,
        builtin.scale,
    )
    for position, count in [(1, 24), (100, 16), (1000, 16), (10_001, 16), (65_537, 16)]:
        # reference: the built-in pi (BBP formula), checked against mpmath and Arb in test_formulas.py
        assert (
            extract("my-pi", position, count).digits == extract("pi", position, count, formula="bbp").digits
        )
    # reference: mpmath.pi (general-purpose library), exact hex conversion
    assert extract("my-pi", 1, 1000).digits == mpmath_hex("pi", 1000)[1]


@pytest.mark.parametrize(
    ("name", "key"),
    [(c.name, f.key) for c in BUILTIN_CONSTANTS.values() for f in c.formulas],
)
def test_every_builtin_formula_round_trips_through_a_file(name: str, key: str) -> None:
    f = BUILTIN_CONSTANTS[name].formula(key)
    [c] = load_formula_text(toml_of("copy-of-it", f))
    g = c.formula()
    assert (g.key, g.s, g.base, g.m, g.coefficients, g.scale) == (
        f.key,
        f.s,
        f.base,
        f.m,
        f.coefficients,
        f.scale,
    )
    # reference: the built-in formula's digits (the built-ins are checked against mpmath and Arb)
    assert extract(g, 4001, 24).digits == extract(name, 4001, 24, formula=key).digits


# --- sample files ---------------------------------------------------------------------


def test_sample_pi_file_matches_mpmath_and_arb() -> None:
    [c] = load_formula_file(SAMPLES / "pi-bbp.toml")
    assert c.name == "pi-from-file"
    assert [f.key for f in c.formulas] == ["bbp", "bellard"]
    assert c.formula().key == "bellard"  # the cheaper one, as for the built-in pi
    ref = mpmath_hex("pi", 1200)[1]  # reference: mpmath.pi (general-purpose library)
    for f in c.formulas:
        assert extract(f, 1, 1200).digits == ref
        # reference: python-flint arb.pi (general-purpose ball arithmetic)
        assert extract(f, 30_001, 16).digits == arb_certified_hex("pi", 30_001, 16)


def test_sample_arctan_third_file_matches_mpmath() -> None:
    [c] = load_formula_file(SAMPLES / "arctan-third.toml")
    f = c.formula()
    with mpmath.workdps(1110):
        reference = mpmath.atan(mpmath.mpf(1) / 3)  # reference: mpmath.atan (general-purpose library)
        assert abs(mpmath_series(f, 1100) - reference) < mpmath.mpf(10) ** -1000
    with mpmath.workprec(4 * 1208 + 64):
        v = int(
            mpmath.floor(mpmath.ldexp(mpmath.atan(mpmath.mpf(1) / 3), 4 * 1208))
        )  # reference: mpmath.atan
    digits = format(v, "X").zfill(1208)
    assert digits[1200:].strip("0") and digits[1200:].strip("F")  # guard digits settle the compared ones
    assert extract(f, 1, 1200).digits == digits[:1200]


def test_register_sample_files_makes_them_available() -> None:
    registered = [c.name for p in sorted(SAMPLES.glob("*.toml")) for c in register_formula_file(p)]
    assert sorted(registered) == ["arctan-third", "pi-from-file"]
    assert get_constant("PI-FILE").name == "pi-from-file"  # alias, case-insensitive
    assert "arctan-third" in formulas.constant_names()
    # reference: built-in pi
    assert extract("pi-file", 777, 20).digits == extract("pi", 777, 20).digits


# --- registration ------------------------------------------------------------------------


def test_register_same_file_twice_replaces_it(tmp_path: Path) -> None:
    path = write(tmp_path, PI_TOML)
    register_formula_file(path)
    register_formula_file(path)
    assert formulas.constant_names().count("my-pi") == 1


def test_register_name_taken_by_another_file(tmp_path: Path) -> None:
    register_formula_file(write(tmp_path, PI_TOML, "a.toml"))
    other = write(tmp_path, PI_TOML, "b.toml")
    with pytest.raises(
        FormulaError, match=r"b\.toml: name 'my-pi' is already taken by constant 'my-pi' from .*a\.toml"
    ):
        register_formula_file(other)


def test_several_constants_in_one_file() -> None:
    text = toml_of("first", BUILTIN_CONSTANTS["log2"].formula()).replace("[constant]", "[[constant]]")
    text += toml_of("second", BUILTIN_CONSTANTS["log3"].formula()).replace("[constant]", "[[constant]]")
    first, second = load_formula_text(text)
    assert (first.name, second.name) == ("first", "second")
    # reference: mpmath.log (general-purpose library)
    assert extract(second.formula(), 1, 64).digits == mpmath_hex("log3", 64)[1]


def test_defaults_and_accepted_spellings() -> None:
    text = PI_TOML.replace('key = "base16"\n', "").replace('"243F6A88"', '" 3.243f6a88_85a3 "')
    text = text.replace('name = "my-pi"', 'name = "My-Pi"')
    [c] = load_formula_text(text)
    assert c.name == "my-pi"
    assert c.formula().key == "formula-1"
    assert c.formula().source.startswith("Bailey")  # inherited from the constant


# --- malformed files -------------------------------------------------------------------

MINIMAL = """
[constant]
name = "x"
source = "test"
[[constant.formula]]
s = 1
b = 2
m = 1
coefficients = [1]
scale = "1/2"
"""

# The zero relation of the BBP paper, from memory; test_zero_relation_is_zero checks it with mpmath.
ZERO_RELATION = (-8, 8, 4, 8, 2, 2, -1, 0)


def _zero_relation_file() -> str:
    return MINIMAL.replace(
        "b = 2\nm = 1\ncoefficients = [1]", f"b = 16\nm = 8\ncoefficients = {list(ZERO_RELATION)}"
    )


MALFORMED = [
    # (file text, the problem the message must name)
    ('[constant\nname = "x"', "TOML syntax error"),
    ("", "no \\[constant\\] table"),
    ('title = "x"', "unknown top-level key 'title'"),
    ("constant = 3", "'constant' must be a \\[constant\\] table"),
    (MINIMAL.replace('name = "x"\n', ""), "missing 'name'"),
    (MINIMAL.replace('name = "x"', "name = 3"), "name must be a string"),
    (MINIMAL.replace('name = "x"', 'name = "my pi"'), "name 'my pi' must start with a letter"),
    (MINIMAL.replace('name = "x"', 'name = "1x"'), "name '1x' must start with a letter"),
    (MINIMAL.replace('name = "x"', 'name = "pi"'), "name 'pi' is taken by the built-in constant 'pi'"),
    (MINIMAL.replace('name = "x"', 'name = "Catalan"'), "name 'catalan' is taken by the built-in"),
    (
        MINIMAL.replace('name = "x"', 'name = "x"\naliases = ["ln2"]'),
        "name 'ln2' is taken by the built-in constant 'log2'",
    ),
    (MINIMAL.replace('name = "x"', 'name = "x"\naliases = "y"'), "'aliases' must be a list"),
    (MINIMAL.replace('source = "test"\n', ""), "missing 'source'"),
    (MINIMAL.replace('source = "test"', "source = 1"), "source must be a string"),
    (MINIMAL.replace('source = "test"', 'source = "test"\ncolour = "red"'), "unknown key 'colour'"),
    (MINIMAL.replace("coefficients", "coeffs"), "unknown key 'coeffs'"),
    (MINIMAL.split("[[constant.formula]]")[0], "no formula"),
    (MINIMAL.replace("s = 1\n", ""), "missing 's'"),
    (MINIMAL.replace("b = 2\n", ""), "missing 'b'"),
    (MINIMAL.replace("m = 1\n", ""), "missing 'm'"),
    (MINIMAL.replace("coefficients = [1]\n", ""), "missing 'coefficients'"),
    (MINIMAL.replace('scale = "1/2"\n', ""), "missing 'scale'"),
    (MINIMAL.replace("s = 1", "s = 1.0"), "s must be an integer, got 1.0"),
    (MINIMAL.replace("s = 1", "s = 0"), "s must be at least 1"),
    (MINIMAL.replace("s = 1", "s = 99"), "s = 99 is too large"),
    (MINIMAL.replace("b = 2", 'b = "2"'), "b must be an integer, got '2'"),
    (MINIMAL.replace("b = 2", "b = 10"), "base b = 10 is not a power of two"),
    (MINIMAL.replace("b = 2", "b = -12"), "base b = -12 is not a power of two"),
    (MINIMAL.replace("b = 2", "b = 1"), "base b = 1 does not make the series converge"),
    (MINIMAL.replace("b = 2", "b = -1"), "base b = -1 does not make the series converge"),
    (MINIMAL.replace("b = 2", "b = 0"), "base b = 0 does not make the series converge"),
    (MINIMAL.replace("m = 1", "m = 0"), "m must be at least 1"),
    (MINIMAL.replace("m = 1", "m = 2"), "m = 2 but 1 coefficients are given"),
    (MINIMAL.replace("[1]", "[1, 0]"), "m = 1 but 2 coefficients are given"),
    (MINIMAL.replace("[1]", "[0.5]"), "coefficient a_1 = 0.5 is not an integer"),
    (MINIMAL.replace("[1]", "[1.0]"), "coefficient a_1 = 1.0 is not an integer"),
    (MINIMAL.replace("[1]", '["1"]'), "coefficient a_1 = '1' is not an integer"),
    (MINIMAL.replace("[1]", "[true]"), "coefficient a_1 = True is not an integer"),
    (MINIMAL.replace("[1]", "1"), "'coefficients' must be a list of integers"),
    (MINIMAL.replace("[1]", "[0]"), "all coefficients are zero"),
    (MINIMAL.replace('"1/2"', '"1/0"'), "divides by zero"),
    (MINIMAL.replace('"1/2"', '"half"'), "scale 'half' is not a rational number"),
    (MINIMAL.replace('"1/2"', '"1/2.5"'), "scale '1/2.5' is not a rational number"),
    (MINIMAL.replace('"1/2"', "0.5"), "scale must be an integer or a string"),
    (MINIMAL.replace('"1/2"', '"0"'), "scale must not be zero"),
    (MINIMAL.replace('"1/2"', '"2^99999"'), "exponent beyond"),
    (MINIMAL.replace('"1/2"', '"-1/2"'), "sums to a negative value"),
    (_zero_relation_file(), "sums to zero"),
    (
        MINIMAL.replace('source = "test"', 'source = "test"\nleading_digits = "B17217F8"'),
        "disagree with the series' own digits",
    ),
    (
        MINIMAL.replace('source = "test"', 'source = "test"\nleading_digits = "1.B17217F7"'),
        "integer part 1 disagrees",
    ),
    (MINIMAL.replace('source = "test"', 'source = "test"\nleading_digits = "0.B1G"'), "are not hex digits"),
    (
        MINIMAL.replace('source = "test"', 'source = "test"\nleading_digits = 123'),
        "'leading_digits' must be a string",
    ),
    (
        (MINIMAL + MINIMAL.split('source = "test"\n')[1]).replace(
            "[[constant.formula]]", '[[constant.formula]]\nkey = "a"'
        ),
        "formula key 'a' is used twice",
    ),
    (
        MINIMAL
        + '[[constant.formula]]\nkey = "other"\ns = 1\nb = 4\nm = 2\ncoefficients = [1, 0]\nscale = 1\n',
        "formulas 'formula-1' and 'other' disagree",
    ),
    (MINIMAL.replace("[constant]", "[[constant]]") * 2, "name 'x' is defined twice"),
]


@pytest.mark.parametrize(("text", "problem"), MALFORMED, ids=[p for _, p in MALFORMED])
def test_malformed_file_raises_formula_error(tmp_path: Path, text: str, problem: str) -> None:
    path = write(tmp_path, text)
    with pytest.raises(FormulaError, match=problem) as info:
        load_formula_file(path)
    message = str(info.value)
    assert message.startswith(f"{path}: ")
    assert "\n" not in message


def test_minimal_file_is_valid() -> None:
    [c] = load_formula_text(MINIMAL)
    # reference: mpmath.log (general-purpose library): the minimal file is log 2
    assert extract(c.formula(), 1, 40).digits == mpmath_hex("log2", 40)[1]


def test_leading_digits_may_be_longer_than_the_agreement_check() -> None:
    ref = mpmath_hex("log2", 200)[1]  # reference: mpmath.log (general-purpose library)
    load_formula_text(MINIMAL.replace('source = "test"', f'source = "test"\nleading_digits = "0.{ref}"'))
    bad = ref[:150] + ("0" if ref[150] != "0" else "1") + ref[151:]
    with pytest.raises(FormulaError, match="first difference at digit 151"):
        load_formula_text(MINIMAL.replace('source = "test"', f'source = "test"\nleading_digits = "{bad}"'))


def test_zero_relation_is_zero() -> None:
    # reference: mpmath (general-purpose library) sums the relation to 300 digits
    f = Formula("zero", 1, 16, 8, ZERO_RELATION, Fraction(1), "test")
    with mpmath.workdps(310):
        assert abs(mpmath_series(f, 300)) < mpmath.mpf(10) ** -295


def test_file_that_is_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "f.toml"
    path.write_bytes(b"\xff\xfe[constant]")
    with pytest.raises(FormulaError, match="not UTF-8"):
        load_formula_file(path)


def test_missing_file_and_directory(tmp_path: Path) -> None:
    with pytest.raises(FileAccessError, match="cannot read formula file"):
        load_formula_file(tmp_path / "absent.toml")
    with pytest.raises(FileAccessError, match="is a directory"):
        load_formula_file(tmp_path)


# --- scale strings ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "value"),
    [
        ("1", Fraction(1)),
        (7, Fraction(7)),
        ("9/8", Fraction(9, 8)),
        (" -3 / 4 ", Fraction(-3, 4)),
        ("2^-6", Fraction(1, 64)),
        ("1/2^10", Fraction(1, 1024)),
        ("3^2/2^3", Fraction(9, 8)),
    ],
)
def test_parse_scale(text: object, value: Fraction) -> None:
    assert parse_scale(text) == value


@settings(max_examples=50, deadline=None)
@given(st.fractions().filter(lambda q: q != 0))
def test_parse_scale_round_trips_fractions(q: Fraction) -> None:
    assert parse_scale(f"{q.numerator}/{q.denominator}") == q
