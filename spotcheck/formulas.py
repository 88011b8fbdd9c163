"""Layer 1: BBP-type series as data.

A formula is ``scale * P(s, b, m, A)`` with

    P(s, b, m, A) = sum_{k>=0} b^(-k) * sum_{j=1..m} a_j / (m*k + j)^s

where ``b = +-2^e`` (a negative base makes the series alternate), the ``a_j``
are integers and ``scale`` is a rational number.  Nothing here computes; the
engine (layer 2) turns a :class:`Formula` into arithmetic.

Every built-in formula names its published source.  The test-suite checks each
one again numerically against mpmath (``tests/test_formulas.py``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction

from spotcheck.errors import FormulaError, UsageError

__all__ = [
    "Formula",
    "Constant",
    "Evaluation",
    "BUILTIN_CONSTANTS",
    "FULL_CONSTANTS",
    "get_constant",
    "register_constant",
    "constant_names",
]


@dataclass(frozen=True)
class Formula:
    """One BBP-type series ``scale * P(s, base, m, coefficients)``."""

    key: str
    """Short identifier, unique within its constant (``bbp``, ``bellard``...)."""
    s: int
    base: int
    """``+-2^e``; negative for an alternating series."""
    m: int
    coefficients: tuple[int, ...]
    """``a_1 .. a_m``."""
    scale: Fraction
    source: str
    """Published source of the formula."""
    title: str = ""

    def __post_init__(self) -> None:
        validate_formula_shape(self.s, self.base, self.m, self.coefficients, self.scale)

    @property
    def e(self) -> int:
        """Bits per term: ``|base| = 2^e``."""
        return abs(self.base).bit_length() - 1

    @property
    def alternating(self) -> bool:
        return self.base < 0

    @property
    def nonzero_terms(self) -> int:
        return sum(1 for a in self.coefficients if a)

    @property
    def cost_per_bit(self) -> float:
        """Head-sum terms per bit of offset: the figure that decides speed."""
        return self.nonzero_terms / self.e

    def notation(self) -> str:
        """The formula in P-notation, e.g. ``P(1, 16, 8, (4, 0, 0, -2, -1, -1, 0, 0))``."""
        coeffs = ", ".join(str(a) for a in self.coefficients)
        scale = "" if self.scale == 1 else f"{self.scale} * "
        return f"{scale}P({self.s}, {self.base}, {self.m}, ({coeffs}))"


def validate_formula_shape(s: object, base: object, m: object, coefficients: object, scale: object) -> None:
    """Raise :class:`FormulaError` unless the pieces form a convergent BBP-type series."""
    for name, value in (("s", s), ("b", base), ("m", m)):
        if not isinstance(value, int) or isinstance(value, bool):
            raise FormulaError(f"{name} must be an integer, got {value!r}")
    assert isinstance(s, int) and isinstance(base, int) and isinstance(m, int)
    if s < 1:
        raise FormulaError(f"s must be at least 1, got {s}")
    if m < 1:
        raise FormulaError(f"m must be at least 1, got {m}")
    mag = abs(base)
    if mag < 2 or mag & (mag - 1):
        if mag in (0, 1):
            raise FormulaError(f"base b = {base} does not make the series converge; use +-2^e with e >= 1")
        raise FormulaError(
            f"base b = {base} is not a power of two (+-2^e); binary digit extraction needs one"
        )
    if not isinstance(coefficients, tuple):
        raise FormulaError("coefficients must be a sequence of integers")
    if len(coefficients) != m:
        raise FormulaError(f"expected m = {m} coefficients, got {len(coefficients)}")
    for a in coefficients:
        if not isinstance(a, int) or isinstance(a, bool):
            raise FormulaError(f"coefficients must be integers, got {a!r}")
    if not any(coefficients):
        raise FormulaError("all coefficients are zero")
    if not isinstance(scale, Fraction) or scale == 0:
        raise FormulaError(f"scale must be a non-zero rational number, got {scale!r}")


@dataclass(frozen=True)
class Evaluation:
    """A constant with no digit-extraction formula, computed in full to the precision a request needs.

    The engine evaluates ``expression`` with python-flint's Arb (a ball, so
    digits are certified where both ends agree) and, where ``mpfr`` is given,
    gmpy2's MPFR serves as the second, independent reference.
    """

    key: str
    """``"arb"``: the method key (what a formula key is for the other constants)."""
    expression: str
    """The value in words, e.g. ``exp(1)``."""
    arb: str
    """How Arb computes it (python-flint call)."""
    mpfr: str | None
    """How MPFR computes it (gmpy2 call), when it can."""
    source: str
    """Published definition and a table of its digits."""

    def notation(self) -> str:
        second = f"; MPFR {self.mpfr} as the second reference" if self.mpfr else ""
        return f"full evaluation of {self.expression}: Arb {self.arb}{second}"


@dataclass(frozen=True)
class Constant:
    """A named constant with one or more BBP-type formulas, or a full evaluation (``evaluation``)."""

    name: str
    title: str
    formulas: tuple[Formula, ...]
    origin: str = "built-in"
    aliases: tuple[str, ...] = field(default=())
    evaluation: Evaluation | None = None
    """For constants with no digit-extraction formula (``formulas`` is empty)."""

    @property
    def method(self) -> str:
        """``digit extraction`` or ``full evaluation``."""
        return "full evaluation" if self.evaluation is not None else "digit extraction"

    def method_key(self, key: str | None = None) -> str:
        """The formula key (see :meth:`formula`), or the evaluation's key for a full-evaluation constant."""
        if self.evaluation is not None:
            if key not in (None, self.evaluation.key):
                raise UsageError(
                    f"{self.name} has no digit-extraction formula (it is evaluated in full: "
                    f"{self.evaluation.notation()}); the only method key is {self.evaluation.key!r}"
                )
            return self.evaluation.key
        return self.formula(key).key

    def formula(self, key: str | None = None) -> Formula:
        """The formula named ``key``, or the cheapest one when ``key`` is None."""
        if self.evaluation is not None:
            raise UsageError(
                f"{self.name} has no digit-extraction formula: it is evaluated in full "
                f"({self.evaluation.notation()})"
            )
        if key is None:
            return min(self.formulas, key=lambda f: f.cost_per_bit)
        for f in self.formulas:
            if f.key == key:
                return f
        known = ", ".join(f.key for f in self.formulas)
        raise UsageError(f"constant {self.name!r} has no formula {key!r} (known: {known})")


