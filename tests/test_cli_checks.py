"""verify, locate, scan and inspect through the CLI: exit codes, reports, JSON schema, bad input."""

from __future__ import annotations

import hashlib
import json
import shlex
from pathlib import Path

import jsonschema
import pytest

from spotcheck.checks.schema import LOCATE_SCHEMA, REPORT_SCHEMA, SCAN_SCHEMA, VERIFY_SCHEMA
from spotcheck.cli import run

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def cli(capsys, *args: str) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def as_json(capsys, *args: str) -> tuple[int, dict]:
    code, out, _ = cli(capsys, *args, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, REPORT_SCHEMA)
    return code, payload


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_verify_clean_sample(capsys) -> None:
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "42")
    assert code == 0
    first = out.splitlines()[0]
    assert first.startswith("MATCH") and "pi" in first and "50,000 digits" in first
    assert "every digit compared with arb" in first  # a full comparison fits the default budget
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "42", "--budget", "0")
    assert code == 0
    first = out.splitlines()[0]
    assert first.startswith("MATCH") and "10 windows checked (head, tail and 8 random; 160 digits)" in first
    assert "damaged fraction below 31.23% at 95% from the 8 random windows" in first  # 1 - 0.05^(1/8)
    assert "--seed 42" in out  # the repeat line names the seed
    assert "16^-16" in out and "95% confidence" in out


def test_one_wrong_digit_in_a_million_is_found_by_plain_verify(capsys, tmp_path) -> None:
    from .reference import pi_hex  # pi from mpmath (tests/reference.py)

    digits = list(pi_hex(10**6))
    digits[654_320] = "0" if digits[654_320] != "0" else "1"  # digit 654,321 wrong
    path = tmp_path / "pi-1e6.txt"
    path.write_text("3." + "".join(digits) + "\n")
    code, payload = as_json(capsys, "verify", path, "--seed", "5")
    assert code == 1 and payload["verdict"] == "mismatch"
    assert payload["exhaustive"] and payload["covered"] == [[1, 10**6]]
    assert payload["wrong_digits"] == 1
    full = [c for c in payload["checks"] if c["kind"] == "full"]
    assert full and full[0]["position"] == 654_321
    code, out, _ = cli(capsys, "verify", path, "--seed", "5")
    assert out.startswith("MISMATCH  1 wrong digit in 1 run, the first at position 654,321")
    code, payload = as_json(capsys, "locate", path, "--budget", "0")
    assert code == 3 and payload["verdict"] == "unconfirmed" and not payload["exhaustive"]
    code, out, _ = cli(capsys, "locate", path, "--budget", "0")
    assert code == 3 and out.startswith("NOT RULED OUT")


