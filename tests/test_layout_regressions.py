"""Layouts that were once misread, through the CLI: correct files pass, damaged ones are blamed at the right place.

True digits of pi come from gmpy2/MPFR (tests/reference.py), never from spotcheck.
Each damaged file changes one digit at a known position to another digit, so
``locate`` must name exactly that position and ``verify`` must exit 1.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import pytest

from spotcheck.cli import run
from tests.reference import pi_decimal, pi_hex

DEC = pi_decimal(5000)
HEX = pi_hex(4000)


def chunks(d: str, w: int) -> list[str]:
    return [d[i : i + w] for i in range(0, len(d), w)]


def start_labels(d: str, *, hexlab: bool = False, width: int = 50) -> str:
    """``      51 5820974944 5923078164 ...``: the first digit's position, right-aligned, blanks only."""
    rows = []
    for i, line in enumerate(chunks(d, width)):
        lab = format(i * width + 1, "X") if hexlab else str(i * width + 1)
        rows.append(f"{lab:>8} " + " ".join(chunks(line, 10)))
    return "\n".join(rows) + "\n"


def hex_dump(d: str, sep: str) -> str:
    """``00000040  452821E6 ...``: a byte offset in hex, 16 bytes (32 hex digits) a line."""
    return "".join(
        f"{i * 16:08x}{sep}" + " ".join(chunks(line, 8)) + "\n" for i, line in enumerate(chunks(d, 32))
    )


def end_labels(d: str, width: int = 50) -> str:
    """``58209749...0679 : 100``: ungrouped decimal lines with the count through the line."""
    return "".join(f"{line} : {min((i + 1) * width, len(d))}\n" for i, line in enumerate(chunks(d, width)))


def first_line_only(d: str) -> str:
    return "1: " + "\n".join(chunks(d, 50)) + "\n"


def first_line_different(d: str) -> str:
    """The first line's label is set off by ':', the others by blanks only."""
    rows = start_labels(d).split("\n")
    rows[0] = "1: " + rows[0].lstrip()[2:]
    return "\n".join(rows)


def cr_only(d: str) -> str:
    return "3." + "\r".join(chunks(d, 50)) + "\r"


def long_number_before_label(d: str) -> str:
    """A 5000-digit number where an end label could be: digits, never int()."""
    return d + " : " + str(len(d)) + "\n"


def both_colon(d: str, width: int = 30) -> str:
    """``1: 1415926535 8979323846 2643383279 : 30``: the first digit's position and the count through the line."""
    return "".join(
        f"{i * width + 1}: " + " ".join(chunks(line, 10)) + f" : {i * width + len(line)}\n"
        for i, line in enumerate(chunks(d, width))
    )


def both_hex_dump(d: str) -> str:
    """``00000000  243F6A88 85A308D3  00000008``: hex byte offsets before and through each line."""
    return "".join(
        f"{i * 8:08x}  " + " ".join(chunks(line, 8)) + f"  {i * 8 + len(line) // 2:08x}\n"
        for i, line in enumerate(chunks(d, 16))
    )


def both_blanks(d: str, width: int = 20) -> str:
    """``     1  14159265358979323846  20``: right-aligned decimal labels set off by blanks only."""
    return "".join(
        f"{i * width + 1:>6}  {line}  {i * width + len(line)}\n" for i, line in enumerate(chunks(d, width))
    )


def both_bars(d: str, width: int = 24) -> str:
    """``   0 | 243F6A8885A308D313198A2E | 24``: digits before and through the line, set off by '|'."""
    return "".join(
        f"{i * width:>4} | {line} | {i * width + len(line)}\r\n" for i, line in enumerate(chunks(d, width))
    )


LAYOUTS: dict[str, tuple[Callable[[str], str], str]] = {
    "start-blank-decimal": (start_labels, "dec"),
    "start-blank-decimal-hex-digits": (start_labels, "hex"),
    "hexdump-blanks": (lambda d: hex_dump(d, "  "), "hex"),
    "hexdump-colon": (lambda d: hex_dump(d, ": "), "hex"),
    "end-label-ungrouped": (end_labels, "dec"),
    "first-line-only": (first_line_only, "dec"),
    "first-line-different": (first_line_different, "dec"),
    "cr-only": (cr_only, "dec"),
    "long-number-then-label": (long_number_before_label, "dec"),
    "both-ends-colon": (both_colon, "dec"),
    "both-ends-hexdump": (both_hex_dump, "hex"),
    "both-ends-blanks": (both_blanks, "dec"),
    "both-ends-bars-crlf": (both_bars, "hex"),
}