_BBP_1997 = (
    "D. H. Bailey, P. B. Borwein, S. Plouffe, 'On the rapid computation of various "
    "polylogarithmic constants', Math. Comp. 66 (1997) 903-913"
)
_BROADHURST_1998 = (
    "D. J. Broadhurst, 'Polylogarithmic ladders, hypergeometric series and the ten "
    "millionth digits of zeta(3) and zeta(5)', arXiv:math/9803067 (1998)"
)

PI_BBP = Formula(
    key="bbp",
    title="Bailey-Borwein-Plouffe",
    s=1,
    base=16,
    m=8,
    coefficients=(4, 0, 0, -2, -1, -1, 0, 0),
    scale=Fraction(1),
    source=_BBP_1997,
)

# Bellard's original form: pi = 2^-6 sum (-1)^k / 2^(10k) [-2^5/(4k+1) - 1/(4k+3)
# + 2^8/(10k+1) - 2^6/(10k+3) - 2^2/(10k+5) - 2^2/(10k+7) + 1/(10k+9)];
# over the common period 20k the denominators 4k+1, 4k+3 become 20k+5, 20k+15
# (numerators times 5) and 10k+j becomes 20k+2j (numerators times 2).
PI_BELLARD = Formula(
    key="bellard",
    title="Bellard",
    s=1,
    base=-(2**10),
    m=20,
    coefficients=(0, 512, 0, 0, -160, -128, 0, 0, 0, -8, 0, 0, 0, -8, -5, 0, 0, 2, 0, 0),
    scale=Fraction(1, 64),
    source="F. Bellard, 'A new formula to compute the n-th binary digit of pi' (1997)",
)

