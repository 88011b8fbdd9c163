"""verify, locate and scan on hex digit files made from gmpy2/MPFR's pi, with damage chosen by hypothesis."""

from __future__ import annotations

import hashlib
import itertools
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.checks import locate_file, scan_file, verify_file
from spotcheck.checks.scan import merge_runs
from spotcheck.checks.stats import scattered_damage_bound
from spotcheck.engine import backend
from spotcheck.errors import UsageError

from .reference import pi_hex

N = 100_000
EXAMPLES = 6 if backend.BACKEND == "c" else 2  # the pure path is ~20x slower per window
HEX = "0123456789ABCDEF"
_counter = itertools.count()


def write_hex(directory: Path, digits: str, *, width: int = 80) -> Path:
    path = directory / f"pi-{next(_counter)}.txt"
    body = "\n".join(digits[i : i + width] for i in range(0, len(digits), width))
    path.write_text("3." + body + "\n")
    return path


@pytest.fixture(scope="module")
def workdir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("checks")


def truth_digits() -> str:
    return pi_hex(N)  # reference: gmpy2/MPFR const_pi (cached)


@pytest.fixture(scope="module")
def truth() -> str:
    return truth_digits()


@pytest.fixture(scope="module")
def clean(workdir, truth) -> Path:
    return write_hex(workdir, truth)


def astray(truth: str, start: int, seed: int) -> str:
    """Every digit from ``start`` on replaced by a different one (a computation gone wrong)."""
    shifts = [(seed * 7919 + i * 104729) % 15 + 1 for i in range(len(truth) - start + 1)]
    tail = "".join(HEX[(int(c, 16) + s) % 16] for c, s in zip(truth[start - 1 :], shifts))
    return truth[: start - 1] + tail


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_clean_file_passes_all_three(clean) -> None:
    before = digest(clean)
    full = verify_file(str(clean), samples=6, seed=11)  # a full comparison fits the default budget
    assert full.exit_code == 0 and full.exhaustive and full.reference == "arb"
    assert full.covered == [(1, N)] and full.scattered_bound is None
    v = verify_file(str(clean), samples=6, seed=11, full_seconds=0)  # windows only
    assert v.exit_code == 0 and v.verdict == "match" and not v.exhaustive
    assert {c.kind for c in v.checks} >= {"head", "tail", "sample", "integer-part"}
    assert v.file.constant == "pi" and v.file.count == N
    assert v.tail_position == N - 15
    assert v.scattered_bound == pytest.approx(scattered_damage_bound(6))
    loc = locate_file(str(clean), full_seconds=600)
    assert loc.exit_code == 0 and loc.first_mismatch is None
    assert loc.how == "scan"  # the tail matched, so a full comparison ran within the budget
    s = scan_file(str(clean))
    assert s.exit_code == 0 and s.wrong_digits == 0 and s.digits_compared == N
    assert digest(clean) == before  # read-only


def test_same_seed_same_positions(clean) -> None:
    a = verify_file(str(clean), samples=5, seed=123)
    b = verify_file(str(clean), samples=5, seed=123)
    assert [c.position for c in a.checks] == [c.position for c in b.checks]


@settings(max_examples=EXAMPLES)
@given(start=st.integers(1, N), seed=st.integers(0, 1000))
@example(start=1, seed=0)
@example(start=N, seed=1)
@example(start=N - 20, seed=2)
@example(start=17, seed=3)
def test_astray_file_is_located_exactly(workdir, start, seed) -> None:
    truth = truth_digits()
    path = write_hex(workdir, astray(truth, start, seed))
    # damage from digit 1 on hides the constant from detection: name it
    v = verify_file(str(path), samples=4, seed=seed, constant="pi")
    assert v.exit_code == 1 and v.verdict == "mismatch"
    tail = next(c for c in v.checks if c.kind == "tail")
    assert not tail.match
    loc = locate_file(str(path), constant="pi")
    assert loc.exit_code == 1
    assert loc.first_mismatch == start
    assert loc.how == ("head" if start <= 16 else "bisection")
    assert loc.first_is_certain  # a full comparison of the digits before it fits the default budget
    assert loc.found[0] != truth[start - 1] and loc.expected[0] == truth[start - 1]
    if N - start > 64:
        assert loc.rest == "wrong"
    if start > 16:  # found by bisection: the window just before it was compared too, and matches
        before = [c for c in loc.checks if c.position >= 1 and c.position + len(c.found) == start]
        assert before and all(c.match for c in before)
        # listed once: for start = 17 the head's window is the confirmation's, shown as that
        keys = [(c.base, c.position, c.expected, c.found) for c in loc.checks]
        assert len(keys) == len(set(keys))