def damage(d: str, position: int) -> str:
    c = d[position - 1]
    return d[: position - 1] + ("1" if c != "1" else "2") + d[position:]


def table_cell(out: str, key: str) -> str:
    """The text of one row of ``inspect``'s table, its wrapped lines joined."""
    cell: list[str] = []
    for row in out.splitlines():
        left, bar, right = row.partition("│")
        if not bar:
            continue
        if left.strip() == key or (cell and not left.strip()):
            cell.append(right.strip())
        elif cell:
            break
    return " ".join(cell)


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("name", list(LAYOUTS))
def test_correct_file_passes(name: str, tmp_path: Path, capsys) -> None:
    make, which = LAYOUTS[name]
    digits = DEC if which == "dec" else HEX
    path = tmp_path / f"{name}.txt"
    path.write_bytes(make(digits).encode())
    code, out, err = cli(capsys, "inspect", path, "--json")
    assert code == 0, err
    info = json.loads(out)
    assert info["count"] == len(digits) and info["constant"] == "pi"
    assert info["findings"] == []
    code, _, err = cli(capsys, "verify", path, "--samples", "3", "--seed", "7")
    assert code == 0, err
    code, out, err = cli(capsys, "locate", path, "--json")
    assert code == 0, err
    assert json.loads(out)["first_mismatch"] is None


@pytest.mark.parametrize("position", [1, 85, 2345])
@pytest.mark.parametrize("name", list(LAYOUTS))
def test_damaged_file_is_blamed_at_the_damage(name: str, position: int, tmp_path: Path, capsys) -> None:
    make, which = LAYOUTS[name]
    digits = DEC if which == "dec" else HEX
    path = tmp_path / f"{name}-{position}.txt"
    path.write_bytes(make(damage(digits, position)).encode())
    code, out, err = cli(capsys, "locate", path, "--json")
    assert code == 1, err
    payload = json.loads(out)
    assert payload["first_mismatch"] == position
    code, out, err = cli(capsys, "verify", path, "--samples", "2", "--seed", "3", "--at", position)
    assert code == 1, err


@pytest.mark.parametrize("line", [1, 2, 3, 4])
def test_stray_character_in_the_first_lines_is_named(line: int, tmp_path: Path, capsys) -> None:
    rows = chunks(DEC[:3000], 50)
    rows[line - 1] = rows[line - 1][:34] + "x" + rows[line - 1][35:]
    text = "3." + "\n".join(rows) + "\n"
    path = tmp_path / "stray.txt"
    path.write_text(text)
    code, _, err = cli(capsys, "locate", path)
    assert code == 2
    at = text.index("x")
    assert f"at byte {at} (line {line}, column" in err and "'x'" in err
    assert err.count("\n") == 1 and err.startswith("error:")


def test_first_digit_wrong_is_a_mismatch_not_an_input_error(tmp_path: Path, capsys) -> None:
    path = tmp_path / "first.txt"
    path.write_text("3." + damage(HEX, 1) + "\n")
    code, out, err = cli(capsys, "verify", path, "--samples", "2", "--seed", "1")
    assert code == 1, err
    assert out.startswith("MISMATCH")
    code, out, err = cli(capsys, "verify", path, "--samples", "2", "--seed", "1", "--json")
    assert code == 1, err
    wrong = [c for c in json.loads(out)["checks"] if not c["match"]]
    # The head window and, where it fits the budget, the full comparison both see digit 1 wrong.
    assert {c["position"] + c["first_difference"] - 1 for c in wrong} == {1}
    assert "head" in {c["kind"] for c in wrong}
    code, out, err = cli(capsys, "locate", path, "--json")
    assert code == 1 and json.loads(out)["first_mismatch"] == 1
    code, out, _ = cli(capsys, "inspect", path, "--json")
    assert code == 0
    assert "63 of the first 64 digits agree" in json.loads(out)["constant_how"]