LOG2 = Formula(
    key="series",
    title="log 2 = sum 1/(k 2^k)",
    s=1,
    base=2,
    m=1,
    coefficients=(1,),
    scale=Fraction(1, 2),
    source="classical series sum_{k>=1} 1/(k 2^k); used in " + _BBP_1997,
)

LOG3 = Formula(
    key="series",
    title="log 3 = 2 artanh(1/2)",
    s=1,
    base=4,
    m=2,
    coefficients=(1, 0),
    scale=Fraction(1),
    source=(
        "log 3 = 2 artanh(1/2) = sum 4^-k/(2k+1); D. H. Bailey, 'A compendium of "
        "BBP-type formulas for mathematical constants' (2000, updated 2017)"
    ),
)

PI_SQUARED_64 = Formula(
    key="base64",
    title="pi^2, base 64",
    s=2,
    base=64,
    m=6,
    coefficients=(16, -24, -8, -6, 1, 0),
    scale=Fraction(9, 8),
    source=_BBP_1997 + "; used by D. H. Bailey, J. M. Borwein, A. Mattingly, G. Wightwick, 'The computation "
    "of previously inaccessible digits of pi^2 and Catalan's constant', Notices AMS 60 (2013) 844-854",
)

PI_SQUARED_16 = Formula(
    key="base16",
    title="pi^2, base 16",
    s=2,
    base=16,
    m=8,
    coefficients=(16, -16, -8, -16, -4, -4, 2, 0),
    scale=Fraction(1),
    source=_BBP_1997,
)

CATALAN = Formula(
    key="base4096",
    title="Catalan's constant, base 4096",
    s=2,
    base=4096,
    m=24,
    coefficients=(
        3072,
        -3072,
        -23040,
        12288,
        -768,
        9216,
        0,
        10368,
        2496,
        -192,
        0,
        768,
        -48,
        0,
        360,
        648,
        12,
        168,
        0,
        48,
        -39,
        0,
        0,
        0,
    ),
    scale=Fraction(1, 1024),
    source=_BROADHURST_1998,
)

ZETA3 = Formula(
    key="base4096",
    title="zeta(3), base 4096",
    s=3,
    base=4096,
    m=24,
    coefficients=(
        2048,
        -11264,
        -1024,
        11776,
        -512,
        4096,
        256,
        3456,
        128,
        -704,
        -64,
        -128,
        -32,
        -176,
        16,
        216,
        8,
        64,
        -4,
        46,
        -2,
        -11,
        1,
        0,
    ),
    scale=Fraction(1, 672),
    source=(
        _BROADHURST_1998 + " (proves binary BBP-type formulas for zeta(3)); this coefficient vector was "
        "found by an integer-relation search and is verified numerically in the tests"
    ),
)

ARCTAN_HALF = Formula(
    key="series",
    title="arctan(1/2), paired Taylor series",
    s=1,
    base=16,
    m=4,
    coefficients=(4, 0, -1, 0),
    scale=Fraction(1, 8),
    source="Taylor series of arctan(x) at x = 1/2, terms taken in pairs (classical)",
)

