"""Files that begin deeper in the expansion (slices): verify, locate and scan at absolute positions.

Outside references, named where used: the table of hex digits of pi in Bailey, Borwein and
Plouffe, Math. Comp. 66 (1997) (positions 10^6 and 10^7, as ``test_engine.py`` uses them),
gmpy2/MPFR's pi (``tests/reference.py``) and mpmath's log 2 at full precision.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import jsonschema
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from spotcheck.checks import CheckRequest, locate_file, scan_file, verify_file
from spotcheck.checks.schema import REPORT_SCHEMA
from spotcheck.cli import run
from spotcheck.digitfile import open_digit_file
from spotcheck.engine import backend
from spotcheck.engine.api import extract
from spotcheck.errors import UsageError

from .reference import pi_decimal, pi_hex

# Bailey, Borwein, Plouffe (1997), Math. Comp. 66, table: hex digits of pi from position 10^6 and
# 10^7 in this project's convention (digit 1 the first after the point), as in test_engine.py.
TABLE = {1_000_000: "26C65E52CB4593", 10_000_000: "17AF5863EFED8D"}
HEX = "0123456789ABCDEF"
REFERENCE_DIGITS = 20_000  # gmpy2/MPFR's pi, cut into slices by hypothesis
_counter = itertools.count()
DEEP = pytest.mark.skipif(
    backend.BACKEND != "c",
    reason="windows at 10^6 and 10^7 take minutes on the pure-Python path (the twin is held to the kernel "
    "by test_kernel; the random slices below run on it)",
)


def other(digit: str) -> str:
    return HEX[(HEX.index(digit) + 7) % 16]


def write_slice(
    directory: Path, digits: str, first: int, layout: str = "start", width: int = 64, base: int = 16
) -> Path:
    """``digits`` (digits ``first, first+1, ...`` of the expansion) laid out as ``layout``:
    ``start`` (1-based start labels), ``start0`` (0-based), ``end`` (the count through the line),
    ``offsets`` (hex byte offsets before the line, as a dump has) or ``plain`` (no labels)."""
    path = directory / f"slice-{next(_counter)}.txt"
    out = []
    for i in range(0, len(digits), width):
        line, at = digits[i : i + width], first + i
        out.append(
            {
                "start": f"{at}: {line}",
                "start0": f"{at - 1}: {line}",
                "end": f"{line} : {at - 1 + len(line)}",
                "offsets": f"{(at - 1) // 2:08X}: {line}",
                "plain": line,
            }[layout]
        )
    path.write_text("\n".join(out) + "\n")
    return path


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def deep_pi() -> dict[int, str]:
    """600 certified hex digits of pi from each table position; the table's digits must come first."""
    out = {p: extract("pi", p, 600).digits for p in TABLE}
    for p, d in out.items():
        assert d.startswith(TABLE[p])  # the 1997 table, an outside reference
    return out


@DEEP
def test_the_1997_table_at_one_million_from_mpfr(deep_pi) -> None:
    # gmpy2/MPFR's pi agrees with the engine's digits there (a second outside reference).
    assert pi_hex(1_000_599)[999_999:] == deep_pi[1_000_000]


@DEEP
@pytest.mark.parametrize("layout", ["start", "plain"])
def test_a_slice_at_the_table_position_matches_and_one_changed_digit_is_located(
    tmp_path, deep_pi, layout
) -> None:
    p = 1_000_000
    given = {} if layout == "start" else {"first_position": p}
    path = write_slice(tmp_path, deep_pi[p], p, layout)
    v = verify_file(str(path), constant="pi", samples=4, seed=1, full_seconds=0, **given)
    assert v.verdict == "match" and v.file.first == p and v.file.last == p + 599
    assert [c.position for c in v.checks if c.kind == "head"] == [p]
    loc = locate_file(str(path), **given)  # a full comparison to 1,000,599 fits the default budget
    assert loc.verdict == "match" and loc.exhaustive and loc.covered == [(p, p + 599)]
    assert loc.file.constant == "pi"  # recognised at 10^6 from engine digits there
    damaged = deep_pi[p][:300] + other(deep_pi[p][300]) + deep_pi[p][301:]
    loc = locate_file(str(write_slice(tmp_path, damaged, p, layout)), constant="pi", **given)
    assert loc.first_mismatch == p + 300 and loc.first_is_certain
    assert loc.expected[0] == deep_pi[p][300] and loc.found[0] == other(deep_pi[p][300])


@DEEP
def test_a_slice_at_ten_million_verifies_and_a_persistent_error_is_bisected(tmp_path, deep_pi) -> None:
    p = 10_000_000
    path = write_slice(tmp_path, deep_pi[p], p)
    v = verify_file(str(path), constant="pi", samples=2, seed=3, full_seconds=0)
    assert v.verdict == "match" and v.file.first == p and v.file.first_how == "labels and engine digits"
    astray = deep_pi[p][:417] + "".join(other(c) for c in deep_pi[p][417:])
    loc = locate_file(str(write_slice(tmp_path, astray, p)), constant="pi", full_seconds=0)
    assert loc.first_mismatch == p + 417 and loc.how == "bisection"
    assert all(c.position >= p for c in loc.checks)