@st.composite
def isolated_positions(draw) -> list[int]:
    k = draw(st.integers(1, 5))
    raw = draw(st.lists(st.integers(1, N), min_size=k, max_size=k, unique=True))
    out: list[int] = []
    for p in sorted(raw):  # keep them apart: isolated damage
        if not out or p - out[-1] > 20:
            out.append(p)
    return out


@settings(max_examples=EXAMPLES)
@given(positions=isolated_positions(), shift=st.integers(1, 15))
@example(positions=[1], shift=1)
@example(positions=[N], shift=15)
@example(positions=[500, 50_000, N - 1], shift=8)
def test_isolated_damage_scan_lists_exact_runs(workdir, positions, shift) -> None:
    truth = truth_digits()
    digits = list(truth)
    for p in positions:
        digits[p - 1] = HEX[(int(digits[p - 1], 16) + shift) % 16]
    path = write_hex(workdir, "".join(digits))
    s = scan_file(str(path), constant="pi")
    assert s.exit_code == 1
    assert [(r.start, r.length, r.wrong) for r in s.runs] == [(p, 1, 1) for p in positions]
    assert s.wrong_digits == len(positions)
    for r in s.runs:
        assert r.expected[0] == truth[r.start - 1] and r.found[0] != r.expected[0]
    loc = locate_file(str(path), full_seconds=600, constant="pi")
    assert loc.first_mismatch == positions[0]
    assert loc.first_is_certain
    if positions[0] <= 16:
        assert loc.how == "head"  # the first window differs
    elif positions[-1] <= N - 16 or len(positions) > 1:
        assert loc.how == "scan"  # isolated damage: a full comparison finds the first


def test_scan_with_mpfr_reference(workdir, truth) -> None:
    digits = list(truth[:20_000])
    digits[4321] = "0" if digits[4321] != "0" else "1"
    path = write_hex(workdir, "".join(digits))
    s = scan_file(str(path), reference="mpfr")
    assert [(r.start, r.length) for r in s.runs] == [(4322, 1)]


def test_named_positions_and_budget(workdir, truth) -> None:
    small = write_hex(workdir, truth[:3000])  # cheap windows, so the budget surely draws some
    v = verify_file(str(small), samples=0, seed=1, at=[5, 777, 2985, 777], full_seconds=0, sample_seconds=0.5)
    # each window once: 2985 is the tail's window, and 777 was asked twice
    assert [c.position for c in v.checks if c.kind == "user"] == [5, 777]
    assert [c.position for c in v.checks if c.kind == "tail"] == [2985]
    assert v.random_windows >= 1  # the budget drew random windows
    samples = [c.position for c in v.checks if c.kind == "sample"]
    assert len(samples) == v.random_windows == len(set(samples))
    assert not {1, 5, 777, 2985} & set(samples)
    assert v.exit_code == 0
    with pytest.raises(UsageError, match="outside the file"):
        verify_file(str(small), at=[3001])


def test_limit_checks_a_prefix(workdir, truth) -> None:
    path = write_hex(workdir, astray(truth, 90_001, 5))
    assert verify_file(str(path), limit=90_000, samples=2, seed=1).exit_code == 0
    assert verify_file(str(path), limit=90_100, samples=2, seed=1).exit_code == 1


def test_wrong_integer_part_is_a_mismatch(workdir, truth) -> None:
    path = workdir / "four.txt"
    path.write_text("4." + truth[:5000] + "\n")
    v = verify_file(str(path), samples=1, seed=1, constant="pi")
    assert v.exit_code == 1
    assert [c.kind for c in v.checks if not c.match] == ["integer-part"]


def test_unknown_constant_needs_explicit_one(workdir) -> None:
    path = workdir / "noise.txt"
    path.write_text("0." + "0123456789ABCDEF" * 100 + "\n")
    with pytest.raises(UsageError) as info:
        verify_file(str(path))
    assert info.value.parameter == "constant" and "--" not in str(info.value)  # the CLI names the option


def test_merge_runs_rule() -> None:
    # two single flaws stay apart; a long wrong stretch swallows chance matches
    assert merge_runs([(10, 10, 1), (12, 12, 1)]) == [(10, 10, 1), (12, 12, 1)]
    assert merge_runs([(10, 40, 31), (42, 60, 19)]) == [(10, 60, 50)]
    assert merge_runs([(10, 40, 31), (100, 120, 21)]) == [(10, 40, 31), (100, 120, 21)]