def test_verify_prints_seed_it_chose(capsys) -> None:
    code, payload = as_json(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--samples", "3")
    assert code == 0
    assert f"--seed {payload['seed']}" in payload["repeat"]
    jsonschema.validate(payload, VERIFY_SCHEMA)


def test_repeat_command_repeats(capsys) -> None:
    _, first = as_json(capsys, "verify", SAMPLES / "pi-hex-astray.txt", "--samples", "4")
    args = shlex.split(first["repeat"])[1:]
    _, again = as_json(capsys, *args)
    assert [c["position"] for c in again["checks"]] == [c["position"] for c in first["checks"]]


def test_astray_sample(capsys) -> None:
    code, payload = as_json(capsys, "verify", SAMPLES / "pi-hex-astray.txt", "--seed", "1")
    assert code == 1 and payload["verdict"] == "mismatch"
    code, payload = as_json(capsys, "locate", SAMPLES / "pi-hex-astray.txt")
    jsonschema.validate(payload, LOCATE_SCHEMA)
    # samples/make_samples.py damages every digit from 37,123 on
    assert code == 1 and payload["first_mismatch"] == 37_123 and payload["rest"] == "wrong"
    code, out, _ = cli(capsys, "locate", SAMPLES / "pi-hex-astray.txt")
    assert out.startswith("MISMATCH  first wrong digit at position 37,123")
    assert "▲" in out  # the file map marks where the damage starts


def test_taperot_sample_scan(capsys) -> None:
    code, payload = as_json(capsys, "scan", SAMPLES / "pi-hex-taperot.txt.gz")
    jsonschema.validate(payload, SCAN_SCHEMA)
    assert code == 1
    # make_samples.py changes digits 2,718, 16,180 and 31,416
    assert [(r["start"], r["length"]) for r in payload["mismatch_runs"]] == [
        (2718, 1),
        (16180, 1),
        (31416, 1),
    ]
    assert payload["file"]["compression"] == "gzip"
    code, payload = as_json(capsys, "scan", SAMPLES / "pi-hex-clean.txt", "--reference", "mpfr")
    assert code == 0 and payload["reference"] == "mpfr"


def test_decimal_samples(capsys) -> None:
    code, payload = as_json(capsys, "verify", SAMPLES / "pi-decimal.txt", "--seed", "3")
    assert code == 0 and payload["method"] == "radix conversion"
    code, payload = as_json(capsys, "locate", SAMPLES / "pi-decimal-flipped.txt")
    assert code == 1 and payload["first_mismatch"] == 12_345  # make_samples.py flips digit 12,345


def test_other_constants_samples(capsys) -> None:
    code, payload = as_json(capsys, "verify", SAMPLES / "log2-hex.txt", "--seed", "1")
    assert code == 0 and payload["file"]["constant"] == "log2"
    code, payload = as_json(capsys, "locate", SAMPLES / "catalan-hex-damaged.txt")
    assert code == 1 and payload["file"]["constant"] == "catalan"
    assert payload["first_mismatch"] == 10_000  # make_samples.py damages digit 10,000


def test_quiet_prints_nothing(capsys) -> None:
    code, out, err = cli(capsys, "verify", SAMPLES / "pi-hex-astray.txt", "--quiet", "--seed", "1")
    assert (code, out) == (1, "")


@pytest.mark.parametrize("name", sorted(p.name for p in SAMPLES.iterdir() if p.suffix in (".txt", ".gz")))
def test_inspect_every_sample(capsys, name) -> None:
    code, out, _ = cli(capsys, "inspect", SAMPLES / name, "--json")
    assert code == 0
    info = json.loads(out)
    stretches = {"pi-hex-part2.txt": [1_000_001, 1_000_002], "pi-hex-part2-tapecopy.txt": [1]}
    if name in stretches:  # digits 1,000,001 to 1,004,096 (make_samples.py): no constant at digit 1
        assert info["first_positions"] == stretches[name] and info["count"] == 4_096
        assert info["constant"] is None
    else:
        assert info["constant"] in ("pi", "log2", "catalan", "e")
        assert info["count"] >= 20_000
        assert info["first_positions"] == [1] and info["first_how"] in ("start", "labels")
    code, out, _ = cli(capsys, "inspect", SAMPLES / name)
    assert code == 0 and "digits after the point" in out


def bad_files(tmp: Path) -> dict[str, tuple[Path, list[str], str]]:
    (tmp / "empty.txt").write_bytes(b"")
    (tmp / "garbage.dat").write_bytes(bytes(range(256)) * 40)
    (tmp / "hex.txt").write_text("3.243F6A8885A308D313198A2E03707344A4093822299F31D0\n")
    from .reference import pi_hex

    rows = [pi_hex(320)[i : i + 32] for i in range(0, 320, 32)]
    rows[6] = rows[6][:10] + "#" + rows[6][11:]  # a stray byte on line 7
    (tmp / "stray.txt").write_text("3." + "\n".join(rows) + "\n")
    (tmp / "dir").mkdir(exist_ok=True)
    return {
        "missing": (tmp / "nope.txt", [], "no such file"),
        "directory": (tmp / "dir", [], "directory"),
        "empty": (tmp / "empty.txt", [], "empty"),
        "garbage": (tmp / "garbage.dat", [], ""),
        "wrong base": (tmp / "hex.txt", ["--base", "10"], "base"),
        "bad base value": (tmp / "hex.txt", ["--base", "8"], "base must be 10 or 16"),
        "unknown constant": (tmp / "hex.txt", ["--constant", "tau"], "unknown constant"),
        "stray": (tmp / "stray.txt", [], "line 7"),
        "window": (tmp / "hex.txt", ["--window", "0"], "window"),
    }


@pytest.mark.parametrize("command", ["verify", "locate", "scan", "inspect"])
@pytest.mark.parametrize(
    "case",
    ["missing", "directory", "empty", "garbage", "wrong base", "bad base value", "unknown constant", "stray"],
)
def test_bad_input_one_line_exit_2(capsys, tmp_path, command, case) -> None:
    path, extra, needle = bad_files(tmp_path)[case]
    before = digest(path) if path.is_file() else None
    code, out, err = cli(capsys, command, path, *extra)
    assert code == 2, out
    errors = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert len(errors) == 1 and "Traceback" not in err
    assert needle.lower() in errors[0].lower()
    if before is not None:
        assert digest(path) == before


def test_bad_window(capsys, tmp_path) -> None:
    path, extra, needle = bad_files(tmp_path)["window"]
    code, _, err = cli(capsys, "verify", path, *extra)
    assert code == 2 and needle in err


def test_scan_refuses_when_memory_is_short(capsys, monkeypatch) -> None:
    from spotcheck.checks import scan as scan_mod

    monkeypatch.setattr(scan_mod, "memory_budget", lambda: 1000)
    code, _, err = cli(capsys, "scan", SAMPLES / "pi-hex-clean.txt")
    assert code == 2 and "verify" in err and "GiB" in err


def test_schema_command_prints_the_schema(capsys) -> None:
    code, out, _ = cli(capsys, "schema")
    assert code == 0 and json.loads(out) == json.loads(json.dumps(REPORT_SCHEMA))
    jsonschema.Draft202012Validator.check_schema(REPORT_SCHEMA)


def _labelled(digits: str, width: int = 50) -> list[str]:
    """End-labelled lines: each line's label counts the digits through its end."""
    return [f"{digits[i : i + width]} : {i + width}" for i in range(0, len(digits) - width + 1, width)]


def test_labels_that_lie_are_damage(capsys, tmp_path) -> None:
    from .reference import pi_hex  # pi from mpmath (tests/reference.py)

    digits = pi_hex(2000)
    lines = _labelled(digits)
    lines[10] = lines[10].replace(": 550", ": 600")  # a label changed, the digits right
    path = tmp_path / "labelled.txt"
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    before = digest(path)
    for command in ("verify", "locate", "scan"):
        code, payload = as_json(capsys, command, path)
        assert code == 1, command  # an inconsistent file
        assert payload["labels_consistent"] is False
        lf = payload["file"]["label_finding"]
        assert lf["line"] == 12 and lf["kind"] == "label-mismatch", (command, lf)
        assert payload["verdict"] in ("match", "unconfirmed"), command  # the digits themselves are right
        code, out, err = cli(capsys, command, path)
        assert code == 1 and "LABELS DISAGREE" in out and "line 12" in out and not err.strip(), command
    code, payload = as_json(capsys, "verify", path, "--ignore-labels", "--seed", "1")
    assert code == 0 and payload["labels_consistent"] and payload["file"]["label_finding"] is None
    code, out, _ = cli(capsys, "inspect", path, "--json")  # inspect lists the findings, exit 0
    payload = json.loads(out)
    assert code == 0 and any(f["line"] == 12 for f in payload["findings"])
    assert digest(path) == before


def test_labels_shifted_by_a_deleted_digit(capsys, tmp_path) -> None:
    from .reference import pi_hex  # pi from mpmath (tests/reference.py)

    digits = pi_hex(3000)
    lines = _labelled(digits)
    lines[20] = lines[20][:7] + lines[20][8:]  # digit 1,008 deleted: the line is one short
    path = tmp_path / "deleted.txt"
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    code, payload = as_json(capsys, "locate", path)
    assert code == 1 and payload["verdict"] == "mismatch"
    assert payload["first_mismatch"] == 1008  # the first digit that moved
    lf = payload["file"]["label_finding"]
    assert lf is not None and lf["line"] == 22  # "3." is line 1; lines[20] is line 22
    assert lf["position"] == 1001  # its first digit
    code, out, _ = cli(capsys, "verify", path, "--seed", "3")
    assert code == 1 and out.startswith("MISMATCH") and "LABELS DISAGREE  line 22" in out.splitlines()[1]
    code, payload = as_json(capsys, "verify", path, "--ignore-labels", "--seed", "3")
    assert code == 1 and payload["file"]["label_finding"] is None  # the digits are still wrong


def test_checkpoint_auto_is_one_journal_per_check_request(capsys, tmp_path, monkeypatch) -> None:
    # --checkpoint auto: the same rule in every command (the cache directory, a file named
    # after the request); verify and locate of one file share it, so locate reads the tail
    # window verify computed.
    from .reference import pi_hex  # gmpy2/MPFR's pi

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    path = tmp_path / "pi-astray.txt"
    digits = pi_hex(30_000)
    path.write_text("3." + digits[:20_000] + digits[20_000:][::-1] + "\n")
    code, _, err = cli(capsys, "verify", path, "--budget", "0", "--samples", "1", "--checkpoint", "auto")
    assert code == 1
    said = [ln.split("checkpoint: ", 1)[1] for ln in err.splitlines() if ln.startswith("checkpoint: ")]
    assert len(said) == 1 and Path(said[0]).parent == tmp_path / "cache" / "spotcheck"
    assert Path(said[0]).name.startswith("pi-bellard-n30000-")  # not the file name: a renamed file finds it
    code, payload = as_json(capsys, "locate", path, "--budget", "0", "--checkpoint", "auto")
    assert code == 1 and payload["first_mismatch"] == 20_001
    assert [p.name for p in (tmp_path / "cache" / "spotcheck").iterdir()] == [Path(said[0]).name]
    code, _, err = cli(capsys, "digits", "pi", "--at", "20000", "--count", "8", "--checkpoint", "auto")
    assert code == 0 and "-at20000-n8-" in err  # digits: its own request, its own file, same place
    assert len(list((tmp_path / "cache" / "spotcheck").iterdir())) == 2


def test_a_damaged_checkpoint_record_is_a_warning_in_the_check(capsys, tmp_path) -> None:
    # A flipped byte in one journal record: that record is skipped and its block computed
    # again; the check's answer is unchanged and the result says what happened (JSON and stderr).
    from .reference import pi_hex  # gmpy2/MPFR's pi

    path = tmp_path / "pi.txt"
    path.write_text("3." + pi_hex(30_000) + "\n")
    journal = tmp_path / "pi.journal"
    code, first = as_json(
        capsys, "verify", path, "--budget", "0", "--samples", "2", "--seed", "5", "--checkpoint", journal
    )
    assert code == 0 and first["warnings"] == []
    lines = journal.read_text().splitlines(keepends=True)
    blocks = [i for i, ln in enumerate(lines) if ln.startswith('{"block"')]
    assert blocks, "the journal holds the windows' blocks"
    i = blocks[len(blocks) // 2]
    k = lines[i].index(",") + 1  # a digit of the record's first number
    lines[i] = lines[i][:k] + ("7" if lines[i][k] != "7" else "8") + lines[i][k + 1 :]
    journal.write_text("".join(lines))
    code, again = as_json(
        capsys, "verify", path, "--budget", "0", "--samples", "2", "--seed", "5", "--checkpoint", journal
    )
    assert code == 0 and again["verdict"] == "match" and again["checks"] == first["checks"]
    assert len(again["warnings"]) == 1 and again["warnings"][0].startswith(
        "1 damaged record in the checkpoint "
    )
    jsonschema.validate(again, VERIFY_SCHEMA)
    journal.write_text("".join(lines))
    code, _, err = cli(
        capsys, "verify", path, "--budget", "0", "--samples", "2", "--seed", "5", "--checkpoint", str(journal)
    )
    assert code == 0 and "warning: 1 damaged record in the checkpoint " in err