@DEEP
@pytest.mark.slow
def test_one_changed_digit_at_ten_million_is_located_by_a_full_comparison(tmp_path, deep_pi) -> None:
    p = 10_000_000
    damaged = deep_pi[p][:200] + other(deep_pi[p][200]) + deep_pi[p][201:]
    loc = locate_file(str(write_slice(tmp_path, damaged, p)), constant="pi")
    assert loc.first_mismatch == p + 200 and loc.first_is_certain and loc.how == "scan"


@DEEP
def test_the_false_verdict_on_a_labelled_stretch_is_gone(tmp_path, capsys) -> None:
    # A correct stretch from 1,000,001, each line labelled with its first digit's position, was
    # reported "MISMATCH ... at position 1" with "LABELS DISAGREE line 1: labelled 1000001".
    digits = extract("pi", 1_000_001, 2_000).digits
    assert digits.startswith(TABLE[1_000_000][1:])  # the 1997 table: digit 10^6 is 2, then 6C65E52C...
    path = write_slice(tmp_path, digits, 1_000_001)
    assert path.read_text().startswith("1000001: 6C65E52C")
    for extra in ([], ["--constant", "pi"]):
        code, out, err = cli(capsys, "verify", path, "--seed", "1", *extra)
        assert code == 0 and out.startswith("MATCH") and "from position 1,000,001" in out, (out, err)
        assert "LABELS DISAGREE" not in out and "position 1 " not in out
        code, out, _ = cli(capsys, "locate", path, *extra)
        assert code == 0 and out.startswith("NO WRONG DIGIT") and "LABELS DISAGREE" not in out
    code, out, _ = cli(capsys, "verify", path, "--seed", "1", "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, REPORT_SCHEMA)
    assert (
        payload["file"]["first"] == 1_000_001 and payload["file"]["first_how"] == "labels and engine digits"
    )
    assert payload["covered"][0][0] >= 1_000_001 and payload["covered"][-1][1] == 1_002_000


@DEEP
def test_an_unplaced_stretch_is_refused_with_the_option_named(tmp_path, capsys) -> None:
    digits = extract("pi", 1_000_001, 640).digits
    path = write_slice(tmp_path, digits, 1_000_001, "plain")
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and "--begins-at POSITION" in err and "deeper in the expansion" in err
    code, out, err = cli(capsys, "verify", path, "--begins-at", "1000001")
    assert code == 0 and "from position 1,000,001" in out
    code, out, _ = cli(capsys, "inspect", path, "--begins-at", "1,000,001")
    assert code == 0 and "1,000,001 (given)" in out
    # Named constant, no position: every window differs from the first digit on, and the report says
    # the file may be a stretch (never a silent mismatch at its first digit).
    code, out, err = cli(capsys, "verify", path, "--constant", "pi", "--budget", "0", "--seed", "2")
    assert code == 1 and "--begins-at POSITION" in err and "deeper in the expansion of pi" in err


def test_the_option_and_the_labels_must_agree(tmp_path) -> None:
    digits = pi_hex(5_000)[2_999:]
    path = write_slice(tmp_path, digits, 3_000)  # 1-based labels: the first line says 3000
    # 3,001 agrees with the labels read as 0-based (3,000 digits before the line), so no finding;
    # the digits are not pi's from 3,001, and the check says so.
    v = verify_file(str(path), constant="pi", first_position=3_001, full_seconds=0, samples=0, seed=1)
    assert v.file.first == 3_001 and v.file.label_finding is None and v.verdict == "mismatch"
    # 3,010 agrees with no reading of the labels: a finding on line 1 (exit 1), as for any file.
    v = verify_file(str(path), constant="pi", first_position=3_010, full_seconds=0, samples=0, seed=1)
    lf = v.file.label_finding
    assert v.file.first == 3_010 and lf is not None and v.exit_code == 1
    assert lf.line == 1 and lf.found == "3000" and lf.expected in (3_009, 3_010) and lf.position == 3_010
    assert verify_file(str(path), constant="pi", first_position=3_000, full_seconds=0, seed=1).exit_code == 0


def test_scan_of_a_slice_compares_every_digit_at_its_positions(tmp_path) -> None:
    digits = pi_hex(8_000)[4_999:]
    damaged = digits[:1_000] + other(digits[1_000]) + digits[1_001:]
    s = scan_file(str(write_slice(tmp_path, damaged, 5_000, "end")), constant="pi")
    assert s.file.first == 5_000 and s.file.first_how == "labels"
    assert s.digits_compared == 3_001 and s.first_mismatch == 6_000 and s.wrong_digits == 1
    assert s.covered == [(5_000, 8_000)]


def test_a_decimal_stretch_is_refused_with_the_reason(tmp_path, capsys) -> None:
    path = write_slice(tmp_path, pi_decimal(3_000)[999:], 1_000, "plain", base=10)
    code, _, err = cli(capsys, "verify", path, "--begins-at", "1000", "--constant", "pi")
    assert code == 2 and "decimal stretch" in err


@DEEP
def test_compare_refuses_copies_of_a_stretch(tmp_path, capsys) -> None:
    digits = extract("pi", 1_000_001, 256).digits
    a, b = write_slice(tmp_path, digits, 1_000_001), write_slice(tmp_path, digits, 1_000_001, width=32)
    code, _, err = cli(capsys, "compare", a, b)
    assert code == 2 and "not compared yet" in err


def test_a_request_record_and_keywords_are_one_way_in(tmp_path) -> None:
    path = write_slice(tmp_path, pi_hex(3_000)[999:], 1_000, "plain")
    request = CheckRequest(constant="pi", first_position=1_000, full_seconds=0, samples=2, seed=4)
    a = verify_file(str(path), request)
    b = verify_file(str(path), constant="pi", first_position=1_000, full_seconds=0, samples=2, seed=4)
    assert a.to_dict()["checks"] == b.to_dict()["checks"] and a.verdict == "match"
    with pytest.raises(TypeError):
        verify_file(str(path), budget=0)  # the one name for it is full_seconds
    with pytest.raises(UsageError):
        CheckRequest(first_position=0)


def log2_hex(n: int) -> str:
    """The first ``n`` hex digits of log 2 after the point (mpmath at full precision)."""
    import mpmath

    with mpmath.workprec(4 * n + 64):
        return format(int(mpmath.floor(mpmath.log(2) * mpmath.mpf(16) ** n)), "X").zfill(n)[-n:]


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    first=st.integers(100, REFERENCE_DIGITS - 2_000),
    length=st.integers(64, 1_500),
    layout=st.sampled_from(["start", "start0", "end", "offsets", "plain"]),
    damage=st.one_of(st.none(), st.floats(0, 1, exclude_max=True)),
    constant=st.sampled_from(["pi", "log2"]),
)
@example(first=101, length=65, layout="start0", damage=0.0, constant="pi")
@example(first=18_001, length=1_500, layout="end", damage=0.999, constant="log2")
def test_random_slices_match_and_one_damaged_digit_is_located_exactly(
    tmp_path, first, length, layout, damage, constant
) -> None:
    if layout == "offsets" and first % 2 == 0:
        first += 1  # a byte offset places an odd position
    if layout != "plain":
        length = max(length, 65)  # a label on a line alone must say 0, 1 or its count (README)
    reference = pi_hex(REFERENCE_DIGITS) if constant == "pi" else log2_hex(REFERENCE_DIGITS)
    digits = reference[first - 1 : first - 1 + length]
    where = None if damage is None else int(damage * length)
    if where is not None:
        digits = digits[:where] + other(digits[where]) + digits[where + 1 :]
    path = write_slice(tmp_path, digits, first, layout)
    given = {"first_position": first} if layout == "plain" else {}
    with open_digit_file(path, **given) as df:  # type: ignore[arg-type]
        assert first in df.first_positions and df.count == length
    loc = locate_file(str(path), constant=constant, **given)
    assert loc.file.first == first and loc.file.label_finding is None
    if where is None:
        assert loc.verdict == "match" and loc.covered == [(first, first + length - 1)]
    else:
        assert loc.first_mismatch == first + where and loc.first_is_certain
    v = verify_file(str(path), constant=constant, full_seconds=0, samples=3, seed=first, **given)
    assert v.file.first == first and all(first <= c.position <= first + length - 1 for c in v.checks)
    assert (v.verdict == "match") == all(c.match for c in v.checks)
    if where is None:
        assert v.verdict == "match"


@pytest.mark.parametrize("constant", [None, "pi"])
def test_labels_off_on_a_file_from_digit_one_stay_findings(tmp_path, constant) -> None:
    # End labels that count one digit too many on every line place the file at digit 2; its digits
    # are pi's from digit 1 (gmpy2/MPFR), so it is read from there and the labels are findings:
    # the digits match, never a mismatch on every window.
    digits = pi_hex(4_000)
    path = write_slice(tmp_path, digits, 2, "end")
    assert path.read_text().startswith(digits[:64] + " : 65\n")
    given = {} if constant is None else {"constant": constant}
    v = verify_file(str(path), full_seconds=0, samples=4, seed=1, **given)
    assert v.file.first == 1 and v.file.constant == "pi" and all(c.match for c in v.checks)
    assert v.file.label_finding is not None and v.file.label_finding.expected == 64 and v.exit_code == 1
