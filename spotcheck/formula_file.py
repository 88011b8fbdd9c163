"""Constants defined by the user in a TOML formula file.

A formula file defines one constant in a ``[constant]`` table, or several in
``[[constant]]`` tables, each with one or more ``[[constant.formula]]``
entries in the notation of :mod:`spotcheck.formulas`
(``scale * P(s, b, m, A)``)::

    [constant]
    name = "my-pi"                   # required: letters, digits, '-', '_'
    title = "pi, BBP series"         # optional (defaults to the name)
    aliases = ["mypi"]               # optional
    source = "Bailey, Borwein, Plouffe, Math. Comp. 66 (1997)"
    leading_digits = "3.243F6A88"    # optional hex, checked against the series

    [[constant.formula]]
    key = "bbp"                      # optional (default formula-1, formula-2, ...)
    s = 1
    b = 16                           # +-2^e; negative for an alternating series
    m = 8
    coefficients = [4, 0, 0, -2, -1, -1, 0, 0]
    scale = "1"                      # integer, or a string: "9/8", "2^-6", "1/2^10"
    source = "..."                   # optional; defaults to the constant's source

A ``source`` is required for every formula, either on the formula or on its
constant.  Loading checks the shape and types, that the series converges in a
power-of-two base, that the constant is positive, that all formulas of one
constant agree, and that ``leading_digits`` (when given) are the series' own
digits.  Every problem is a :class:`~spotcheck.errors.FormulaError` whose
one-line message starts with the file's path.  Library code: nothing here
prints.
"""

from __future__ import annotations

import os
import re
import stat
import tomllib
from collections.abc import Mapping
from fractions import Fraction
from pathlib import Path
from typing import Any

from spotcheck.errors import FileAccessError, FormulaError, SpotcheckError
from spotcheck.formulas import BUILTIN_CONSTANTS, Constant, Formula, all_constants, register_constant

__all__ = [
    "load_formula_file",
    "load_formula_text",
    "register_formula_file",
    "parse_scale",
]

# --- limits ------------------------------------------------------------------
# Sanity limits that keep a loaded file cheap to validate and to evaluate.
MAX_CONSTANTS = 64  # constants in one file
MAX_FORMULAS = 16  # formulas per constant
MAX_S = 16  # largest power s of the denominators
MAX_M = 4096  # longest coefficient period m
MAX_E = 1024  # largest e in |b| = 2^e
MAX_SCALE_EXPONENT = 4096  # largest |n| in a scale written with 2^n
MAX_LEADING_DIGITS = 256  # longest leading_digits string (hex digits after the point)
AGREEMENT_DIGITS = 32  # hex digits every formula of one constant must share
SIGN_BITS = 256  # fixed-point bits of the first evaluation, which settles the sign
MAX_FORMULA_FILE_BYTES = (
    4 << 20
)  # a file of a few constants, even with thousands of coefficients, is far smaller
# -----------------------------------------------------------------------------

_CONSTANT_KEYS = {"name", "title", "aliases", "source", "leading_digits", "formula"}
_FORMULA_KEYS = {"key", "title", "source", "s", "b", "m", "coefficients", "scale"}
_NAME = re.compile(r"[a-z][a-z0-9_-]{0,63}")
_FACTOR = r"(\d+)(?:\s*\^\s*([+-]?\d+))?"
_SCALE = re.compile(rf"\s*([+-])?\s*{_FACTOR}\s*(?:/\s*{_FACTOR})?\s*")
_LEADING = re.compile(r"(?:([0-9A-Fa-f]+)\.)?([0-9A-Fa-f]+)")


def _nonblocking(path: str, flags: int) -> int:
    return os.open(
        path, flags | getattr(os, "O_NONBLOCK", 0)
    )  # a pipe given as the file: no wait for a writer


def load_formula_file(path: str | Path) -> list[Constant]:
    """Read and validate a TOML formula file; return its constants (not registered).

    Each :class:`~spotcheck.formulas.Constant` has ``origin`` set to the path.
    Raises :class:`~spotcheck.errors.FileAccessError` when the file cannot be
    read and :class:`~spotcheck.errors.FormulaError` for any problem in it.
    """
    p = Path(path)
    try:
        with open(p, "rb", opener=_nonblocking) as f:
            st = os.fstat(f.fileno())
            if stat.S_ISDIR(st.st_mode):
                raise IsADirectoryError
            if not stat.S_ISREG(st.st_mode):
                raise FileAccessError(f"{p}: not a regular file, not a formula file")
            raw = f.read(MAX_FORMULA_FILE_BYTES + 1)
    except IsADirectoryError:
        raise FileAccessError(f"{p}: is a directory, not a formula file") from None
    except OSError as exc:
        if isinstance(exc, FileAccessError):
            raise
        raise FileAccessError(f"{p}: cannot read formula file ({exc.strerror or exc})") from None
    if len(raw) > MAX_FORMULA_FILE_BYTES:
        raise FormulaError(f"{p}: longer than any formula file (more than {MAX_FORMULA_FILE_BYTES:,} bytes)")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise FormulaError(f"{p}: not a TOML formula file (not UTF-8 text)") from None
    return load_formula_text(text, origin=str(p))


