"""``-`` as FILE reads standard input, through a real pipe: every check, the same verdicts as the
file itself, standard input only read, and one ``error:`` line where it cannot serve."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "samples"


def piped(command: str, tmp: Path) -> subprocess.CompletedProcess[str]:
    """``command`` under bash with pipefail, spotcheck being this interpreter's module; TMPDIR is ``tmp``."""
    spot = f"{sys.executable} -m spotcheck"
    env = {**os.environ, "COLUMNS": "100", "TMPDIR": str(tmp)}
    return subprocess.run(
        ["bash", "-o", "pipefail", "-c", command.replace("spotcheck", spot)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
    )


@pytest.mark.parametrize(
    ("command", "code", "first_line"),
    [
        (
            "gzip -dc samples/pi-hex-taperot.txt.gz | spotcheck verify - --seed 1",
            1,
            "MISMATCH  3 wrong digits in 3 runs, the first at position 2,718, every digit compared "
            "(pi in base 16, 40,000 digits)",
        ),
        (
            "xz -c samples/pi-hex-astray.txt | spotcheck locate -",
            1,
            "MISMATCH  first wrong digit at position 37,123 (pi in base 16, 50,000 digits)",
        ),
        (
            "cat samples/pi-decimal.txt | spotcheck scan -",
            0,
            "MATCH  every one of 30,000 digits agrees (pi in base 10, 30,000 digits)",
        ),
        (
            "cat samples/log2-hex.txt | spotcheck compare - samples/log2-hex-mirror.txt.gz",
            1,
            "DIFFER  keep A (-): it agrees with the certified digits wherever the copies differ "
            "(2 differing runs, 7 differing digits)",
        ),
        (
            "cat samples/log2-hex-mirror.txt.gz | spotcheck compare samples/log2-hex.txt -",
            1,
            "DIFFER  keep A (samples/log2-hex.txt): it agrees with the certified digits wherever the copies "
            "differ (2 differing runs, 7 differing digits)",
        ),
    ],
)
def test_dash_reads_standard_input(command, code, first_line, tmp_path) -> None:
    done = piped(command, tmp_path)
    assert done.returncode == code, done.stderr
    assert done.stdout.splitlines()[0] == first_line
    assert "Traceback" not in done.stderr
    assert list(tmp_path.iterdir()) == []  # the copy of standard input is gone at exit


def test_dash_inspect_names_standard_input_as_typed(tmp_path) -> None:
    done = piped("cat samples/pi-decimal.txt | spotcheck inspect - --json", tmp_path)
    assert done.returncode == 0, done.stderr
    assert '"path": "-"' in done.stdout and '"count": 30000' in done.stdout


@pytest.mark.parametrize(
    ("command", "message"),
    [
        ("spotcheck verify - < /dev/null", "error: -: the file is empty\n"),
        (
            "cat samples/pi-hex-clean.txt | spotcheck compare - -",
            "error: both copies are standard input (-): pipe one copy in and name the other file\n",
        ),
        (
            "spotcheck verify - <&-",
            "error: standard input (-) is closed: pipe the digits in or name the file\n",
        ),
    ],
)
def test_dash_without_digits_is_one_error_line(command, message, tmp_path) -> None:
    done = piped(command, tmp_path)
    assert (done.returncode, done.stdout, done.stderr) == (2, "", message)


def test_a_copy_that_does_not_fit_says_what_to_do(tmp_path) -> None:
    """TMPDIR on a full disk: /dev/full takes no byte (the copy's folder is where the message points)."""
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full on this system")
    from spotcheck.digitfile import source
    from spotcheck.errors import FileAccessError

    r, w = os.pipe()
    os.write(w, b"3.243F6A8885A308D3\n")
    os.close(w)
    saved_stdin, saved_copy = os.dup(0), list(source._stdin_copy)
    source._stdin_copy.clear()
    real_mkstemp = __import__("tempfile").mkstemp
    try:
        os.dup2(r, 0)
        import tempfile

        def full_disk(prefix: str = "") -> tuple[int, str]:
            fd, name = real_mkstemp(prefix=prefix, dir=tmp_path)
            os.dup2(os.open("/dev/full", os.O_WRONLY), fd)
            return fd, name

        tempfile.mkstemp = full_disk  # type: ignore[assignment]
        with pytest.raises(FileAccessError) as info:
            source.stdin_copy()
    finally:
        tempfile.mkstemp = real_mkstemp
        os.dup2(saved_stdin, 0)
        os.close(saved_stdin)
        os.close(r)
        source._stdin_copy[:] = saved_copy
    assert info.value.strerror == (
        f"standard input (-) could not be copied to {tmp_path} (No space left on device): the checks read a "
        "file more than once, so the copy needs as much room as the input; write it to a file where there is "
        "room and name that file"
    )
    assert list(tmp_path.iterdir()) == []


def test_help_says_dash_reads_standard_input(capsys, monkeypatch) -> None:
    from spotcheck.cli import run

    monkeypatch.setenv("COLUMNS", "200")
    for command in ("verify", "locate", "scan", "inspect"):
        assert run([command, "--help"]) == 0
        assert "- reads standard input." in capsys.readouterr().out
    assert run(["compare", "--help"]) == 0
    assert "The other copy (any layout; - reads standard input)." in capsys.readouterr().out
