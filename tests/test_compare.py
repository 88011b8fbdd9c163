"""compare: two copies side by side; certified digits say which is right where they differ.

True digits come from gmpy2/MPFR (tests/reference.py), never from the engine
under test; the damaged copies are made from them here.
"""

from __future__ import annotations

import bz2
import gzip
from pathlib import Path

import jsonschema
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from spotcheck.checks import compare as cmp
from spotcheck.checks.compare import compare_files
from spotcheck.checks.schema import COMPARE_SCHEMA
from spotcheck.errors import DigitFileError, UsageError
from tests.reference import pi_decimal, pi_hex

HEX = pi_hex(6000)
DEC = pi_decimal(3000)
# Digits 762..767 of pi after the point are 999999 (the well-known run of six
# 9s; from memory, checked here against MPFR).
FEYNMAN = 762


def _flip(digits: str, position: int, alphabet: str) -> str:
    d = digits[position - 1]
    new = alphabet[(alphabet.index(d) + 1) % len(alphabet)]
    return digits[: position - 1] + new + digits[position:]


def _damage(digits: str, positions: list[int], alphabet: str) -> str:
    for p in positions:
        digits = _flip(digits, p, alphabet)
    return digits


def _write(path: Path, digits: str, width: int = 100, group: int | None = None, gz: str | None = None) -> str:
    lines = []
    for i in range(0, len(digits), width):
        line = digits[i : i + width]
        if group:
            line = " ".join(line[j : j + group] for j in range(0, len(line), group))
        lines.append(line)
    text = "3.\n" + "\n".join(lines) + "\n"
    if gz == "gzip":
        path.write_bytes(gzip.compress(text.encode()))
    elif gz == "bz2":
        path.write_bytes(bz2.compress(text.encode()))
    else:
        path.write_text(text)
    return str(path)


def test_identical_copies_in_different_layouts(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", HEX, width=100)
    b = _write(tmp_path / "b.txt.gz", HEX, width=64, group=8, gz="gzip")
    r = compare_files(a, b)
    assert r.verdict == "identical" and r.exit_code == 0 and r.keep == "either"
    assert r.digits_compared == len(HEX) and r.runs == [] and r.extra is None


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    bad_a=st.lists(st.integers(1, 6000), max_size=3, unique=True),
    bad_b=st.lists(st.integers(1, 6000), max_size=3, unique=True),
)
@example(bad_a=[], bad_b=[1])
@example(bad_a=[6000], bad_b=[])
@example(bad_a=[100], bad_b=[100])  # both wrong at the same place
def test_hex_hidden_differences_are_found_and_arbitrated(
    tmp_path: Path, bad_a: list[int], bad_b: list[int]
) -> None:
    alphabet = "0123456789ABCDEF"
    da = _damage(HEX, bad_a, alphabet)
    # B's flips go two steps so that A and B never agree on a wrong digit.
    db = _damage(_damage(HEX, bad_b, alphabet), bad_b, alphabet)
    a = _write(tmp_path / "a.txt", da, width=100, group=10)
    b = _write(tmp_path / "b.txt.gz", db, width=77, gz="gzip")
    r = compare_files(a, b, constant="pi")  # damage at digit 1 in both defeats the guess
    differing = sorted(set(bad_a) | set(bad_b))
    assert r.differing_digits == len(differing)
    covered = {p for run in r.runs for p in range(run.start, run.start + run.length)}
    assert set(differing) <= covered
    for run in r.runs:
        inside = [p for p in differing if run.start <= p < run.start + run.length]
        a_ok = not any(p in bad_a for p in inside[: cmp.ARBITRATE_DIGITS])
        b_ok = not any(p in bad_b for p in inside[: cmp.ARBITRATE_DIGITS])
        assert run.right == ("A" if a_ok else "B" if b_ok else "both wrong")
        assert run.certified == HEX[run.start - 1 : run.start - 1 + len(run.certified or "")]
    if not differing:
        assert r.keep == "either"
    elif not bad_a:
        assert r.keep == "A"
    elif not bad_b:
        assert r.keep == "B"
    else:
        assert r.keep in ("neither", "A", "B")
    assert r.exit_code == (1 if differing else 0)