def test_ambiguous_first_column_is_refused_and_the_option_picks(tmp_path: Path, capsys) -> None:
    # Three lines: the first column could be labels (1, 11, 21: two agreeing steps, a 1 in 10^4
    # chance for digits) or digits.  Pi's digits from gmpy2/MPFR.
    path = tmp_path / "short.txt"
    path.write_text(f"1 {DEC[:10]}\n11 {DEC[10:20]}\n21 {DEC[20:30]}\n")
    code, _, err = cli(capsys, "inspect", path)
    assert code == 2 and "ambiguous" in err and "--labels start|end|both|none" in err
    code, out, err = cli(capsys, "inspect", path, "--labels", "start", "--json")
    assert code == 0, err
    assert json.loads(out)["count"] == 30 and json.loads(out)["constant"] == "pi"
    code, out, err = cli(capsys, "inspect", path, "--labels", "none", "--constant", "pi", "--json")
    assert code == 0, err
    assert json.loads(out)["count"] == 35


@pytest.mark.parametrize("name", [n for n in LAYOUTS if n.startswith("both-")])
def test_both_ends_are_read_as_labels(name: str, tmp_path: Path, capsys) -> None:
    """Neither label column is ever read as digits: inspect says both ends, with each meaning."""
    make, which = LAYOUTS[name]
    digits = DEC if which == "dec" else HEX
    path = tmp_path / f"{name}.txt"
    path.write_bytes(make(digits).encode())
    code, out, err = cli(capsys, "inspect", path, "--json")
    assert code == 0, err
    layout = json.loads(out)["layout"]
    assert layout["labels"] == "both"
    assert layout["end_label_meaning"] in ("through", "bytes-through")
    code, out, _ = cli(capsys, "inspect", path)
    assert "position labels at both line ends" in table_cell(out, "layout")


@pytest.mark.parametrize(
    ("name", "said"),
    [
        ("first-line-only", "a position label on the first digit line only"),
        ("hexdump-colon", "position labels at line start"),
        ("end-label-ungrouped", "position labels at line end"),
    ],
)
def test_inspect_says_where_the_labels_are(name: str, said: str, tmp_path: Path, capsys) -> None:
    make, which = LAYOUTS[name]
    path = tmp_path / f"{name}.txt"
    path.write_bytes(make(DEC if which == "dec" else HEX).encode())
    code, out, err = cli(capsys, "inspect", path)
    assert code == 0, err
    assert said in table_cell(out, "layout")


@pytest.mark.parametrize("command", ["verify", "locate"])
def test_changed_end_label_is_a_finding_and_exit_1(command: str, tmp_path: Path, capsys) -> None:
    rows = both_colon(DEC).split("\n")
    assert rows[40].endswith(" : 1230")
    rows[40] = rows[40][:-4] + "1231"  # line 41's end label; every digit stays right
    path = tmp_path / "end-label.txt"
    path.write_text("\n".join(rows))
    code, out, err = cli(capsys, command, path, "--json")
    assert code == 1, err
    payload = json.loads(out)
    lf = payload["file"]["label_finding"]
    assert (lf["kind"], lf["line"], lf["end"], lf["expected"], lf["found"]) == (
        "label-mismatch",
        41,
        "end",
        1230,
        "1231",
    )
    assert payload["labels_consistent"] is False
    if command == "locate":
        assert payload["first_mismatch"] is None  # the digits are right: only the label is damaged
    code, out, _ = cli(capsys, "inspect", path, "--json")
    assert code == 0
    findings = json.loads(out)["findings"]
    assert [(f["line"], f["end"], f["expected"]) for f in findings] == [(41, "end", 1230)]
    code, out, _ = cli(capsys, command, path)
    assert code == 1 and "line 41: its end label says 1231, but the digits through it imply 1,230" in out
    code, _, _ = cli(capsys, command, path, "--ignore-labels")
    assert code == 0


def test_both_ends_short_blank_file_is_ambiguous_and_the_option_picks(tmp_path: Path, capsys) -> None:
    # Two lines labelled at both ends by blanks: one agreeing step is a 1 in 10^4 chance for digits.
    path = tmp_path / "short-both.txt"
    path.write_text(f"1 {DEC[:10]} 10\n11 {DEC[10:20]} 20\n")
    code, _, err = cli(capsys, "inspect", path)
    assert (
        code == 2 and "ambiguous" in err and "both line ends" in err and "--labels start|end|both|none" in err
    )
    code, out, err = cli(capsys, "inspect", path, "--labels", "both", "--json")
    assert code == 0, err
    assert json.loads(out)["count"] == 20 and json.loads(out)["constant"] == "pi"