def load_formula_text(text: str, origin: str = "<string>") -> list[Constant]:
    """Validate formula-file content given as a string; ``origin`` names it in errors.

    >>> text = '''
    ... [constant]
    ... name = "my-pi"
    ... source = "Bailey, Borwein, Plouffe (1997)"
    ... leading_digits = "3.243F6A88"
    ... [[constant.formula]]
    ... s = 1
    ... b = 16
    ... m = 8
    ... coefficients = [4, 0, 0, -2, -1, -1, 0, 0]
    ... scale = 1
    ... '''
    >>> [c] = load_formula_text(text)
    >>> c.name, c.formula().key, c.formula().notation()
    ('my-pi', 'formula-1', 'P(1, 16, 8, (4, 0, 0, -2, -1, -1, 0, 0))')
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise FormulaError(f"{origin}: TOML syntax error: {_one_line(str(exc))}") from None
    extra = set(data) - {"constant"}
    if extra:
        raise FormulaError(f"{origin}: unknown top-level key {_first(extra)!r} (expected a [constant] table)")
    if "constant" not in data:
        raise FormulaError(f"{origin}: no [constant] table")
    tables = data["constant"]
    if isinstance(tables, dict):
        tables = [tables]
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        raise FormulaError(f"{origin}: 'constant' must be a [constant] table or [[constant]] tables")
    if not tables:
        raise FormulaError(f"{origin}: no constant defined")
    if len(tables) > MAX_CONSTANTS:
        raise FormulaError(f"{origin}: {len(tables)} constants in one file (at most {MAX_CONSTANTS})")
    constants: list[Constant] = []
    taken: dict[str, str] = {}  # name or alias -> constant name, within this file
    for i, table in enumerate(tables, 1):
        where = f"{origin}: constant {i}"
        c = _constant(table, where, origin)
        for label in (c.name, *c.aliases):
            if label in taken:
                raise FormulaError(f"{origin}: name {label!r} is defined twice in the file")
            taken[label] = c.name
        constants.append(c)
    return constants


def register_formula_file(path: str | Path) -> list[Constant]:
    """Load a formula file and make its constants available by name.

    After this, ``get_constant(name)`` and ``extract(name, ...)`` serve them.
    Loading the same file again replaces its constants; a name already taken
    by a constant from another file is a :class:`~spotcheck.errors.FormulaError`.
    Either every constant of the file is registered or none is.
    """
    constants = load_formula_file(path)
    for c in constants:
        for other in all_constants():
            if _same_file(other.origin, c.origin):  # the same file loaded again: replaced below
                continue
            labels = {other.name, *other.aliases}
            clash = next((label for label in (c.name, *c.aliases) if label in labels), None)
            if clash is not None:
                raise FormulaError(
                    f"{c.origin}: name {clash!r} is already taken by constant {other.name!r} from {other.origin}"
                )
    for c in constants:
        register_constant(c)
    return constants


def parse_scale(value: object) -> Fraction:
    """A formula file's ``scale``: a TOML integer, or a string like ``"9/8"``, ``"2^-6"``.

    >>> parse_scale("1/2^10"), parse_scale("-9/8"), parse_scale(3)
    (Fraction(1, 1024), Fraction(-9, 8), Fraction(3, 1))
    """
    if isinstance(value, bool) or not isinstance(value, int | str):
        raise ValueError(f'scale must be an integer or a string such as "9/8" or "2^-6", got {value!r}')
    if isinstance(value, int):
        result = Fraction(value)
    else:
        match = _SCALE.fullmatch(value)
        if not match:
            raise ValueError(f'scale {value!r} is not a rational number such as "9/8", "2^-6" or "1/2^10"')
        sign, num, num_exp, den, den_exp = match.groups()
        result = _power(num, num_exp, value)
        if den is not None:
            d = _power(den, den_exp, value)
            if d == 0:
                raise ValueError(f"scale {value!r} divides by zero")
            result /= d
        if sign == "-":
            result = -result
    if result == 0:
        raise ValueError("scale must not be zero")
    return result


# --- internals ---------------------------------------------------------------------


def _power(base: str, exponent: str | None, text: str) -> Fraction:
    if exponent is None:
        return Fraction(int(base))
    n = int(exponent)
    if abs(n) > MAX_SCALE_EXPONENT:
        raise ValueError(f"scale {text!r} has an exponent beyond +-{MAX_SCALE_EXPONENT}")
    b = int(base)
    if b == 0 and n < 0:
        raise ValueError(f"scale {text!r} divides by zero")
    return Fraction(b) ** n


def _same_file(a: str, b: str) -> bool:
    """Two origins name the same file, however the path was spelled."""
    return a == b or os.path.realpath(a) == os.path.realpath(b)


def _constant(table: dict[str, Any], where: str, origin: str) -> Constant:
    name = _name(table.get("name"), "name", where)
    where = f"{origin}: constant {name!r}"
    _check_keys(table, _CONSTANT_KEYS, where)
    title = _text(table.get("title", name), "title", where)
    source = _text(table["source"], "source", where) if "source" in table else None
    aliases_raw = table.get("aliases", [])
    if not isinstance(aliases_raw, list):
        raise FormulaError(f"{where}: 'aliases' must be a list of names")
    aliases = tuple(_name(a, "alias", where) for a in aliases_raw)
    for label in (name, *aliases):
        owner = _builtin_owner(label)
        if owner is not None:
            raise FormulaError(f"{where}: name {label!r} is taken by the built-in constant {owner!r}")
    if name in aliases:
        raise FormulaError(f"{where}: alias {name!r} repeats the name")

    entries = table.get("formula")
    if entries is None:
        raise FormulaError(f"{where}: no formula (add a [[constant.formula]] table)")
    if isinstance(entries, dict):
        entries = [entries]
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries) or not entries:
        raise FormulaError(f"{where}: 'formula' must be one or more [[constant.formula]] tables")
    if len(entries) > MAX_FORMULAS:
        raise FormulaError(f"{where}: {len(entries)} formulas (at most {MAX_FORMULAS})")
    formulas: list[Formula] = []
    for i, entry in enumerate(entries, 1):
        f = _formula(entry, i, source, f"{where}, formula {i}")
        if any(g.key == f.key for g in formulas):
            raise FormulaError(f"{where}: formula key {f.key!r} is used twice")
        formulas.append(f)

    value = _check_value(formulas, where)
    if "leading_digits" in table:
        _check_leading_digits(table["leading_digits"], formulas[0], value, where)
    return Constant(name=name, title=title, formulas=tuple(formulas), origin=origin, aliases=aliases)


def _formula(entry: dict[str, Any], index: int, default_source: str | None, where: str) -> Formula:
    _check_keys(entry, _FORMULA_KEYS, where)
    key = _name(entry.get("key", f"formula-{index}"), "key", where)
    where = f"{where} ({key!r})"
    for field in ("s", "b", "m", "coefficients", "scale"):
        if field not in entry:
            raise FormulaError(f"{where}: missing {field!r}")
    s, b, m = (_integer(entry[field], field, where) for field in ("s", "b", "m"))
    coeffs_raw = entry["coefficients"]
    if not isinstance(coeffs_raw, list):
        raise FormulaError(f"{where}: 'coefficients' must be a list of integers, got {coeffs_raw!r}")
    coefficients = []
    for j, a in enumerate(coeffs_raw, 1):
        if isinstance(a, bool) or not isinstance(a, int):
            raise FormulaError(f"{where}: coefficient a_{j} = {a!r} is not an integer")
        coefficients.append(a)
    if 1 <= m <= MAX_M and len(coefficients) != m:
        raise FormulaError(f"{where}: m = {m} but {len(coefficients)} coefficients are given")
    if s > MAX_S:
        raise FormulaError(f"{where}: s = {s} is too large (at most {MAX_S})")
    if m > MAX_M:
        raise FormulaError(f"{where}: m = {m} is too large (at most {MAX_M})")
    if abs(b).bit_length() - 1 > MAX_E:
        raise FormulaError(f"{where}: base b = {b} is too large (at most 2^{MAX_E})")
    try:
        scale = parse_scale(entry["scale"])
    except ValueError as exc:
        raise FormulaError(f"{where}: {exc}") from None
    source = _text(entry["source"], "source", where) if "source" in entry else default_source
    if source is None:
        raise FormulaError(f"{where}: missing 'source' (say where the formula comes from)")
    title = _text(entry.get("title", ""), "title", where)
    try:
        return Formula(
            key=key,
            s=s,
            base=b,
            m=m,
            coefficients=tuple(coefficients),
            scale=scale,
            source=source,
            title=title,
        )
    except FormulaError as exc:
        raise FormulaError(f"{where}: {exc}") from None


def _check_value(formulas: list[Formula], where: str) -> tuple[str, str]:
    """The constant's integer part and leading hex digits; every formula must agree."""
    # The engine evaluates; imported when needed so that loading this module stays cheap.
    from spotcheck.engine.api import leading_digits
    from spotcheck.engine.evaluate import value_bounds
    from spotcheck.engine.series import series_of

    first: tuple[str, str] | None = None
    for f in formulas:
        # One cheap certified evaluation first: a series whose value is zero (or
        # too close to it) would otherwise send the leading-digit search through
        # every precision it tries.
        lo, hi = value_bounds(series_of(f), SIGN_BITS)
        if hi < 0:
            raise FormulaError(f"{where}: formula {f.key!r} sums to a negative value; negate the scale")
        if lo <= 0:
            raise FormulaError(
                f"{where}: formula {f.key!r} sums to zero "
                f"(or to less than 2^-{SIGN_BITS - (hi - lo).bit_length()} in absolute value)"
            )
        try:
            value = leading_digits(f, 16, AGREEMENT_DIGITS)
        except SpotcheckError as exc:
            raise FormulaError(f"{where}: formula {f.key!r}: {exc}") from None
        if first is None:
            first = value
        elif value != first:
            raise FormulaError(
                f"{where}: formulas {formulas[0].key!r} and {f.key!r} disagree "
                f"({first[0]}.{first[1][:12]}... vs {value[0]}.{value[1][:12]}...)"
            )
    assert first is not None
    return first


