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
    assert verify_file(str(path), samples=0, seed=1).exit_code == 1


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
    with pytest.raises(UsageError, match="--limit"):
        verify_file(str(path))
