"""The command line as a shell user meets it: pipes, help, one set of options, paths as typed."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from spotcheck.cli import run

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "samples"


def shell(command: str) -> subprocess.CompletedProcess[str]:
    """Run ``command`` under bash with pipefail, spotcheck being this interpreter's module."""
    spot = f"{sys.executable} -m spotcheck"
    env = {**os.environ, "COLUMNS": "80"}
    return subprocess.run(
        ["bash", "-o", "pipefail", "-c", command.replace("spotcheck", spot)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
    )


@pytest.mark.parametrize(
    ("command", "code"),
    [
        ("spotcheck verify samples/pi-hex-clean.txt --seed 1 | head -1", 0),
        ("spotcheck verify samples/pi-hex-astray.txt --seed 1 | head -1", 1),
        ("spotcheck constants | head -1", 0),
        ("spotcheck verify samples/pi-hex-clean.txt --seed 1 --json | head -c 10", 0),
    ],
)
def test_a_closed_pipe_ends_quietly_with_the_verdicts_code(command: str, code: int) -> None:
    done = shell(command)
    assert done.returncode == code, done.stderr
    assert "Traceback" not in done.stderr and "Exception" not in done.stderr
    assert done.stdout  # head got its line


def test_bare_spotcheck_prints_help_and_exits_0(capsys) -> None:
    assert run([]) == 0
    out, err = capsys.readouterr()
    assert "verify" in out and "locate" in out and "error" not in err


@pytest.mark.parametrize("command", ["verify", "locate", "scan", "inspect", "digits", "constants"])
def test_dash_h_is_help_and_flags_look_like_flags(capsys, command: str) -> None:
    assert run([command, "-h"]) == 0
    out, _ = capsys.readouterr()
    assert "Usage" in out and "<bool>" not in out


@pytest.mark.parametrize("command", ["verify", "locate", "scan"])
@pytest.mark.parametrize(
    "options",
    [["--workers", "1"], ["--quiet"], ["--json"], ["--formula-file", "samples/formulas/ridgeview.toml"]],
)
def test_one_set_of_options(capsys, command: str, options: list[str]) -> None:
    formula_files = sorted((SAMPLES / "formulas").glob("*.toml"))
    if "--formula-file" in options:
        options = ["--formula-file", str(formula_files[0])]
    code = run([command, str(SAMPLES / "pi-hex-clean.txt"), *options])
    capsys.readouterr()
    assert code == 0, (command, options)


def test_inspect_takes_quiet(capsys) -> None:
    assert run(["inspect", str(SAMPLES / "pi-hex-clean.txt"), "--quiet"]) == 0
    out, _ = capsys.readouterr()
    assert out == ""


def test_the_cli_names_the_option_that_resolves_a_library_error(capsys, tmp_path) -> None:
    path = tmp_path / "noise.txt"
    path.write_text("0." + "0123456789ABCDEF" * 100 + "\n")
    assert run(["verify", str(path)]) == 2
    _, err = capsys.readouterr()
    assert "--constant NAME" in err and len(err.strip().splitlines()) == 1


def test_locate_names_scan_and_budget_when_the_comparison_does_not_fit(capsys) -> None:
    code = run(["locate", str(SAMPLES / "pi-hex-taperot.txt.gz"), "--budget", "0"])
    out, _ = capsys.readouterr()
    assert code == 3 and "spotcheck scan" in out and "--budget" in out


def test_errors_name_the_path_as_typed(capsys, tmp_path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "empty.txt").write_text("")
    for command in ("verify", "locate", "scan", "inspect"):
        assert run([command, "./sub/../sub/empty.txt"]) == 2
        _, err = capsys.readouterr()
        assert "./sub/../sub/empty.txt" in err, (command, err)


def test_the_repeat_line_is_built_from_the_parsed_options(capsys) -> None:
    import json
    import shlex

    args = ["locate", str(SAMPLES / "pi-hex-astray.txt"), "--window", "12", "--limit", "40000"]
    args += ["--reference", "mpfr", "--budget", "5", "--json"]
    run(args)
    payload = json.loads(capsys.readouterr().out)
    again = shlex.split(payload["repeat"])
    for option, value in [("--window", "12"), ("--limit", "40000"), ("--reference", "mpfr")]:
        assert again[again.index(option) + 1] == value
    assert float(again[again.index("--budget") + 1]) == 5
    run([*again[1:], "--json"])
    assert json.loads(capsys.readouterr().out)["first_mismatch"] == payload["first_mismatch"]


def test_a_truncated_labelled_file_is_reported_by_verify_and_inspect_shows_its_end(capsys, tmp_path) -> None:
    from .reference import pi_hex  # pi from mpmath (tests/reference.py)

    digits = pi_hex(2000)
    lines = [f"{digits[i : i + 50]} : {i + 50}" for i in range(0, 2000, 50)]
    body = "3.\n" + "\n".join(lines) + "\n"
    path = tmp_path / "cut.txt"
    path.write_text(body[: body.rindex(" : ") - 20] + "\n")  # cut inside the last line: its label is gone
    for command in ("verify", "locate"):
        assert run([command, str(path)]) == 1
        out, _ = capsys.readouterr()
        assert "LABELS DISAGREE  line 41: no position label" in out and "cut short" in out
    assert run([command, str(path), "--ignore-labels"]) == 0
    capsys.readouterr()
    assert run(["inspect", str(path)]) == 0
    out, _ = capsys.readouterr()
    last = next(ln for ln in out.splitlines() if "last digits" in ln)
    assert digits[1980 - 8 : 1980] in last  # the file's real last digits (1,980 of them), not its middle


@pytest.mark.parametrize("command", ["verify", "locate"])
def test_checkpoint_takes_a_file_or_auto(capsys, tmp_path, command: str) -> None:
    where = tmp_path / "ck" / "journal"
    where.parent.mkdir()  # a named checkpoint's folder must exist (only auto makes its own)
    args = [command, str(SAMPLES / "pi-hex-astray.txt"), "--budget", "0", "--checkpoint", str(where)]
    assert run(args) == 1
    capsys.readouterr()
    assert where.is_file()  # one journal for every window
    assert run(args) == 1  # the rerun reads it back and reaches the same verdict
    capsys.readouterr()
    assert run([command, str(SAMPLES / "pi-hex-clean.txt"), "--checkpoint", str(where.parent)]) == 2
    _, err = capsys.readouterr()
    assert "directory" in err