def test_a_right_b_right_both_wrong_and_json(tmp_path: Path) -> None:
    alphabet = "0123456789ABCDEF"
    a = _write(tmp_path / "a.txt", _damage(HEX, [5000], alphabet))
    b = _write(tmp_path / "b.txt", _damage(_damage(HEX, [10, 5000], alphabet), [5000], alphabet), width=50)
    r = compare_files(a, b)
    assert [(run.start, run.right) for run in r.runs] == [(10, "A"), (5000, "both wrong")]
    assert r.keep == "neither"
    payload = r.to_dict() | {"repeat": "spotcheck compare a b"}
    jsonschema.validate(payload, COMPARE_SCHEMA)
    r2 = compare_files(b, a)
    assert [run.right for run in r2.runs] == ["B", "both wrong"]


def test_longer_copy_extra_digits_judged(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", HEX[:4000])
    b = _write(tmp_path / "b.txt.bz2", HEX, gz="bz2")
    r = compare_files(a, b)
    assert r.runs == [] and r.extra is not None
    assert (r.extra.longer, r.extra.start, r.extra.length, r.extra.right) == ("B", 4001, 2000, True)
    assert r.keep == "B" and r.exit_code == 1
    c = _write(tmp_path / "c.txt", HEX[:4000] + _damage(HEX[4000:], [1990], "0123456789ABCDEF"))
    r = compare_files(a, c)
    assert r.extra is not None and r.extra.right is False and r.keep == "A"


def test_a_long_wrong_stretch_is_one_run(tmp_path: Path) -> None:
    # B has a stretch of 500 digits from another place (shifted): one merged run, B wrong.
    db = HEX[:2000] + HEX[3000:3500] + HEX[2500:]
    a = _write(tmp_path / "a.txt", HEX)
    b = _write(tmp_path / "b.txt", db, width=60)
    r = compare_files(a, b)
    assert len(r.runs) == 1 and r.runs[0].right == "A"
    run = r.runs[0]
    assert 2001 <= run.start <= 2010 and run.start + run.length - 1 >= 2490


def test_runs_across_chunk_boundaries_merge(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(cmp, "CHUNK_DIGITS", 97)
    db = HEX[:900] + "".join("F" if c != "F" else "0" for c in HEX[900:1100]) + HEX[1100:]
    r = compare_files(_write(tmp_path / "a.txt", HEX), _write(tmp_path / "b.txt", db, width=33))
    assert [(run.start, run.length, run.differing, run.right) for run in r.runs] == [(901, 200, 200, "A")]


def test_decimal_pair_one_differs(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", DEC)
    b = _write(tmp_path / "b.txt.gz", _damage(DEC, [1500], "0123456789"), width=50, group=5, gz="gzip")
    r = compare_files(a, b)
    assert r.method == "radix conversion"
    assert [(run.start, run.right) for run in r.runs] == [(1500, "A")]
    assert r.keep == "A"
    r = compare_files(b, a)
    assert r.keep == "B"


def test_decimal_several_runs_spliced(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", _damage(DEC, [2500], "0123456789"))
    b = _write(tmp_path / "b.txt", _damage(DEC, [700], "0123456789"), width=64)
    r = compare_files(a, b)
    assert [(run.start, run.right) for run in r.runs] == [(700, "A"), (2500, "B")]
    assert r.keep == "neither"


def test_decimal_pair_inside_a_run_of_nines(tmp_path: Path) -> None:
    assert DEC[FEYNMAN - 1 : FEYNMAN + 5] == "999999"
    # B differs inside the 9s; A is right.
    a = _write(tmp_path / "a.txt", DEC[:800])
    b = _write(tmp_path / "b.txt", DEC[:764] + "8" + DEC[765:800], width=40)
    r = compare_files(a, b)
    assert [(run.start, run.right) for run in r.runs] == [(765, "A")]
    # Both truncated inside the run of 9s (no carry trap): A ends in 9999, B ends in 9990.
    a = _write(tmp_path / "a2.txt", DEC[:765])
    b = _write(tmp_path / "b2.txt", DEC[:764] + "0")
    r = compare_files(a, b)
    assert [(run.start, run.right) for run in r.runs] == [(765, "A")] and r.keep == "A"
    # A is longer and stops inside the 9s: its extra digits are right.
    r = compare_files(_write(tmp_path / "a3.txt", DEC[:766]), _write(tmp_path / "b3.txt", DEC[:760]))
    assert r.extra is not None and r.extra.right is True and r.keep == "A"


def test_different_bases_is_bad_input(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", HEX[:500])
    b = _write(tmp_path / "b.txt", DEC[:500])
    with pytest.raises(UsageError, match="different bases.*check each") as info:
        compare_files(a, b)
    assert getattr(info.value, "parameter", None) == "verify_each"  # the CLI names the command


def test_unknown_constant_lists_runs_without_arbitration(tmp_path: Path) -> None:
    junk = "0123456789ABCDEF" * 40
    a = _write(tmp_path / "a.txt", junk)
    b = _write(tmp_path / "b.txt", _damage(junk, [300], "0123456789ABCDEF"))
    r = compare_files(a, b, base=16)
    assert r.constant is None and r.method == "none"
    assert [(run.start, run.right) for run in r.runs] == [(300, None)] and r.keep is None and r.exit_code == 1


def test_a_lost_digit_is_reported_as_a_shift(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", HEX)
    b = _write(tmp_path / "b.txt", HEX[:1499] + HEX[1500:], width=64)  # B lost digit 1500
    r = compare_files(a, b)
    assert r.shift is not None and (r.shift["digits"], r.shift["missing_in"]) == (1, "B")
    assert 1500 <= r.shift["position"] <= 1510 and len(r.runs) == 1 and r.runs[0].right == "A"
    assert r.extra is not None and r.extra.longer == "A" and r.keep == "A"
    jsonschema.validate(r.to_dict() | {"repeat": "x"}, COMPARE_SCHEMA)


def test_decimal_copy_with_extra_digits_is_a_shift(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(cmp, "SHIFT_PROBE", 500)
    a = _write(tmp_path / "a.txt", DEC[:1000] + "12" + DEC[1000:])  # A gained two digits after 1000
    b = _write(tmp_path / "b.txt", DEC)
    r = compare_files(a, b)
    assert r.shift is not None and (r.shift["digits"], r.shift["missing_in"]) == (2, "B")
    assert r.runs[0].right == "B" and r.keep == "B"


@pytest.mark.parametrize("position", [1, 2, 17, 3000])
def test_decimal_difference_at_the_edges(tmp_path: Path, position: int) -> None:
    a = _write(tmp_path / "a.txt", _damage(DEC, [position], "0123456789"))
    b = _write(tmp_path / "b.txt", DEC, width=30)
    r = compare_files(a, b, constant="pi")  # damage at digit 1 defeats the guess
    assert [(run.start, run.right) for run in r.runs] == [(position, "B")] and r.keep == "B"


def _labelled(path: Path, digits: str, width: int = 60) -> str:
    """Start labels counting the digits before each line, set off by ':'."""
    lines = [f"{i:>7}: {digits[i : i + width]}" for i in range(0, len(digits), width)]
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    return str(path)


def test_labelled_copy_against_a_grouped_one(tmp_path: Path) -> None:
    a = _labelled(tmp_path / "a.txt", HEX)
    b = _write(tmp_path / "b.txt", _damage(HEX, [4321], "0123456789ABCDEF"), width=64, group=8)
    r = compare_files(a, b)
    assert [(run.start, run.length, run.right) for run in r.runs] == [(4321, 1, "A")] and r.keep == "A"
    assert r.a.layout == "60 digits per line, labels at line start" and r.a.count == len(HEX)


def test_a_lying_label_is_a_finding_beside_identical_digits(tmp_path: Path) -> None:
    a = _labelled(tmp_path / "a.txt", HEX)
    text = (tmp_path / "a.txt").read_text().replace("   3000: ", "   3001: ")
    (tmp_path / "a.txt").write_text(text)
    b = _write(tmp_path / "b.txt", HEX)
    r = compare_files(a, b)
    # The digits are identical; copy A's label on line 52 (the 51st digit line) is damage: exit 1.
    lf = r.a.label_finding
    assert r.verdict == "identical" and r.b.label_finding is None
    assert lf is not None and (lf.line, lf.expected, lf.found) == (52, 3000, "3001")
    assert not r.labels_consistent and r.exit_code == 1
    assert r.to_dict()["a"]["label_finding"]["line"] == 52
    r = compare_files(a, b, ignore_labels=True)
    assert r.verdict == "identical" and r.a.label_finding is None and r.exit_code == 0


def test_a_stray_byte_mid_file_is_bad_input(tmp_path: Path) -> None:
    a = _write(tmp_path / "a.txt", HEX)
    b = Path(_write(tmp_path / "b.txt", HEX, width=64))
    data = bytearray(b.read_bytes())
    data[5000] = ord("#")
    b.write_bytes(bytes(data))
    with pytest.raises(
        DigitFileError, match=r"b.txt: stray character '#' at byte 5000 \(line 78, column 58\)"
    ):
        compare_files(a, str(b))


def test_lost_digit_found_across_small_chunks(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(cmp, "CHUNK_DIGITS", 97)
    a = _write(tmp_path / "a.txt", HEX)
    b = _write(tmp_path / "b.txt", HEX[:999] + HEX[1003:], width=64)  # B lost digits 1000..1003
    r = compare_files(a, b)
    assert r.shift is not None and (r.shift["digits"], r.shift["missing_in"]) == (4, "B")
    assert len(r.runs) == 1 and r.runs[0].length == len(HEX) - 4 - r.runs[0].start + 1
    assert r.extra is not None and r.extra.longer == "A" and r.keep == "A"


def test_compare_open_on_opened_files(tmp_path: Path) -> None:
    from spotcheck.digitfile import open_digit_file

    a = _write(tmp_path / "a.txt", HEX)
    b = _write(tmp_path / "b.txt", _damage(HEX, [10], "0123456789ABCDEF"), width=50)
    with open_digit_file(a) as da, open_digit_file(b) as db:
        r = cmp.compare_open(da, db)
        assert [(run.start, run.right) for run in r.runs] == [(10, "A")] and r.keep == "A"
        assert da.read(1, 4) == "243F"  # still open


def test_decimal_arbitration_past_the_child_threshold(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A decimal run whose prefix is converted in a child process (true digits: MPFR) is judged as inline."""
    from spotcheck.checks import radix

    monkeypatch.setattr(radix, "CHILD_DIGITS", 2000)  # the child path without a file of 300,000 digits
    made: list[str] = []
    real = radix.open_converter

    def spy(n, read, chunks):  # type: ignore[no-untyped-def]
        conv = real(n, read, chunks)
        made.append(type(conv).__name__)
        return conv

    monkeypatch.setattr(radix, "open_converter", spy)
    a = _write(tmp_path / "a.txt", DEC)
    b = _write(tmp_path / "b.txt", _damage(DEC, [2500], "0123456789"), width=64)
    r = compare_files(a, b)
    assert [(run.start, run.right) for run in r.runs] == [(2500, "A")] and r.keep == "A"
    assert made == ["ChildConverter"]
    r = compare_files(b, a)
    assert [(run.start, run.right) for run in r.runs] == [(2500, "B")] and r.keep == "B"
