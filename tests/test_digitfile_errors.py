"""Bad input: each case raises the right error, names the problem, and leaves the file as it was.

True digits come from gmpy2/MPFR (``const_pi``), as in ``test_digitfile.py``.
"""

from __future__ import annotations

import bz2
import gzip
import hashlib
import lzma
import os
import random
from pathlib import Path

import gmpy2
import pytest

from spotcheck.digitfile import open_digit_file
from spotcheck.errors import DigitFileError, FileAccessError, SpotcheckError, UsageError


def pi_digits(base: int, n: int) -> str:
    """First n digits of pi after the point, by gmpy2/MPFR."""
    bits = 4 * n + 128
    with gmpy2.context(gmpy2.get_context(), precision=bits + 16):
        fixed = int(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpfr(2) ** bits))
    frac = ((fixed - (3 << bits)) * base**n) >> bits
    return gmpy2.mpz(frac).digits(base).upper().zfill(n)


PI16 = pi_digits(16, 3000)
PI10 = pi_digits(10, 3000)


def rows(d: str, width: int = 50) -> str:
    return "\n".join(d[i : i + width] for i in range(0, len(d), width)) + "\n"


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def expect_error(path: Path, cls: type[SpotcheckError], *patterns: str, **kwargs) -> str:
    before = sha(path)
    mtime = path.stat().st_mtime_ns
    with pytest.raises(cls) as info:
        open_digit_file(path, **kwargs).close()
    msg = str(info.value)
    for pat in patterns:
        assert pat in msg, msg
    assert "\n" not in msg  # one line for the CLI
    assert sha(path) == before and path.stat().st_mtime_ns == mtime
    return msg


def test_empty_file(tmp_path):
    path = tmp_path / "empty.txt"
    path.write_bytes(b"")
    expect_error(path, DigitFileError, "empty")


def test_whitespace_only(tmp_path):
    path = tmp_path / "blank.txt"
    path.write_bytes(b"\n  \n\t\n")
    expect_error(path, DigitFileError, "only whitespace")


def test_header_without_digits(tmp_path):
    path = tmp_path / "header.txt"
    path.write_text("# nothing but comments\n# here\n")
    expect_error(path, DigitFileError, "no digits found")


def test_binary_garbage(tmp_path):
    path = tmp_path / "garbage.dat"
    path.write_bytes(random.Random(2).randbytes(5000))
    expect_error(path, DigitFileError, "binary content")


def test_hex_file_with_base_10(tmp_path):
    path = tmp_path / "pi16.txt"
    path.write_text("3." + rows(PI16))
    first_letter = min(i for i, c in enumerate(PI16) if c.isalpha())
    msg = expect_error(path, DigitFileError, "not a decimal digit", "base 10 was requested", base=10)
    assert f"at byte {2 + first_letter + first_letter // 50} " in msg


def test_decimal_file_with_base_16(tmp_path):
    path = tmp_path / "pi10.txt"
    path.write_text("3." + rows(PI10))
    expect_error(path, DigitFileError, "looks decimal", "base 16 was requested", base=16)


def test_mixed_bases(tmp_path):
    text = "3." + rows(PI10[:2000]) + rows(PI16[:1000])
    path = tmp_path / "mixed.txt"
    path.write_text(text)
    at = text.index(next(c for c in PI16[:1000] if c.isalpha()), len(rows(PI10[:2000])))
    line = text.count("\n", 0, at) + 1
    expect_error(path, DigitFileError, "mixed bases", f"at byte {at} (line {line}")


