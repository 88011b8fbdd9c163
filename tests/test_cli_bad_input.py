"""Inputs that once ended in a traceback or ran away, through the CLI: each is one ``error:``
line and exit 2, with its exact words.

* a checkpoint that is a device (``/dev/full``, ``/dev/zero``, read forever before), a pipe,
  a file of a size no journal has, or a file that gives more bytes than its size says;
* a symbolic-link loop as FILE (``Path.resolve`` raised in the error path);
* a checkpoint path that cannot be looked at (a folder that may not be searched, a path
  under a regular file);
* a checkpoint in a folder that does not exist (it was made silently; only ``auto`` makes
  its cache folder);
* a digit file changed while a check reads it: the message says what changed;
* a formula file that is a device, a pipe or larger than any formula file (read until memory
  ran out before).
"""

from __future__ import annotations

import errno
import os
import stat
import time
from pathlib import Path

import pytest

from spotcheck.cli import run
from spotcheck.digitfile import source
from spotcheck.engine.api import checkpoint_request
from spotcheck.engine.evaluate import MAX_WORDS
from spotcheck.engine.journal import MAX_LINE_BYTES, journal_line
from spotcheck.formula_file import MAX_FORMULA_FILE_BYTES
from spotcheck.formulas import BUILTIN_CONSTANTS

SAMPLES = Path(__file__).resolve().parents[1] / "samples"
CLEAN = str(SAMPLES / "pi-hex-clean.txt")

# one command of each kind that keeps a checkpoint: computing digits, checking a file, locating
COMMANDS = {
    "digits": ["digits", "pi", "--at", "1000", "--count", "8"],
    "verify": ["verify", CLEAN, "--samples", "2", "--seed", "1"],
    "locate": ["locate", CLEAN],
}


def cli(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str]:
    """Exit code and the one error line (there must be exactly one, last, and no traceback)."""
    code = run([str(a) for a in args])
    _, err = capsys.readouterr()
    errors = [line for line in err.splitlines() if line.startswith("error: ")]
    assert len(errors) == 1 and err.splitlines()[-1] == errors[0], err
    assert "Traceback" not in err
    return code, errors[0]


# --- a checkpoint that is not a regular file -------------------------------------------


@pytest.mark.parametrize("device", ["/dev/full", "/dev/zero"])
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_a_device_as_checkpoint_is_refused(capsys, command: str, device: str) -> None:
    if not os.path.exists(device):
        pytest.skip(f"no {device} here")
    code, line = cli(capsys, *COMMANDS[command], "--checkpoint", device)
    assert code == 2
    assert line == f"error: checkpoint {device} refused: it is a device, not a regular file"


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_a_pipe_as_checkpoint_is_refused_without_waiting(capsys, tmp_path: Path, command: str) -> None:
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)  # opening it to read would wait for a writer
    code, line = cli(capsys, *COMMANDS[command], "--checkpoint", fifo)
    assert code == 2
    assert line == f"error: checkpoint {fifo} refused: it is a pipe, not a regular file"


def sparse(path: Path, size: int, head: bytes = b"") -> Path:
    """``head`` and then zeros up to ``size`` bytes, stored as a hole (skip where the filesystem cannot)."""
    path.write_bytes(head)
    try:
        os.truncate(path, size)
    except OSError as exc:
        pytest.skip(f"no sparse file of {size:,} bytes here ({exc.strerror})")
    return path


def test_a_huge_file_as_checkpoint_is_refused_after_one_line(capsys, tmp_path: Path) -> None:
    """1 TiB of zeros without a line break: no more than a line's worth of it is read."""
    huge = sparse(tmp_path / "huge", 1 << 40)
    started = time.monotonic()
    code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", huge)
    assert code == 2
    assert line == (
        f"error: checkpoint {huge} refused: not a spotcheck checkpoint file "
        "(its first line is longer than any checkpoint line)"
    )
    assert time.monotonic() - started < 60  # reading the whole file would take hours


def test_a_journal_with_a_line_longer_than_any_record_is_refused(capsys, tmp_path: Path) -> None:
    ck = tmp_path / "ck"
    assert run([*COMMANDS["digits"], "--checkpoint", str(ck)]) == 0
    journal = ck.read_bytes()
    sparse(ck, len(journal) + (1 << 40), journal)  # this request's own journal, then 1 TiB of zeros
    lines = journal.count(b"\n")
    capsys.readouterr()
    code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", ck)
    assert code == 2
    assert line == (
        f"error: checkpoint {ck} refused: line {lines + 1} is longer than any checkpoint record; "
        "not a checkpoint file"
    )


def test_a_file_longer_than_its_size_says_is_refused(capsys) -> None:
    status = Path("/proc/self/status")  # size 0, and yet it has lines
    if not status.exists() or status.stat().st_size != 0:
        pytest.skip("no /proc file of size 0 here")
    code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", status)
    assert code == 2
    assert line == (
        f"error: checkpoint {status} refused: it holds more than the 0 bytes its size says "
        "(not an ordinary file)"
    )