BUILTIN_CONSTANTS: dict[str, Constant] = {
    c.name: c
    for c in (
        Constant("pi", "ratio of a circle's circumference to its diameter", (PI_BBP, PI_BELLARD)),
        Constant("log2", "natural logarithm of 2", (LOG2,), aliases=("ln2",)),
        Constant("log3", "natural logarithm of 3", (LOG3,), aliases=("ln3",)),
        Constant("pi-squared", "pi^2", (PI_SQUARED_64, PI_SQUARED_16), aliases=("pi2",)),
        Constant("catalan", "Catalan's constant G", (CATALAN,)),
        Constant("zeta3", "Apery's constant zeta(3)", (ZETA3,)),
        Constant("arctan-half", "arctan(1/2)", (ARCTAN_HALF,)),
    )
}


def _full(
    name: str, title: str, expression: str, arb: str, mpfr: str | None, source: str, *aliases: str
) -> Constant:
    return Constant(
        name, title, (), aliases=aliases, evaluation=Evaluation("arb", expression, arb, mpfr, source)
    )


# Constants with no known BBP-type formula in base 2^e: the engine evaluates
# them in full (spotcheck/engine/full.py).  Sources: the definition, and the
# OEIS table of the decimal expansion that the tests check the first digits against.
FULL_CONSTANTS: dict[str, Constant] = {
    c.name: c
    for c in (
        _full(
            "e",
            "Euler's number, the base of the natural logarithm",
            "exp(1) = sum 1/k!",
            "arb(1).exp()",
            "exp(1)",
            "L. Euler, Introductio in analysin infinitorum (1748), ch. 7; OEIS A001113",
            "euler-number",
        ),
        _full(
            "sqrt2",
            "square root of 2",
            "sqrt(2)",
            "arb(2).sqrt()",
            "sqrt(2)",
            "OEIS A002193 (decimal expansion of the square root of 2)",
            "sqrt(2)",
        ),
        _full(
            "sqrt3",
            "square root of 3",
            "sqrt(3)",
            "arb(3).sqrt()",
            "sqrt(3)",
            "OEIS A002194 (decimal expansion of the square root of 3)",
            "sqrt(3)",
        ),
        _full(
            "golden-ratio",
            "the golden ratio (1 + sqrt 5)/2",
            "(1 + sqrt(5))/2",
            "(1 + arb(5).sqrt())/2",
            "(1 + sqrt(5))/2",
            "Euclid, Elements VI, definition 3 (extreme and mean ratio); OEIS A001622",
            "phi",
        ),
        _full(
            "euler-gamma",
            "the Euler-Mascheroni constant gamma",
            "lim (H_n - log n)",
            "arb.const_euler()",
            "const_euler()",
            "L. Euler, 'De progressionibus harmonicis observationes' (1734/35); OEIS A001620",
            "gamma",
        ),
        _full(
            "log10",
            "natural logarithm of 10",
            "log(10)",
            "arb(10).log()",
            "log(10)",
            "OEIS A002392 (decimal expansion of the natural logarithm of 10)",
            "ln10",
        ),
        _full(
            "zeta5",
            "zeta(5), the Riemann zeta function at 5",
            "zeta(5) = sum 1/k^5",
            "arb(5).zeta()",
            "zeta(5)",
            "L. Euler (the zeta series); OEIS A013663 (decimal expansion of zeta(5))",
        ),
    )
}

_registry: dict[str, Constant] = dict(BUILTIN_CONSTANTS) | FULL_CONSTANTS


def register_constant(constant: Constant) -> None:
    """Make a user-defined constant available by name (e.g. from a formula file)."""
    if constant.name in BUILTIN_CONSTANTS or constant.name in FULL_CONSTANTS:
        raise FormulaError(f"{constant.name!r} is a built-in constant; choose another name")
    _registry[constant.name] = constant


def constant_names() -> list[str]:
    return list(_registry)


def all_constants() -> list[Constant]:
    return list(_registry.values())


def get_constant(name: str) -> Constant:
    """Look a constant up by name or alias (case-insensitive)."""
    key = name.strip().lower()
    for c in _registry.values():
        if key == c.name or key in c.aliases:
            return c
    known = ", ".join(_registry)
    raise UsageError(f"unknown constant {name!r} (known: {known})")