def test_scattered_bound_values() -> None:
    # Clopper-Pearson with zero failures: 1 - 0.05^(1/n) (rule of three ~ 3/n for large n)
    assert scattered_damage_bound(0) is None
    assert scattered_damage_bound(1) == pytest.approx(0.95)
    assert scattered_damage_bound(1000) == pytest.approx(3 / 1000, rel=0.01)


@pytest.mark.parametrize(
    ("constant", "value"),
    [("log2", "const_log2"), ("catalan", "const_catalan")],
)
def test_other_constants_damaged_files(workdir, constant, value) -> None:
    import gmpy2

    n = 30_000
    with gmpy2.context(precision=4 * n + 128):  # reference: gmpy2/MPFR constants
        v = gmpy2.mpz(gmpy2.floor(getattr(gmpy2, value)() * gmpy2.mpz(16) ** n))
    digits = format(int(v) % 16**n, "X").zfill(n)
    ip = str(int(v) // 16**n)
    one = list(digits)
    one[12_344] = HEX[(int(one[12_344], 16) + 3) % 16]
    path = workdir / f"{constant}-one.txt"
    path.write_text(ip + "." + "".join(one) + "\n")
    loc = locate_file(str(path))
    assert loc.file.constant == constant  # guessed from the leading digits
    assert loc.first_mismatch == 12_345 and loc.first_is_certain
    gone = astray(digits, 20_001, 7)
    path = workdir / f"{constant}-astray.txt"
    path.write_text(ip + "." + gone + "\n")
    assert verify_file(str(path), samples=2, seed=3).exit_code == 1
    loc = locate_file(str(path))
    assert loc.first_mismatch == 20_001 and loc.how == "bisection" and loc.rest == "wrong"


def test_locate_within_a_zero_budget_explains_the_cost(workdir, truth) -> None:
    digits = list(truth[:20_000])
    digits[777] = "0" if digits[777] != "0" else "1"
    path = write_hex(workdir, "".join(digits))
    loc = locate_file(str(path), full_seconds=0)
    assert loc.first_mismatch is None
    assert loc.verdict == "unconfirmed" and loc.exit_code == 3  # isolated damage is not ruled out
    assert not loc.exhaustive and loc.covered_digits < 20_000
    assert "beyond the budget" in loc.explanation and loc.scan_estimate_seconds is not None


def test_locate_interrupted_keeps_what_bisection_found(workdir, truth, monkeypatch) -> None:
    import spotcheck.checks.locate as locate_mod

    digits = truth[:20_000]
    path = write_hex(workdir, digits[:9_000] + digits[9_000:][::-1])  # every digit from 9,001 moved
    first = next(i for i in range(9_000, 20_000) if (digits[:9_000] + digits[9_000:][::-1])[i] != digits[i])

    def ctrl_c(*args, **kwargs):  # Ctrl-C during the full comparison of the digits before it
        raise KeyboardInterrupt

    monkeypatch.setattr(locate_mod, "scan_open", ctrl_c)
    loc = locate_file(str(path), full_seconds=600)
    assert loc.interrupted and loc.first_mismatch == first + 1
    assert loc.verdict == "mismatch" and loc.exit_code == 1
    assert not loc.first_is_certain  # not confirmed as the first
    assert "not ruled out" in loc.explanation and loc.expected and loc.expected != loc.found


def test_map_of_a_full_comparison_marks_every_wrong_run(tmp_path: Path) -> None:
    # Digits from MPFR (tests/reference.py); one isolated wrong digit and a
    # wrong stretch from 60% to the end: the map must draw both as differing
    # and every other cell as checked, since verify compared every digit.
    from spotcheck.report.checks import MAP_MATCH, MAP_MISMATCH, file_map

    n, width = 20_000, 50
    digits = list(pi_hex(n))
    digits[1500] = "0" if digits[1500] != "0" else "1"
    for i in range(12_000, n):
        digits[i] = format((int(digits[i], 16) + 1) % 16, "X")
    result = verify_file(str(write_hex(tmp_path, "".join(digits))), samples=0, seed=1)
    assert result.exhaustive and result.wrong_runs == 2
    assert result.wrong_spans == [(1501, 1501), (12_001, n)]
    cells, _ = file_map(result, width)
    cell = lambda p: (p - 1) * width // n  # noqa: E731
    assert cells[cell(1501)] == MAP_MISMATCH
    assert set(cells[cell(12_001) :]) == {MAP_MISMATCH}
    assert set(cells[: cell(1501)]) == {MAP_MATCH}
    assert set(cells[cell(1501) + 1 : cell(12_001)]) == {MAP_MATCH}