@pytest.mark.parametrize("labels", ["end", "both"])
def test_blank_after_the_cr_of_a_crlf_line_keeps_its_end_label(labels: str, tmp_path: Path, capsys) -> None:
    """``... 8 | 56\\r \\n``: a blank between a CRLF's CR and LF beside an end label.

    The first pass (the line rule) read the label; the random-access read (the bulk
    rule) did not, and handed out ``|`` and the label's digits as digits (the fuzz
    found this).  Both rules now read CRs and blanks after a label in any order.
    """
    rows = []
    for i, line in enumerate(chunks(HEX[:1280], 32)):
        start = f"{i * 32} : " if labels == "both" else ""
        cr = "\r \n" if i == 3 else "\r\n"
        rows.append(f"{start}{' '.join(chunks(line, 8))}\t|\t{(i + 1) * 32}{cr}")
    path = tmp_path / "crlf-blank.txt"
    path.write_bytes("".join(rows).encode())
    code, out, err = cli(capsys, "inspect", path, "--base", "16", "--json")
    assert code == 0, err
    assert json.loads(out)["count"] == 1280 and json.loads(out)["findings"] == []
    code, out, err = cli(capsys, "scan", path, "-c", "pi", "--json")
    assert code == 0, err
    damaged = path.read_bytes().replace(b"\t|\t128\r \n", b"\t|\t127\r \n")
    path.write_bytes(damaged)
    code, out, err = cli(capsys, "verify", path, "-c", "pi", "--json")
    assert code == 1, err
    lf = json.loads(out)["file"]["label_finding"]
    assert (lf["line"], lf["end"], lf["expected"], lf["found"]) == (4, "end", 128, "127")


# --- false verdicts of issue 25: each now read or refused with both readings named -------------


def test_running_count_with_the_integer_digit_is_refused_never_a_mismatch(tmp_path: Path, capsys) -> None:
    """``3141592653\\t:10``: ten digits a line, the count running through the integer digit.

    Read as end labels with the 3 as digit 1, every digit is one place off; the
    refusal names both readings (the 3 as pi's integer part, or as digit 1).
    """
    full = "3" + DEC[:1000]
    path = tmp_path / "tab-colon.txt"
    path.write_text(
        "".join(f"{full[i : i + 10]}\t:{min(i + 10, len(full))}\n" for i in range(0, len(full), 10))
    )
    code, _, err = cli(capsys, "verify", path, "--labels", "end", "--constant", "pi")
    assert code == 2 and err.startswith("error:") and "ambiguous" in err
    assert "the first digit 3 could be pi's integer part written without a point" in err
    assert "differ from pi's from position 1" in err
    code, _, err = cli(capsys, "verify", path)
    assert code == 2 and "ambiguous" in err


def test_one_digit_a_line_with_the_integer_part_as_position_1_is_refused(tmp_path: Path, capsys) -> None:
    """``1 3`` / ``2 1`` / ``3 4``: a position table whose row 1 is the integer part."""
    full = "3" + DEC[:199]
    path = tmp_path / "table.txt"
    path.write_text("".join(f"{i + 1} {c}\n" for i, c in enumerate(full)))
    for extra in ([], ["--constant", "pi"]):
        code, out, err = cli(capsys, "verify", path, *extra)
        assert code == 2 and out == "", out
        assert "the first digit 3 could be pi's integer part written without a point" in err


@pytest.mark.parametrize("lines", [1, 2])
def test_one_or_two_lines_with_blank_start_labels_are_refused(lines: int, tmp_path: Path, capsys) -> None:
    """``       1  243F6A88...`` / ``      73  ...``: the label 1 read as digit 1 made every digit wrong."""
    path = tmp_path / "two.txt"
    path.write_text("".join(f"{72 * i + 1:>8}  {HEX[72 * i : 72 * i + 72]}\n" for i in range(lines)))
    code, out, err = cli(capsys, "verify", path, "--constant", "pi")
    assert code == 2 and out == ""
    assert "the first digit 1 could be a label" in err and "--labels start|end|both|none" in err
    code, out, err = cli(capsys, "verify", path, "--labels", "start", "--json")
    assert code == 0, err
    assert json.loads(out)["file"]["count"] == 72 * lines


