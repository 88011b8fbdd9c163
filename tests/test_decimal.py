"""Decimal digit files through radix conversion (verify and locate), with gmpy2/MPFR's pi as truth."""

from __future__ import annotations

import itertools
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.checks import decimal as decimal_mod
from spotcheck.checks import locate_file, scan_file, verify_file
from spotcheck.engine import backend
from spotcheck.errors import UsageError

from .reference import pi_decimal

N = 100_000
EXAMPLES = 6 if backend.BACKEND == "c" else 2
_counter = itertools.count()


def truth() -> str:
    return pi_decimal(N)  # reference: gmpy2/MPFR const_pi (cached)


def write_dec(directory: Path, digits: str, *, width: int = 50, int_part: str = "3.") -> Path:
    path = directory / f"pi-dec-{next(_counter)}.txt"
    body = "\n".join(digits[i : i + width] for i in range(0, len(digits), width))
    path.write_text(int_part + body + "\n")
    return path


@pytest.fixture(scope="module")
def workdir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("decimal")


def test_correct_decimal_file_verifies(workdir) -> None:
    path = write_dec(workdir, truth())
    v = verify_file(str(path), samples=3, seed=5)
    assert v.exit_code == 0, [c for c in v.checks if not c.match]
    assert v.method == "radix conversion" and v.file.base == 10
    tail = [c for c in v.checks if c.kind == "tail"]
    # one hex window determined by the whole value, one exact check of the last decimal digits
    assert {c.base for c in tail} == {10, 16}
    hex_tail = next(c for c in tail if c.base == 16)
    assert hex_tail.prefix == N and hex_tail.position + len(hex_tail.expected) - 1 > 0.8 * N
    loc = locate_file(str(path))
    assert loc.exit_code == 0 and loc.first_mismatch is None
    s = scan_file(str(path))
    assert s.exit_code == 0 and s.digits_compared == N


@settings(max_examples=EXAMPLES)
@given(position=st.integers(1, N), delta=st.integers(1, 9))
@example(position=1, delta=1)
@example(position=N, delta=1)
@example(position=N - 1, delta=9)
@example(position=N - 3, delta=5)
@example(position=777, delta=2)
def test_one_changed_digit_is_found_exactly(workdir, position, delta) -> None:
    digits = truth()
    changed = digits[: position - 1] + str((int(digits[position - 1]) + delta) % 10) + digits[position:]
    path = write_dec(workdir, changed)
    # a wrong first digit hides the constant from detection: name it
    v = verify_file(str(path), samples=0, seed=1, constant="pi")
    assert v.exit_code == 1
    loc = locate_file(str(path), constant="pi")
    assert loc.first_mismatch == position
    assert loc.how == "prefix bisection" and loc.first_is_certain
    assert loc.found[0] == changed[position - 1]
    assert loc.expected[0] == digits[position - 1]
    assert loc.expected == digits[position - 1 : position - 1 + len(loc.expected)]


@pytest.mark.parametrize("n", range(760, 770))
def test_run_of_nines_is_no_false_mismatch(workdir, n) -> None:
    # Decimal digits 762-767 of pi are six 9s (common knowledge, no single source;
    # checked here against MPFR).  A file truncated inside the run sits right
    # below a carry: a careless conversion would call it wrong.
    assert truth()[761:767] == "999999"
    path = write_dec(workdir, truth()[:n])
    v = verify_file(str(path), samples=2, seed=n)
    assert v.exit_code == 0, [c for c in v.checks if not c.match]
    loc = locate_file(str(path))
    assert loc.first_mismatch is None


def test_rounded_last_digit_is_reported_as_that_digit(workdir) -> None:
    # Truncated at 766 digits the file ends inside the run of 9s; a file that
    # was rounded up instead carries into the digit before the run (761).
    digits = truth()[:766]
    rounded = str(int(digits) + 1).zfill(766)
    first = next(i for i, (a, b) in enumerate(zip(digits, rounded)) if a != b) + 1
    assert first == 761 and rounded[761:] == "00000"
    loc = locate_file(str(path := write_dec(workdir, rounded)))
    assert loc.first_mismatch == 761
    assert loc.expected.startswith(digits[760:766]) and loc.found.startswith(rounded[760:766])
    assert loc.rounded_from == 761  # named as rounding: 760 right, then ...+1 carried through the 9s
    v = verify_file(str(path), samples=0, seed=1)
    assert v.exit_code == 1 and v.rounded_from == 761


def test_decimal_samples_and_limit(workdir) -> None:
    digits = truth()
    bad = digits[:90_000] + ("1" if digits[90_000] != "1" else "2") + digits[90_001:]
    path = write_dec(workdir, bad)
    assert verify_file(str(path), limit=90_000, samples=3, seed=2).exit_code == 0
    v = verify_file(str(path), limit=95_000, samples=3, seed=2)
    assert v.exit_code == 1
    assert v.file.checked == 95_000 and v.file.count == N