def test_the_line_cap_holds_every_true_line_with_a_wide_margin() -> None:
    """The longest block line (a value of MAX_WORDS words, offsets near 2^64) and the first line
    of every built-in formula's request are far below MAX_LINE_BYTES."""
    top = 2**64 - 1
    block = journal_line(
        {"block": [top, MAX_WORDS, top - 1, top, format(2 ** (64 * MAX_WORDS) - 1, "x"), top]}
    )
    assert 1000 < len(block) < MAX_LINE_BYTES // 100
    for constant in BUILTIN_CONSTANTS.values():
        for f in constant.formulas:
            request = checkpoint_request(constant.name, f, 10**15, 100_000)
            request["file"] = {"fingerprint": "f" * 32, "size_bytes": 10**15, "checked": 10**15}
            header = journal_line({"format": "spotcheck-journal", "version": 2, "request": request})
            assert len(header) < MAX_LINE_BYTES // 100, f.key


# --- a symbolic-link loop as FILE ----------------------------------------------------------

LOOP_COMMANDS = [
    ["verify", "{loop}"],
    ["inspect", "{loop}"],
    ["locate", "{loop}"],
    ["scan", "{loop}"],
    ["compare", "{loop}", CLEAN],
    ["compare", CLEAN, "{loop}"],
]


@pytest.mark.parametrize(
    "args", LOOP_COMMANDS, ids=["-".join(a[:1] + [str(a.index("{loop}"))]) for a in LOOP_COMMANDS]
)
@pytest.mark.parametrize("where", ["relative", "absolute"])
def test_a_symlink_loop_as_file(capsys, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, args, where) -> None:
    monkeypatch.chdir(tmp_path)
    os.symlink("loop", tmp_path / "loop")  # loop -> loop
    typed = "loop" if where == "relative" else str(tmp_path / "loop")
    code, line = cli(capsys, *[typed if a == "{loop}" else a for a in args])
    assert code == 2
    assert line == f"error: cannot open {typed}: {os.strerror(errno.ELOOP)}"


def test_a_symlink_loop_as_checkpoint(capsys, tmp_path: Path) -> None:
    loop = tmp_path / "loop"
    os.symlink(loop, loop)
    code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", loop)
    assert code == 2
    assert line == f"error: checkpoint {loop} refused: it cannot be reached ({os.strerror(errno.ELOOP)})"


def test_a_dangling_symlink_as_checkpoint(capsys, tmp_path: Path) -> None:
    dangling = tmp_path / "dangling"
    os.symlink(tmp_path / "nothing", dangling)
    code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", dangling)
    assert code == 2
    assert (
        line == f"error: checkpoint {dangling} refused: it is a symbolic link to a file that does not exist"
    )
    assert not (tmp_path / "nothing").exists()


# --- a checkpoint path that cannot be looked at --------------------------------------------


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_a_checkpoint_that_may_not_be_looked_at(
    capsys, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, command: str
) -> None:
    """A folder this user may not search (simulated: the tests run as root, who may search any)."""
    locked = tmp_path / "locked"
    locked.mkdir()
    ck = locked / "ck"
    real_stat = os.stat

    def stat_refused(path, *args, **kwargs):
        if os.fspath(path).startswith(str(locked)):
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), os.fspath(path))
        return real_stat(path, *args, **kwargs)

    monkeypatch.setattr(os, "stat", stat_refused)
    code, line = cli(capsys, *COMMANDS[command], "--checkpoint", ck)
    assert code == 2
    assert line == f"error: checkpoint {ck} refused: it cannot be reached ({os.strerror(errno.EACCES)})"


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root may search any folder")
def test_a_checkpoint_in_a_folder_that_may_not_be_searched(capsys, tmp_path: Path) -> None:
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0)
    try:
        code, line = cli(capsys, *COMMANDS["digits"], "--checkpoint", locked / "ck")
    finally:
        locked.chmod(stat.S_IRWXU)
    assert code == 2
    assert (
        line
        == f"error: checkpoint {locked / 'ck'} refused: it cannot be reached ({os.strerror(errno.EACCES)})"
    )


@pytest.mark.parametrize("depth", [1, 2], ids=["in-a-file", "deeper"])
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_a_checkpoint_under_a_regular_file(capsys, tmp_path: Path, command: str, depth: int) -> None:
    plain = tmp_path / "plain"
    plain.write_text("x")
    ck = plain / "ck" if depth == 1 else plain / "sub" / "ck"
    code, line = cli(capsys, *COMMANDS[command], "--checkpoint", ck)
    assert code == 2
    assert line == f"error: checkpoint {ck} cannot be written: {plain} is not a folder"
    assert plain.read_text() == "x"


