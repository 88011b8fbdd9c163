"""compare through the CLI: exit codes, the verdict sentence, JSON schema, bad input, Ctrl-C."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import jsonschema
import pytest

from spotcheck.checks import compare as cmp
from spotcheck.checks.schema import COMPARE_SCHEMA, REPORT_SCHEMA
from spotcheck.cli import run
from tests.reference import pi_decimal, pi_hex

HEX = pi_hex(3000)


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def _pair(tmp_path: Path) -> tuple[Path, Path]:
    a = tmp_path / "a.txt"
    a.write_text("3." + HEX + "\n")
    bad = HEX[:1233] + ("0" if HEX[1233] != "0" else "1") + HEX[1234:]
    b = tmp_path / "b.txt.gz"
    b.write_bytes(
        gzip.compress(("3.\n" + "\n".join(bad[i : i + 50] for i in range(0, 3000, 50)) + "\n").encode())
    )
    return a, b


def test_differing_pair_exit_1_and_keep_sentence(tmp_path: Path, capsys) -> None:
    a, b = _pair(tmp_path)
    code, out, err = cli(capsys, "compare", a, b)
    assert code == 1, err
    assert "keep A" in out and "A is right" in out and "1,234" in out
    code, out, _ = cli(capsys, "compare", b, a, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, COMPARE_SCHEMA)
    jsonschema.validate(payload, REPORT_SCHEMA)  # what `spotcheck schema` prints
    jsonschema.Draft202012Validator.check_schema(REPORT_SCHEMA)
    assert code == 1 and payload["keep"] == "B" and payload["runs"][0]["start"] == 1234
    assert payload["repeat"] == f"spotcheck compare {b} {a}"


def test_identical_exit_0_and_quiet(tmp_path: Path, capsys) -> None:
    a, _ = _pair(tmp_path)
    c = tmp_path / "c.txt"
    c.write_text("3.\n" + "\n".join(HEX[i : i + 64] for i in range(0, 3000, 64)) + "\n")
    code, out, _ = cli(capsys, "compare", a, c, "--quiet")
    assert code == 0 and out == ""
    code, out, _ = cli(capsys, "compare", a, c)
    assert code == 0 and "IDENTICAL" in out


def test_base_mismatch_is_one_error_line(tmp_path: Path, capsys) -> None:
    a, _ = _pair(tmp_path)
    d = tmp_path / "d.txt"
    d.write_text("3." + pi_decimal(500) + "\n")
    code, out, err = cli(capsys, "compare", a, d)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("error:") and "different bases" in err and "verify" in err


def test_missing_file_is_bad_input(tmp_path: Path, capsys) -> None:
    a, _ = _pair(tmp_path)
    code, _, err = cli(capsys, "compare", a, tmp_path / "nope.txt")
    assert code == 2 and err.startswith("error:")


def test_ctrl_c_reports_what_was_established(tmp_path: Path, capsys, monkeypatch: pytest.MonkeyPatch) -> None:
    a, b = _pair(tmp_path)
    monkeypatch.setattr(cmp, "CHUNK_DIGITS", 1000)
    real = cmp._Probe.follow

    def interrupting(self, run, a, ia, b, ib, n: int, p: int) -> None:
        if p > 2000:
            raise KeyboardInterrupt
        real(self, run, a, ia, b, ib, n, p)

    monkeypatch.setattr(cmp._Probe, "follow", interrupting)
    code, out, _ = cli(capsys, "compare", a, b, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, COMPARE_SCHEMA)
    assert payload["interrupted"] is True and 1234 < payload["digits_compared"] <= 2050
    assert payload["runs"][0]["start"] == 1234 and payload["keep"] is None and code == 1
    assert payload["a"]["layout"] == "interrupted before its end" and payload["a"]["count"] >= 2000
    code, out, _ = cli(capsys, "compare", a, b)
    assert code == 1 and "interrupted" in out


def test_stray_byte_mid_file_is_one_error_line(tmp_path: Path, capsys) -> None:
    a, _ = _pair(tmp_path)
    c = tmp_path / "c.txt"
    c.write_text("3.\n" + "\n".join(HEX[i : i + 64] for i in range(0, 3000, 64)) + "\n")
    data = bytearray(c.read_bytes())
    data[2500] = ord("z")
    c.write_bytes(bytes(data))
    for args in ((a, c), (c, a)):
        code, out, err = cli(capsys, "compare", *args)
        assert code == 2 and out == ""
        assert err.count("\n") == 1 and "stray character 'z' at byte 2500" in err
        assert err.startswith(f"error: {c}: ")  # the damaged copy, named as typed, whichever side it is


def test_a_lying_label_is_reported_and_exits_1(tmp_path: Path, capsys) -> None:
    lines = [f"{i:>7}: {HEX[i : i + 60]}" for i in range(0, 3000, 60)]
    lines[20] = lines[20].replace("   1200: ", "   1201: ")
    a = tmp_path / "a.txt"
    a.write_text("3.\n" + "\n".join(lines) + "\n")
    b = tmp_path / "b.txt"
    b.write_text("3." + HEX + "\n")
    code, out, _ = cli(capsys, "compare", a, b)
    assert code == 1 and "IDENTICAL" in out and "LABELS DISAGREE  copy A, line 22" in out
    code, out, _ = cli(capsys, "compare", a, b, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, COMPARE_SCHEMA)
    assert code == 1 and payload["labels_consistent"] is False
    assert payload["a"]["label_finding"]["expected"] == 1200 and payload["b"]["label_finding"] is None
    code, out, _ = cli(capsys, "compare", a, b, "--ignore-labels")
    assert code == 0 and "LABELS DISAGREE" not in out