def test_conversion_refused_when_memory_is_short(workdir, monkeypatch) -> None:
    path = write_dec(workdir, truth()[:5000])
    monkeypatch.setattr(decimal_mod, "memory_budget", lambda: 1000)
    with pytest.raises(UsageError, match="a prefix of") as info:
        verify_file(str(path))
    assert info.value.parameter == "limit" and info.value.value >= 1 and "--" not in str(info.value)


def _cli(capsys, *args: str) -> tuple[int, str]:
    from spotcheck.cli import run

    code = run([str(a) for a in args])
    return code, capsys.readouterr().out


def test_verify_brackets_the_first_wrong_decimal_digit(workdir, capsys) -> None:
    digits = list(truth())
    digits[1233] = str((int(digits[1233]) + 3) % 10)  # digit 1,234 wrong
    path = write_dec(workdir, "".join(digits))
    code, out = _cli(capsys, "verify", path, "--seed", "2", "--samples", "12")
    assert code == 1
    first = out.splitlines()[0]
    assert first.startswith("MISMATCH  the first wrong decimal digit")
    v = verify_file(str(path), seed=2, samples=12)
    assert v.first_wrong_bracket is not None
    lo, hi = v.first_wrong_bracket
    assert lo <= 1234 <= hi  # the bracket holds the damaged digit
    assert f"{lo:,}" in first and f"{hi:,}" in first


def test_decimal_report_has_hex_positions_only_in_hex_rows(workdir, capsys) -> None:
    import re

    digits = list(truth())
    digits[2999] = str((int(digits[2999]) + 1) % 10)
    path = write_dec(workdir, "".join(digits))
    for command in ("verify", "locate"):
        code, out = (
            _cli(capsys, command, path, "--seed", "4") if command == "verify" else _cli(capsys, command, path)
        )
        assert code == 1
        table = [
            ln
            for ln in out.splitlines()
            if re.match(r"^(tail|head|sample|user|bisection|confirm|prefix)", ln)
        ]
        assert table, out
        for row in table:
            numbers = re.findall(
                r"(?<![\w.])\d{1,3}(?:,\d{3})+|(?<![\w.])\d+(?![\w.])",
                row.split()[1 if "(hex)" not in row else 2],
            )
            if "(hex)" in row:
                assert " hex " in f" {row} ", row  # the position cell says hex
            else:
                assert "hex" not in row and numbers, row  # a decimal position


@pytest.mark.parametrize("n", [700, 1000, 2500])
def test_rounded_last_digit_is_named_as_rounding(workdir, capsys, n) -> None:
    true = truth()[: n + 40]
    # the first length >= n whose next true digit is 5..8 and last digit is not 9: rounding up changes one digit
    m = next(k for k in range(n, n + 40) if true[k] in "5678" and true[k - 1] != "9")
    rounded = true[: m - 1] + str(int(true[m - 1]) + 1)
    path = write_dec(workdir, rounded)
    v = verify_file(str(path), seed=1, samples=2)
    assert v.exit_code == 1 and v.first_wrong_bracket == (m, m) and v.rounded_from == m
    code, out = _cli(capsys, "verify", path, "--seed", "1", "--samples", "2")
    assert code == 1 and "rounded up" in out.splitlines()[0]
    code, out = _cli(capsys, "locate", path)
    assert (
        code == 1 and out.startswith(f"MISMATCH  first wrong digit at position {m:,}") and "rounded up" in out
    )
    truncated_wrong = true[: m - 1] + str((int(true[m - 1]) + 2) % 10)  # not a rounding
    v = verify_file(str(write_dec(workdir, truncated_wrong)), seed=1, samples=2)
    assert v.exit_code == 1 and v.rounded_from is None


# --- where the conversion runs, and the fast decimal end ----------------------------------------


@pytest.fixture
def child_conversions(monkeypatch):
    """Every conversion of a file of 1,000 digits or more in a child process (as at 10^8)."""
    from spotcheck.checks import radix

    monkeypatch.setattr(radix, "CHILD_DIGITS", 1000)
    return radix