def _check_leading_digits(raw: object, f: Formula, value: tuple[str, str], where: str) -> None:
    if not isinstance(raw, str):
        raise FormulaError(f"{where}: 'leading_digits' must be a string of hex digits, got {raw!r}")
    match = _LEADING.fullmatch(raw.strip().replace("_", ""))
    if not match:
        raise FormulaError(
            f'{where}: leading_digits {raw!r} are not hex digits (e.g. "3.243F6A88" or "243F6A88")'
        )
    whole, digits = match.group(1), match.group(2).upper()
    if len(digits) > MAX_LEADING_DIGITS:
        raise FormulaError(f"{where}: leading_digits has {len(digits)} digits (at most {MAX_LEADING_DIGITS})")
    whole_value, own = value
    if len(digits) > len(own):
        from spotcheck.engine.api import leading_digits

        whole_value, own = leading_digits(f, 16, len(digits))
    if whole is not None and int(whole, 16) != int(whole_value, 16):
        raise FormulaError(
            f"{where}: leading_digits integer part {whole.upper()} disagrees with the series' value {whole_value}"
        )
    if not own.startswith(digits):
        at = next(i for i, (x, y) in enumerate(zip(digits, own[: len(digits)], strict=True)) if x != y) + 1
        raise FormulaError(
            f"{where}: leading_digits {digits} disagree with the series' own digits "
            f"{whole_value}.{own[: len(digits)]} (first difference at digit {at})"
        )


