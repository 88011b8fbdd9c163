"""Digit files stored as UTF-16 text (with its byte order mark).

Windows PowerShell's ``>`` redirect and Notepad's "Unicode" save write text as
UTF-16 with a byte order mark; a digit file made that way holds the same
characters as its one-byte form.  Contract: such a file (little- or big-endian,
plain or compressed) reads exactly as the one-byte file of the same text: the
same digits, count, findings, layout and constant, or the same error (one-byte
content that is binary rather than text is refused once decoded too, at its
first control character or stray byte); its ``compression`` names the encoding.  A character no digit file can hold is an
error naming it and its byte offset; a packed ``.bin`` file that starts with
the same two bytes stays packed.
"""

from __future__ import annotations

import dataclasses
import gzip
import json
import random
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.cli import run
from spotcheck.digitfile import open_digit_file, open_stream
from spotcheck.errors import DigitFileError, SpotcheckError
from tests.fuzz.mutate import mutation, random_spec
from tests.fuzz.writer import write

from .reference import pi_hex

MARKS = {"utf-16le": b"\xff\xfe", "utf-16be": b"\xfe\xff"}


def utf16(text: bytes, encoding: str) -> bytes:
    return MARKS[encoding] + text.decode("latin-1").encode(encoding)


def reading(path: Path, stream: bool) -> tuple[str, object]:
    """What the reader makes of a file: its digits and facts, or its error (type and message)."""
    try:
        if stream:
            with open_stream(path) as s:
                digits = b"".join(bytes(c) for c in s.chunks()).decode("ascii")
                df = s.finish()
        else:
            df = open_digit_file(path)
            digits = df.read(1, df.count)
        with df:
            assert df.read(1, df.count) == digits  # random access too
            return "ok", (
                digits,
                df.count,
                df.findings,
                dataclasses.replace(df.layout, index_entries=0),
                df.integer_part,
                df.constant,
                df.inspect().last_digits,
            )
    except SpotcheckError as exc:
        return "error", (type(exc), str(exc))


@settings(max_examples=120, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    mutate=st.booleans(),
    encoding=st.sampled_from(sorted(MARKS)),
    gz=st.booleans(),
    stream=st.booleans(),
)
@example(seed=1, mutate=False, encoding="utf-16le", gz=False, stream=False)
def test_utf16_reads_as_its_one_byte_text(
    tmp_path_factory: pytest.TempPathFactory, seed: int, mutate: bool, encoding: str, gz: bool, stream: bool
) -> None:
    rng = random.Random(seed)
    spec = dataclasses.replace(random_spec(rng, max_digits=rng.choice((60, 400, 3000))), compression=None)
    text = write(spec).content
    if mutate:
        text, *_ = mutation(rng, spec, text, write(spec).label_spans)
    if text.startswith(b"\xef\xbb\xbf") or not text.isascii():
        return  # a UTF-8 mark or byte: not text a UTF-16 file holds in one-byte form
    folder = tmp_path_factory.mktemp("u16")
    plain, wide = folder / "digits.txt", folder / ("wide.txt.gz" if gz else "wide.txt")
    plain.write_bytes(text)
    wide.write_bytes(gzip.compress(utf16(text, encoding)) if gz else utf16(text, encoding))
    want, got = reading(plain, stream), reading(wide, stream)
    if want[0] == "error" and "is empty" in str(want[1][1]):  # no content: said with the encoding
        assert got[0] == "error" and "content is empty" in str(got[1][1])
    elif want[0] == "error" and "binary content" in str(want[1][1]):
        # one-byte text that is not text (a NUL, say): the decoded text is refused at its stray byte
        assert got[0] == "error" and got[1][0] is DigitFileError, got
        assert "stray character" in str(got[1][1]) or "not a digit, space, line break or header text" in str(
            got[1][1]
        )
    elif want[0] == "error":  # the same refusal; the message names the file, whose name differs
        assert got[0] == "error" and got[1][0] is want[1][0], got
        assert str(got[1][1]).replace(wide.name, "F") == str(want[1][1]).replace(plain.name, "F")
    else:
        assert got == want


def test_a_powershell_file_is_verified(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "pi.txt"
    body = "3." + "\r\n".join(pi_hex(5000)[i : i + 100] for i in range(0, 5000, 100)) + "\r\n"  # MPFR's pi
    path.write_bytes(utf16(body.encode(), "utf-16le"))
    assert run(["verify", str(path), "--budget", "0", "--json"]) == 0
    facts = json.loads(capsys.readouterr().out)["file"]
    assert (facts["compression"], facts["count"], facts["constant"]) == ("utf-16le", 5000, "pi")
    # one digit changed: located exactly
    damaged = body[: 2 + 3000] + ("0" if body[2 + 3000] != "0" else "1") + body[2 + 3001 :]
    path.write_bytes(utf16(damaged.encode(), "utf-16le"))
    assert run(["locate", str(path), "--json"]) == 1  # the tail matches: a full comparison finds it
    assert json.loads(capsys.readouterr().out)["first_mismatch"] == 2943  # 29 lines of 100, then 42 more


@pytest.mark.parametrize("encoding", sorted(MARKS))
def test_a_character_no_digit_file_holds_is_named_with_its_place(tmp_path: Path, encoding: str) -> None:
    text = "3." + pi_hex(300)
    path = tmp_path / "pi.txt"
    path.write_bytes(MARKS[encoding] + (text[:150] + "\u03c0" + text[151:]).encode(encoding))
    with pytest.raises(
        DigitFileError, match=rf"character U\+03C0 at byte {2 + 2 * 150} of this {encoding} file"
    ):
        with open_digit_file(path) as df:
            df.read(1, df.count)
    path.write_bytes(MARKS[encoding] + text.encode(encoding) + b"3")  # half a character at the end
    with pytest.raises(DigitFileError, match=f"{encoding} text ends in half a character"):
        with open_digit_file(path) as df:
            df.read(1, df.count)


def test_a_packed_file_that_starts_like_a_byte_order_mark_stays_packed(tmp_path: Path) -> None:
    path = tmp_path / "digits.bin"
    path.write_bytes(b"\xff\xfe" + bytes(range(40)))
    with open_digit_file(path) as df:
        assert df.layout.kind == "packed" and df.compression is None
        assert df.read(1, 8) == "FFFE0001"
