"""Lines of text that swallowed a digit line (a lost line break) are refused, never read as header or
footer text: each shape the fuzz found (seeds 27 and 28, 2026-12-06) once the table and page-break
families came in.  The digits are pi's leading ones typed from memory; only the refusal is asserted."""

import pytest

from spotcheck.digitfile import open_digit_file
from spotcheck.errors import DigitFileError

PI_HEX = "243F6A8885A308D313198A2E03707344A4093822299F31D0082EFA98EC4E6C89452821E638D01377BE5466CF34E90C6CC0AC29B7C97C50DD3F84D5B5B5470917"
PI_DEC = (
    "1415926535897932384626433832795028841971693993751058209749445923078164062862089986280348253421170679"
)


@pytest.mark.parametrize(
    "text",
    [
        # a table's header row that swallowed row 1 (its line break lost)
        "position,digit 1, 1\n" + "".join(f" {i}, {d}\n" for i, d in enumerate(PI_DEC[1:40], start=2)),
        # a comment that swallowed the first end-labelled digit line
        "# computed by the club\r# 3.14159 is not data"
        + "".join(f"{PI_HEX[i : i + 20].lower()}:{i + 20:>8}\r" for i in range(0, 120, 20)),
        # a page header that swallowed a digit line
        "".join(PI_HEX[i : i + 20] + "\n" for i in range(0, 60, 20))
        + "\fPage 2 of the Ridgeview club's run"
        + "".join(PI_HEX[i : i + 20] + "\n" for i in range(60, 120, 20)),
        # the first digit line run into the page header after it
        PI_HEX[:19].lower()
        + "z\fPage 2 of the Ridgeview club's run\n"
        + "".join(PI_HEX[i : i + 19].lower() + "\n\fPage 3 of the club's run\n" for i in range(19, 95, 19)),
    ],
    ids=["table-header", "comment-before-end-labels", "page-header", "digit-line-into-page-header"],
)
def test_a_text_line_that_swallowed_a_digit_line_is_refused(tmp_path, text) -> None:
    path = tmp_path / "merged.txt"
    path.write_bytes(text.encode())
    with pytest.raises(DigitFileError):
        open_digit_file(str(path)).close()