# --- the folder of a checkpoint --------------------------------------------------------------


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_a_checkpoint_in_a_missing_folder_is_refused(capsys, tmp_path: Path, command: str) -> None:
    ck = tmp_path / "none" / "dir" / "ck"
    code, line = cli(capsys, *COMMANDS[command], "--checkpoint", ck)
    assert code == 2
    assert (
        line
        == f"error: checkpoint {ck} cannot be written: its folder {tmp_path / 'none' / 'dir'} does not exist"
    )
    assert not (tmp_path / "none").exists()


@pytest.mark.parametrize("command", ["digits", "verify"])
def test_auto_makes_its_cache_folder(
    capsys, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, command: str
) -> None:
    cache = tmp_path / "fresh-home" / ".cache"
    monkeypatch.setenv("XDG_CACHE_HOME", str(cache))
    assert run([*COMMANDS[command], "--checkpoint", "auto"]) == 0
    _, err = capsys.readouterr()
    made = list((cache / "spotcheck").iterdir())
    assert len(made) == 1 and f"checkpoint: {made[0]}" in err


# --- a file changed while it is read -------------------------------------------------------

BEFORE = 1_796_464_800 * 10**9  # 2026-12-05 10:00:00 UTC, in nanoseconds
AFTER = BEFORE + 7 * 10**9


@pytest.fixture
def edited_during_the_check(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    """A copy of the clean sample, and a way to change it after the check's first read."""
    monkeypatch.setenv("TZ", "UTC")
    time.tzset()
    monkeypatch.chdir(tmp_path)
    path = tmp_path / "pi.txt"
    path.write_bytes(Path(CLEAN).read_bytes())
    os.utime(path, ns=(BEFORE, BEFORE))
    real_read = source.PlainSource.read_at

    def arrange(edit):
        done = []

        def read_at(self, offset: int, n: int) -> bytes:
            if not done:
                done.append(1)
                edit(path)
                os.utime(path, ns=(AFTER, AFTER))
            return real_read(self, offset, n)

        monkeypatch.setattr(source.PlainSource, "read_at", read_at)

    yield path, arrange
    monkeypatch.delenv("TZ")
    time.tzset()


def flip_a_digit(path: Path) -> None:
    with open(path, "r+b") as f:  # same size: one digit replaced in place
        f.seek(1000)
        old = f.read(1)
        f.seek(1000)
        f.write(b"0" if old != b"0" else b"1")


def append_a_line(path: Path) -> None:
    with open(path, "ab") as f:
        f.write(b"0123456789ABCDEF\n")


@pytest.mark.parametrize("command", ["verify", "inspect", "compare"])
def test_a_file_edited_in_place_during_a_check(capsys, edited_during_the_check, command: str) -> None:
    path, arrange = edited_during_the_check
    size = path.stat().st_size
    arrange(flip_a_digit)
    args = ["compare", "pi.txt", CLEAN] if command == "compare" else [command, "pi.txt"]
    code, line = cli(capsys, *args)
    assert code == 2
    assert line == (
        "error: pi.txt changed while being read: it was modified again at 2026-12-05 10:00:07 "
        f"(before: 2026-12-05 10:00:00), its size unchanged at {size:,} bytes, so digits may have been "
        "changed in place; check it again once nothing writes to it"
    )


def test_a_file_growing_during_a_check(capsys, edited_during_the_check) -> None:
    path, arrange = edited_during_the_check
    size = path.stat().st_size
    arrange(append_a_line)
    code, line = cli(capsys, "verify", "pi.txt")
    assert code == 2
    assert line == (
        f"error: pi.txt changed while being read: its size went from {size:,} to {size + 17:,} bytes "
        "(modified at 2026-12-05 10:00:07); is it still being written? Check it again once it is complete"
    )


# --- a formula file that is not one --------------------------------------------------------


@pytest.mark.parametrize("kind", ["device", "pipe", "huge"])
def test_a_formula_file_that_is_no_file_of_text_is_refused_at_once(capsys, tmp_path: Path, kind: str) -> None:
    """/dev/zero as a formula file was read until memory ran out."""
    if kind == "device":
        path = Path("/dev/zero")
        if not path.exists():
            pytest.skip("no /dev/zero here")
        want = f"error: {path}: not a regular file, not a formula file"
    elif kind == "pipe":
        path = tmp_path / "fifo"
        os.mkfifo(path)
        want = f"error: {path}: not a regular file, not a formula file"
    else:
        path = sparse(tmp_path / "huge.toml", 1 << 40)
        want = f"error: {path}: longer than any formula file (more than {MAX_FORMULA_FILE_BYTES:,} bytes)"
    code, line = cli(capsys, "constants", "--formula-file", path)
    assert code == 2
    assert line == want