def test_stray_character_in_the_middle(tmp_path):
    text = "# header\n3." + rows(PI10)
    at = text.index("\n", len(text) // 2) + 7
    text = text[:at] + "x" + text[at + 1 :]
    path = tmp_path / "stray.txt"
    path.write_text(text)
    line = text.count("\n", 0, at) + 1
    expect_error(path, DigitFileError, "stray character 'x'", f"at byte {at} (line {line}")


def test_stray_character_in_labelled_file(tmp_path):
    lines = [f"{i * 50:6d}: {PI16[i * 50 : i * 50 + 50]}" for i in range(60)]
    lines[33] = lines[33][:20] + "?" + lines[33][21:]
    text = "\n".join(lines) + "\n"
    path = tmp_path / "labelled.txt"
    path.write_text(text)
    at = text.index("?")
    expect_error(path, DigitFileError, "stray character '?'", f"at byte {at} (line 34,")


@pytest.mark.parametrize("suffix", ["", ".gz"])
def test_stray_character_far_into_a_long_line_has_its_true_column(tmp_path, suffix):
    # After 1,000 lines of 100 digits (beyond what detection reads), a line of 200,000 digits with a
    # stray byte at its column 150,001: the column is counted from the line's start, not from a
    # bounded look back (it was at most 65,536), in a plain and in a compressed file alike.
    digits = (PI16 * 101)[:300_000]
    head = "3.\n" + "".join(digits[i : i + 100] + "\n" for i in range(0, 100_000, 100))
    long_line = digits[100_000:250_000] + "Z" + digits[250_001:300_000]
    text = head + long_line + "\n"
    at = len(head) + 150_000
    assert text[at] == "Z"
    path = tmp_path / f"long-line.txt{suffix}"
    data = text.encode()
    path.write_bytes(gzip.compress(data) if suffix else data)
    expect_error(path, DigitFileError, "stray character 'Z'", f"at byte {at} (line 1002, column 150001)")


def test_stray_character_in_regular_file_late(tmp_path):
    # A regular file broken only in its last line: the fast loop falls back and reports it.
    # (A footer line of text, "# end of digits", is read as text since issue 25: writers.py.)
    body = rows(PI16)
    text = "3." + body[:-5] + "#" + body[-4:]
    path = tmp_path / "footer.txt"
    path.write_text(text)
    expect_error(path, DigitFileError, "stray character '#'", f"at byte {text.index('#')}")


@pytest.mark.parametrize("comp, module", [("gz", gzip), ("bz2", bz2), ("xz", lzma)])
def test_truncated_compressed(tmp_path, comp, module):
    data = module.compress(("3." + rows(PI16 * 20)).encode())
    path = tmp_path / f"cut.txt.{comp}"
    path.write_bytes(data[: len(data) * 2 // 3])
    name = {"gz": "gzip", "bz2": "bzip2", "xz": "xz"}[comp]
    expect_error(path, DigitFileError, f"{name} stream is truncated")


def test_corrupt_gzip(tmp_path):
    data = bytearray(gzip.compress(("3." + rows(PI16 * 20)).encode()))
    data[40:60] = b"\xff" * 20
    path = tmp_path / "bad.gz"
    path.write_bytes(bytes(data))
    expect_error(path, DigitFileError, "gzip")


def test_directory(tmp_path):
    with pytest.raises(FileAccessError, match="is a directory") as info:
        open_digit_file(tmp_path)
    assert isinstance(info.value, OSError)


def test_missing_path(tmp_path):
    with pytest.raises(FileAccessError, match="no such file"):
        open_digit_file(tmp_path / "nope.txt")


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root reads any file")
def test_unreadable_path(tmp_path):
    path = tmp_path / "locked.txt"
    path.write_text("3.1415926535")
    path.chmod(0)
    try:
        with pytest.raises(FileAccessError, match="permission denied"):
            open_digit_file(path)
    finally:
        path.chmod(0o644)


def test_file_growing_while_read(tmp_path, monkeypatch):
    from spotcheck.digitfile import passrules as scan

    monkeypatch.setattr(scan, "CHUNK_BYTES", 1024)
    path = tmp_path / "growing.txt"
    path.write_text("3." + rows(PI10))
    calls = []

    def writer_appends(done: int, total: int | None) -> None:
        if not calls:
            with open(path, "a") as f:  # another program still writing
                f.write(rows(PI10[:100]))
        calls.append(done)

    with pytest.raises(DigitFileError, match="changed while being read"):
        open_digit_file(path, progress=writer_appends)


def test_file_changed_after_open(tmp_path):
    path = tmp_path / "later.txt"
    path.write_text("3." + rows(PI10))
    with open_digit_file(path) as df:
        assert df.read(1, 5) == PI10[:5]
        with open(path, "a") as f:
            f.write("1234\n")
        with pytest.raises(DigitFileError, match="changed while being read"):
            df.read(1, 5)


def test_labels_that_lie(tmp_path):
    lines = [f"{i * 50:6d}: {PI16[i * 50 : i * 50 + 50]}" for i in range(60)]
    lines[20] = f"{9999:6d}: {PI16[1000:1050]}"
    path = tmp_path / "lying.txt"
    path.write_text("\n".join(lines) + "\n")
    before = sha(path)
    with open_digit_file(path) as df:
        assert df.layout.label_meaning == "before"
        assert df.read(1001, 50) == PI16[1000:1050]  # the digits still read right
        [finding] = df.findings
        assert finding.kind == "label-mismatch" and finding.line == 21 and finding.position == 1001
        assert "label 9999" in finding.message and "is 1000" in finding.message
        assert df.inspect().to_dict()["findings"][0]["line"] == 21
    expect_error(path, DigitFileError, "labels that lie", "line 21", "label 9999", strict_labels=True)
    assert sha(path) == before


def test_many_lying_labels_are_summarised(tmp_path):
    lines = [f"{i * 7}: {PI16[i * 50 : i * 50 + 50]}" for i in range(60)]
    path = tmp_path / "all-lie.txt"
    path.write_text("\n".join(lines) + "\n")
    with open_digit_file(path) as df:
        assert len(df.findings) == 21
        assert "labels disagree" in df.findings[-1].message


def test_missing_label(tmp_path):
    lines = [f"{PI16[i * 40 : i * 40 + 40]} : {(i + 1) * 40}" for i in range(30)]
    lines[12] = PI16[480:520]
    path = tmp_path / "gap.txt"
    path.write_text("\n".join(lines) + "\n")
    with open_digit_file(path) as df:
        assert [f.kind for f in df.findings] == ["label-missing"]
        assert df.read(470, 60) == PI16[469:529]


def test_usage_errors(tmp_path):
    path = tmp_path / "ok.txt"
    path.write_text("3." + rows(PI16))
    with pytest.raises(UsageError, match="base must be 10 or 16"):
        open_digit_file(path, base=8)
    with pytest.raises(UsageError, match="unknown constant"):
        open_digit_file(path, constant="e-to-the-pi")
    with open_digit_file(path) as df:
        with pytest.raises(UsageError, match="at least 1"):
            df.read(0, 3)
    with pytest.raises(UsageError, match="closed"):
        df.read(1, 3)


def test_packed_with_base_10(tmp_path):
    path = tmp_path / "pi.bin"
    path.write_bytes(bytes.fromhex(PI16))
    expect_error(path, DigitFileError, "packed binary holds hex digits", base=10)


def test_mixed_bases_found_by_the_pass(tmp_path):
    # Past the detection window (256 KiB), the pass itself finds the hex digit.
    decimal = rows(PI10 * 120, 100)
    text = "3." + decimal + rows(PI16[:500], 100)
    path = tmp_path / "late-mix.txt"
    path.write_text(text)
    at = len("3." + decimal) + min(i for i, c in enumerate(PI16) if c.isalpha())
    expect_error(path, DigitFileError, "mixed bases", f"at byte {at} (line {text.count(chr(10), 0, at) + 1}")


def test_path_below_a_file(tmp_path):
    path = tmp_path / "plain.txt"
    path.write_text("3.1415926535")
    with pytest.raises(FileAccessError, match="cannot open"):
        open_digit_file(path / "inside")
