"""Digits as general-purpose software writes them (spotcheck/digitfile/writers.py), through the CLI.

Outside references: the output of ``bc`` (a command-line calculator; skipped where
it is not installed), mpmath's printed values, Python's ``format`` of gmpy2
values.  Every file's digits are compared with gmpy2/MPFR (tests/reference.py).
"""

from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path

import gmpy2
import mpmath
import pytest

from spotcheck.cli import run
from tests.reference import pi_decimal, pi_hex

DEC = pi_decimal(3000)
HEX = pi_hex(3000)
BC = shutil.which("bc")


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def digits_of(path: Path, capsys, *extra: object) -> tuple[int, dict]:
    """``locate``'s exit code and JSON for a file."""
    code, out, err = cli(capsys, "locate", path, "--json", *extra)
    assert code in (0, 1), err
    return code, json.loads(out)


@pytest.mark.skipif(BC is None, reason="bc is not installed (.ci/run installs it where it can)")
@pytest.mark.parametrize(("obase", "scale"), [(10, 1000), (16, 1300)])
def test_bc_output_with_continuation_lines(obase: int, scale: int, tmp_path: Path, capsys) -> None:
    """``bc -l`` prints 4*a(1) in lines of 70 characters, a backslash before each break; its last
    digits are truncated (and may be wrong), which the check finds exactly."""
    assert BC is not None
    text = subprocess.run(
        [BC, "-l"],
        input=f"scale={scale}; obase={obase}; 4*a(1)\n",
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    assert "\\\n" in text
    path = tmp_path / "bc.txt"
    path.write_text(text)
    written = text.replace("\\\n", "").strip()
    assert written.startswith("3.")
    truth = DEC if obase == 10 else HEX
    n = len(written) - 2
    code, payload = digits_of(path, capsys)
    assert payload["file"]["count"] == n and payload["file"]["base"] == obase
    # The first wrong digit the check names is exactly the first one that differs from gmpy2/MPFR.
    first_wrong = next((i + 1 for i in range(n) if written[2 + i] != truth[i]), None)
    assert payload["first_mismatch"] == first_wrong
    assert first_wrong is None or first_wrong > n - 5
    assert code == (0 if first_wrong is None else 1)


def test_bc_style_continuation_lines_without_a_point(tmp_path: Path, capsys) -> None:
    rows = [DEC[:1400][i : i + 69] for i in range(0, 1400, 69)]
    path = tmp_path / "fraction.txt"
    path.write_text("\\\n".join(rows) + "\n")
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 1400 and payload["first_mismatch"] is None


def test_a_stray_backslash_is_named(tmp_path: Path, capsys) -> None:
    text = "3." + DEC[:60] + "\\\n" + DEC[60:100] + "\\" + DEC[100:160] + "\n"
    path = tmp_path / "stray.txt"
    path.write_text(text)
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and f"at byte {text.rindex(chr(92))}" in err and "'\\\\'" in err


@pytest.mark.parametrize("form", ["repr", "nstr"])
def test_mpmath_printed_values(form: str, tmp_path: Path, capsys) -> None:
    """mpmath at 1,001 significant digits: ``mpf('3.14...')`` (repr) or plain (nstr)."""
    with mpmath.workdps(1001):
        value = +mpmath.pi
        text = repr(value) if form == "repr" else mpmath.nstr(value, 1001)
    path = tmp_path / f"{form}.txt"
    path.write_text(text + "\n")
    written = text.split("'")[1] if form == "repr" else text
    n = len(written) - 2
    code, payload = digits_of(path, capsys)
    assert payload["file"]["count"] == n and payload["file"]["constant"] == "pi"
    first_wrong = next((i + 1 for i in range(n) if written[2 + i] != DEC[i]), None)
    assert payload["first_mismatch"] == first_wrong  # only a rounded last digit may differ
    assert first_wrong is None or first_wrong >= n - 1


def test_gmpy2_format_of_an_mpfr(tmp_path: Path, capsys) -> None:
    """Python's ``format`` of a gmpy2 value at 1,000 places, and in a bracketed list."""
    text = format(gmpy2.const_pi(precision=3400), ".1000f")
    for name, body in (("plain", text), ("list", f"[{text}]"), ("quoted", f'"{text}"')):
        path = tmp_path / f"{name}.txt"
        path.write_text(body + "\n")
        code, payload = digits_of(path, capsys)
        assert payload["file"]["count"] == 1000, name
        first_wrong = next((i + 1 for i in range(1000) if text[2 + i] != DEC[i]), None)
        assert payload["first_mismatch"] == first_wrong and (first_wrong is None or first_wrong == 1000)


@pytest.mark.parametrize("mark", ["`1001.", "`1000.5", "e0", "E+00", "b0", "*^0"])
def test_marks_after_the_digits(mark: str, tmp_path: Path, capsys) -> None:
    path = tmp_path / "mark.txt"
    path.write_text("3." + DEC[:1000] + mark + "\n")
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 1000


@pytest.mark.parametrize("mark", ["e1", "e-3", "b12"])
def test_an_exponent_that_moves_the_point_is_refused(mark: str, tmp_path: Path, capsys) -> None:
    text = "3." + DEC[:1000] + mark + "\n"
    path = tmp_path / "exp.txt"
    path.write_text(text)
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and (
        f"at byte {text.index(mark[0])}" in err or f"at byte {text.index(mark[0]) + 1}" in err
    )


def test_a_short_hex_looking_exponent_stays_digits(tmp_path: Path, capsys) -> None:
    """``3.243F6A8885A3e0``: with hex letters about, ``e0`` may be digits; they are read as digits."""
    path = tmp_path / "hex.txt"
    path.write_text("3." + HEX[:30] + "e0\n")
    code, payload = digits_of(path, capsys, "--constant", "pi")
    assert payload["file"]["count"] == 32 and payload["first_mismatch"] == 31


def test_footer_lines(tmp_path: Path, capsys) -> None:
    rows = [DEC[i : i + 50] for i in range(0, 2000, 50)]
    path = tmp_path / "footer.txt"
    path.write_text("3." + "\n".join(rows) + "\n-- end --\nTotal: 2000 digits\n")
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 2000


def test_a_digit_line_run_into_the_footer_is_refused(tmp_path: Path, capsys) -> None:
    rows = [DEC[i : i + 50] for i in range(0, 2000, 50)]
    text = "3." + "\n".join(rows) + "-- end --\n"
    path = tmp_path / "glued.txt"
    path.write_text(text)
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and f"at byte {text.index('-')}" in err


@pytest.mark.parametrize("damaged", [None, 777])
def test_page_breaks_with_page_headers(damaged: int | None, tmp_path: Path, capsys) -> None:
    """A form feed and a page header line every 10 lines of 50 digits; positions continue."""
    digits = DEC[:2000]
    if damaged is not None:
        digits = digits[: damaged - 1] + str((int(digits[damaged - 1]) + 1) % 10) + digits[damaged:]
    rows = [digits[i : i + 50] for i in range(0, 2000, 50)]
    pages = ["\n".join(rows[k : k + 10]) for k in range(0, 40, 10)]
    text = "3." + "".join(
        page + f"\n\fPage {k + 2} of the Ridgeview club's listing\n" if k < 3 else page + "\n"
        for k, page in enumerate(pages)
    )
    path = tmp_path / "pages.txt"
    path.write_text(text)
    code, payload = digits_of(path, capsys)
    assert payload["file"]["count"] == 2000 and payload["first_mismatch"] == damaged


@pytest.mark.parametrize("sep", ["\u00a0", "\u2009", "\u202f", "\u2007"])
def test_typeset_separators_between_groups(sep: str, tmp_path: Path, capsys) -> None:
    rows = [sep.join(DEC[i + j : i + j + 10] for j in range(0, 50, 10)) for i in range(0, 2000, 50)]
    path = tmp_path / "typeset.txt"
    path.write_bytes(("3." + "\n".join(rows) + "\n").encode("utf-8"))
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 2000
    code, out, err = cli(capsys, "verify", path, "--at", 1234)
    assert code == 0, err


@pytest.mark.parametrize(("sep", "header"), [(",", "position,digit\n"), (";", ""), (", ", "n, digit\n")])
def test_tables_of_positions_and_digits(sep: str, header: str, tmp_path: Path, capsys) -> None:
    """One digit a row with its position (1-based), as spreadsheets export them."""
    path = tmp_path / "table.csv"
    path.write_text(header + "".join(f"{i + 1}{sep}{c}\n" for i, c in enumerate(DEC[:500])))
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 500
    rows = path.read_text().splitlines(keepends=True)
    k = 1 if header else 0
    rows[k + 99] = rows[k + 99].replace(f"{sep}{DEC[99]}", f"{sep}{(int(DEC[99]) + 1) % 10}")
    path.write_text("".join(rows))
    code, payload = digits_of(path, capsys)
    assert code == 1 and payload["first_mismatch"] == 100


def test_table_with_the_integer_part_as_row_1_is_refused_naming_both_readings(tmp_path: Path, capsys) -> None:
    path = tmp_path / "table.csv"
    path.write_text("position,digit\n" + "".join(f"{i + 1},{c}\n" for i, c in enumerate("3" + DEC[:300])))
    code, _, err = cli(capsys, "verify", path, "--constant", "pi")
    assert code == 2 and "the first digit 3 could be pi's integer part written without a point" in err


def canonical_dump(data: bytes, *, text: bool = True) -> str:
    """``00000000  24 3f 6a 88 85 a3 08 d3  13 19 8a 2e 03 70 73 44  |$?j..........psD|``."""
    rows = []
    for o in range(0, len(data), 16):
        c = data[o : o + 16]
        hexes = " ".join(f"{x:02x}" for x in c[:8]) + "  " + " ".join(f"{x:02x}" for x in c[8:])
        shown = "".join(chr(x) if 32 <= x < 127 else "." for x in c)
        rows.append(f"{o:08x}  {hexes:<49}" + (f" |{shown}|" if text else ""))
    rows.append(f"{len(data):08x}")
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize("text", [True, False])
def test_dump_of_a_packed_binary_file(text: bool, tmp_path: Path, capsys) -> None:
    """A packed binary file of pi's hex digits dumped with offsets, hex pairs and a text column."""
    path = tmp_path / "dump.txt"
    path.write_text(canonical_dump(bytes.fromhex(HEX[:3000]), text=text))
    code, payload = digits_of(path, capsys)
    assert code == 0 and payload["file"]["count"] == 3000 and payload["file"]["base"] == 16


def test_a_text_column_that_does_not_render_its_bytes_is_refused(tmp_path: Path, capsys) -> None:
    dump = canonical_dump(bytes.fromhex(HEX[:3000]))
    rows = dump.splitlines(keepends=True)
    rows[5] = (
        rows[5][:-3] + ("Z" if rows[5][-3] != "Z" else "Y") + rows[5][-2:]
    )  # one character of line 6's column
    path = tmp_path / "dump.txt"
    path.write_text("".join(rows))
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and "line 6" in err


def test_a_page_header_ending_in_digits_is_refused(tmp_path: Path, capsys) -> None:
    """``Page 2`` could be a header run together with the next digit line: never dropped as text."""
    rows = [DEC[i : i + 50] for i in range(0, 1000, 50)]
    text = "3." + "\n".join(rows[:10]) + "\n\fPage 2\n" + "\n".join(rows[10:]) + "\n"
    path = tmp_path / "pages.txt"
    path.write_text(text)
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and "line 11" in err