def _check_keys(table: Mapping[str, Any], allowed: set[str], where: str) -> None:
    unknown = set(table) - allowed
    if unknown:
        raise FormulaError(
            f"{where}: unknown key {_first(unknown)!r} (expected: {', '.join(sorted(allowed))})"
        )


def _builtin_owner(label: str) -> str | None:
    for c in BUILTIN_CONSTANTS.values():
        if label == c.name or label in c.aliases:
            return c.name
    return None


def _name(value: object, field: str, where: str) -> str:
    if value is None:
        raise FormulaError(f"{where}: missing {field!r}")
    if not isinstance(value, str):
        raise FormulaError(f"{where}: {field} must be a string, got {value!r}")
    name = value.strip().lower()
    if not _NAME.fullmatch(name):
        raise FormulaError(
            f"{where}: {field} {value!r} must start with a letter and use only letters, digits, '-' and '_'"
        )
    return name


def _text(value: object, field: str, where: str) -> str:
    if not isinstance(value, str):
        raise FormulaError(f"{where}: {field} must be a string, got {value!r}")
    return _one_line(value.strip())


def _integer(value: object, field: str, where: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise FormulaError(f"{where}: {field} must be an integer, got {value!r}")
    return value


def _first(keys: set[str]) -> str:
    return sorted(keys)[0]


def _one_line(text: str) -> str:
    return " ".join(text.split())