def test_child_conversion_gives_the_inline_results(workdir, child_conversions) -> None:
    digits = truth()[:20_000]
    damaged = digits[:12_344] + ("0" if digits[12_344] != "0" else "1") + digits[12_345:]
    for text, first in ((digits, None), (damaged, 12_345)):
        path = write_dec(workdir, text)
        v = verify_file(str(path), samples=2, seed=3)
        loc = locate_file(str(path))
        assert loc.first_mismatch == first and v.exit_code == (first is not None)
        if first is not None:
            assert v.first_wrong_bracket is not None and v.first_wrong_bracket[0] <= first
            assert loc.expected[0] == digits[first - 1] and loc.found[0] == damaged[first - 1]
        inline = child_conversions.InlineConverter(text)
        child = child_conversions.ChildConverter(lambda t=text: iter([(1, t)]), len(text))
        from spotcheck.checks.common import HexOracle

        oracle = HexOracle("pi", "bellard")
        try:
            for length, basis in ((len(text), None), (15_000, None), (12_360, 12_344), (9_000, None)):
                a = inline.check(length, oracle.digits, 16, "x", basis=basis)
                b = child.check(length, oracle.digits, 16, "x", basis=basis)
                assert a == b
            assert child.check(len(text), oracle.digits, 16, "x", suffix="0") == inline.check(
                len(text), oracle.digits, 16, "x", suffix="0"
            )
        finally:
            child.close()
        assert child.peak_bytes is not None and child.peak_bytes > 0


def test_child_error_is_raised_in_the_caller(child_conversions) -> None:
    from spotcheck.checks.common import HexOracle

    child = child_conversions.ChildConverter(lambda: iter([(1, "14159x" * 300)]), 1800)
    try:
        with pytest.raises(ValueError):  # gmpy2 refuses a non-digit: raised here, not lost in the child
            child.check(1800, HexOracle("pi", "bellard").digits, 16, "tail")
    finally:
        child.close()


@settings(max_examples=4 * EXAMPLES, deadline=None)
@given(length=st.integers(60, 3000), back=st.integers(0, 40), delta=st.integers(0, 9))
@example(length=766, back=0, delta=0)  # ends inside the run of 9s: the fast test cannot settle it
@example(length=767, back=0, delta=1)
@example(length=3000, back=0, delta=1)  # the last digit
def test_decimal_end_matches_iff_every_digit_is_right(length, back, delta) -> None:
    # Truth: MPFR's pi (tests/reference.py).  Damage in the last digits, where only the decimal
    # end (fast test or exact recomputation) can see it.
    from spotcheck.checks.common import HexOracle

    digits = truth()[:length]
    q = max(1, length - back)
    text = digits[: q - 1] + str((int(digits[q - 1]) + delta) % 10) + digits[q:]
    out = decimal_mod.prefix_check(text, HexOracle("pi", "bellard"), 16, "tail")
    assert out.match == (text == digits)
    if text != digits and out.window is not None and out.window.match:
        assert out.first_wrong == q


def _vector_kernel() -> bool:
    if backend.BACKEND != "c":
        return False
    from spotcheck.engine import _kernel

    return _kernel.active_path() not in ("portable", "scalar")


@pytest.mark.skipif(
    not _vector_kernel(),
    reason="on the twin and the kernel's portable and scalar paths the engine window computed ahead "
    "(in this process) outlasts the child's conversion",
)
def test_progress_moves_during_a_long_conversion(workdir) -> None:
    # 4*10^6 digits (pi's first 1,000 from MPFR, then seeded random ones): the conversion runs in
    # the child for a good part of a second, and the bar moves meanwhile, from a calibrated estimate.
    import random

    table = bytes(48 + i % 10 for i in range(256))
    n = 4_000_000
    text = truth()[:1000] + random.Random(4).randbytes(n - 1000).translate(table).decode("ascii")
    path = write_dec(workdir, text, width=100)
    said: list[tuple[int, int]] = []
    v = verify_file(str(path), samples=0, seed=1, progress=lambda d, t: said.append((d, t)))
    assert v.exit_code == 1  # the random digits are no pi
    total = said[-1][1]
    assert said[-1][0] == total
    assert any(0 < d < total for d, _ in said), said  # ticks inside the tail's conversion
    assert [d for d, _ in said] == sorted(d for d, _ in said)  # never backwards


def test_a_conversion_child_that_dies_is_one_clear_error(child_conversions) -> None:
    # As when the kernel's out-of-memory killer ends the child mid-conversion.
    import os
    import signal

    from spotcheck.checks.common import HexOracle

    oracle = HexOracle("pi", "bellard")
    digits = truth()[:50_000]
    child = child_conversions.ChildConverter(lambda: iter([(1, digits)]), len(digits))

    def engine(position: int, count: int) -> str:
        os.kill(child._proc.pid, signal.SIGKILL)  # asked for the window ahead: the child is converting
        return oracle.digits(position, count)

    with pytest.raises(UsageError, match="stopped .*out of memory") as info:
        child.check(len(digits), engine, 16, "tail")
    assert info.value.parameter == "limit" and child._proc is None  # cleaned up