def test_three_lines_with_blank_start_labels_stay_ambiguous(tmp_path: Path, capsys) -> None:
    path = tmp_path / "three.txt"
    path.write_text("".join(f"{72 * i + 1:>8}  {HEX[72 * i : 72 * i + 72]}\n" for i in range(3)))
    code, _, err = cli(capsys, "verify", path, "--constant", "pi")
    assert code == 2 and "ambiguous" in err and "--labels start|end|both|none" in err


@pytest.mark.parametrize("text", ["0\n", "2\n", "1415\n"])
def test_a_constant_is_never_named_from_a_few_digits(text: str, tmp_path: Path, capsys) -> None:
    """``0`` agreed with log3 and ``2`` with zeta3: one digit is chance, never a constant."""
    path = tmp_path / "short.txt"
    path.write_text(text)
    code, out, err = cli(capsys, "verify", path)
    assert code == 2 and out == "" and "no known constant agrees beyond chance" in err


def single_byte_dump(d: str, *, final_offset: bool = True) -> str:
    """``0000010 85 a3 08 d3 ...``: a dump of bytes one by one, its last line the final offset alone."""
    data = bytes.fromhex(d)
    rows = [f"{o:07x} " + " ".join(f"{b:02x}" for b in data[o : o + 16]) for o in range(0, len(data), 16)]
    if final_offset:
        rows.append(f"{len(data):07x}")
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize("position", [None, 1, 3999])
def test_single_byte_dump_ending_in_its_final_offset(position: int | None, tmp_path: Path, capsys) -> None:
    """The final offset line was read as six more digits (``MISMATCH ... at position 40,001``)."""
    digits = HEX if position is None else damage(HEX, position)
    path = tmp_path / "dump.txt"
    path.write_text(single_byte_dump(digits))
    code, out, err = cli(capsys, "locate", path, "--json")
    assert code == (0 if position is None else 1), err
    payload = json.loads(out)
    assert payload["first_mismatch"] == position and payload["file"]["count"] == len(HEX)
    code, out, err = cli(capsys, "inspect", path, "--json")
    assert (
        code == 0
        and json.loads(out)["last_digits"].endswith(digits[-16:])
        and not json.loads(out)["findings"]
    )


@pytest.mark.parametrize("line", [2, 4, 30])
def test_end_label_that_lost_its_colon_is_a_label_finding_only(line: int, tmp_path: Path, capsys) -> None:
    """``...20899 80`` for ``...20899 : 80``: the label was read as digits (``MISMATCH`` at 21)."""
    rows = [f"{DEC[i : i + 20]} : {i + 20}" for i in range(0, 1000, 20)]
    rows[line - 1] = rows[line - 1].replace(" : ", " ")
    path = tmp_path / "lost-colon.txt"
    path.write_text("\n".join(rows) + "\n")
    for command, at in (("verify", ["--at", 20 * line - 5]), ("locate", [])):
        code, out, err = cli(capsys, command, path, "--json", *at)
        assert code == 1, err
        payload = json.loads(out)
        lf = payload["file"]["label_finding"]
        assert (lf["kind"], lf["line"], lf["found"]) == ("label-missing", line, str(20 * line))
        assert payload["file"]["count"] == 1000
        if command == "locate":
            assert payload["first_mismatch"] is None
        else:
            assert all(c["match"] for c in payload["checks"])
    code, out, _ = cli(capsys, "verify", path)
    assert code == 1 and f"line {line}: the position label {20 * line} has lost its separator" in out
    code, _, _ = cli(capsys, "verify", path, "--ignore-labels")
    assert code == 0


@pytest.mark.parametrize("word", [2, 4])
@pytest.mark.parametrize("given", [False, True])
def test_dump_of_words_in_machine_order_is_never_read_in_the_wrong_order(
    word: int, given: bool, tmp_path: Path, capsys
) -> None:
    """``0000000 3f24 886a ...``: 2-byte words printed little-endian; read as written every digit
    is out of place, so the reading is refused naming machine order."""
    data = bytes.fromhex(HEX[:4000])
    rows = []
    for o in range(0, len(data), 16):
        words = [data[o + i : o + i + word][::-1].hex() for i in range(0, 16, word)]
        rows.append(f"{o:07x} " + " ".join(words))
    rows.append(f"{len(data):07x}")
    path = tmp_path / "words.txt"
    path.write_text("\n".join(rows) + "\n")
    code, out, err = cli(capsys, "verify", path, *(["--constant", "pi"] if given else []))
    assert code == 2 and out == ""
    assert f"printed in {word}-byte words in machine order" in err
