"""The journal checkpoint (spotcheck/engine/journal.py): durability, damage, refusal, faults."""

from __future__ import annotations

import hashlib
import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pytest

from spotcheck.engine import blocks
from spotcheck.engine.api import checkpoint_request, default_checkpoint_path, extract
from spotcheck.engine.blocks import BlockRecord, BlockRequest
from spotcheck.engine.journal import Journal
from spotcheck.engine.series import series_of
from spotcheck.errors import CheckpointError, SpotcheckError
from spotcheck.formulas import PI_BELLARD, Formula

from .reference import pi_hex

ROOT = Path(__file__).resolve().parents[1]

# A head sum short on either backend, cut into many small blocks
# (bellard at 50,000: 20,000 values of k -> 79 blocks of 256).
POSITION = 50_000
BLOCK_K = 256
EXPECTED = pi_hex(POSITION + 13)[POSITION - 1 :]  # gmpy2/MPFR's pi (tests/reference.py)
SERIES = series_of(PI_BELLARD)
D = 4 * (POSITION - 1)
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}


def run_with(path: Path, position: int = POSITION, formula: str = "bellard", **kw):
    return extract("pi", position, 14, formula=formula, block_k=BLOCK_K, checkpoint=path, **kw)


# --- an independent reader of the format DEVELOPERS.md describes -----------------


def read_lines(path: Path) -> tuple[list[dict | None], bytes]:
    """Complete lines (``None`` where the checksum fails) and the torn tail."""
    data = path.read_bytes()
    cut = data.rfind(b"\n") + 1
    out: list[dict | None] = []
    for raw in data[:cut].split(b"\n")[:-1]:
        text, _, checksum = raw.decode("utf-8", "replace").rpartition("\t")
        ok = hashlib.sha256(text.encode()).hexdigest()[:32] == checksum
        out.append(json.loads(text) if ok else None)
    return out, data[cut:]


def journal_blocks(path: Path) -> set[tuple[int, int, int]]:
    """``(d, words, k0)`` of every block line with a good checksum."""
    if not path.exists():
        return set()
    lines, _ = read_lines(path)
    return {(b[0], b[1], b[2]) for obj in lines if obj and "block" in obj for b in [obj["block"]]}


def all_blocks(path: Path) -> set[tuple[int, int, int]]:
    lines, _ = read_lines(path)
    sections = [obj["section"] for obj in lines if obj and "section" in obj]
    return {
        (s["d"], s["words"], k0)
        for s in sections
        for k0, _ in BlockRequest(SERIES, s["d"], s["words"], s["block_k"]).blocks()
    }


@pytest.fixture
def finished(tmp_path: Path) -> Path:
    path = tmp_path / "cp.journal"
    assert run_with(path).digits == EXPECTED
    return path


def no_compute(*args: object) -> BlockRecord:
    raise AssertionError("a block was computed")


# --- format and reuse --------------------------------------------------------------


def test_journal_written_and_reused(finished: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    lines, torn = read_lines(finished)
    assert torn == b"" and all(obj is not None for obj in lines)
    assert lines[0]["format"] == "spotcheck-journal" and lines[0]["request"]["position"] == POSITION
    assert journal_blocks(finished) == all_blocks(finished)
    monkeypatch.setattr(blocks, "compute_block", no_compute)
    progress = []
    again = run_with(finished, block_progress=progress.append)
    assert again.digits == EXPECTED
    assert progress[-1].resumed == progress[-1].total and progress[-1].computed == 0
    # the summary counts loaded terms apart: everything was loaded
    assert again.terms_loaded > 0 and again.terms_computed == again.terms - again.terms_loaded
    assert again.blocks_computed == 0 and again.blocks_loaded == len(journal_blocks(finished))


def test_every_block_is_on_disk_before_it_is_reported(tmp_path: Path) -> None:
    path = tmp_path / "cp.journal"
    on_disk_when_reported = []

    def check(p) -> None:
        on_disk_when_reported.append(len(journal_blocks(path)) >= p.done)

    assert run_with(path, block_progress=check).digits == EXPECTED
    assert on_disk_when_reported and all(on_disk_when_reported)


def test_resumed_run_counts_computed_and_loaded_apart(tmp_path: Path) -> None:
    path = tmp_path / "cp.journal"
    assert run_with(path).digits == EXPECTED
    lines, _ = read_lines(path)
    # keep the header, the sections and the first 30 blocks only
    kept, n = [], 0
    raw = path.read_bytes().split(b"\n")
    for obj, line in zip(lines, raw):
        if obj and "block" in obj:
            n += 1
            if n > 30:
                continue
        kept.append(line)
    path.write_bytes(b"\n".join(kept) + b"\n")
    result = run_with(path)
    assert result.digits == EXPECTED
    assert result.blocks_loaded == 30 and result.blocks_computed == len(all_blocks(path)) - 30
    assert 0 < result.terms_loaded < result.terms
    assert result.terms_loaded == 30 * BLOCK_K * len(SERIES.js)  # every loaded block is a whole one


def test_default_checkpoint_path(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    path = default_checkpoint_path("pi", POSITION, 14)
    assert path.parent == tmp_path / "spotcheck"
    assert path != default_checkpoint_path("pi", POSITION + 1, 14)
    assert path != default_checkpoint_path("pi", POSITION, 14, formula="bbp")
    assert extract("pi", POSITION, 14, block_k=BLOCK_K, checkpoint=True).digits == EXPECTED
    assert path.exists()


# --- torn lines and damage ------------------------------------------------------------


@pytest.mark.parametrize("cut", [1, 7, 40])
def test_torn_final_line_is_ignored(finished: Path, cut: int, monkeypatch: pytest.MonkeyPatch) -> None:
    data = finished.read_bytes()
    last_line_start = data.rstrip(b"\n").rfind(b"\n") + 1
    torn = data[: last_line_start + cut]  # the last record, cut mid-write
    finished.write_bytes(torn)
    lost = all_blocks(finished) - journal_blocks(finished)
    assert len(lost) == 1
    computed = []
    real = blocks.compute_block

    def counting(series, d, words, k0, k1):
        computed.append((d, words, k0))
        return real(series, d, words, k0, k1)

    monkeypatch.setattr(blocks, "compute_block", counting)
    result = run_with(finished)
    assert result.digits == EXPECTED and result.warnings == ()
    assert set(computed) == lost  # only the torn block was computed again
    _, tail = read_lines(finished)
    assert tail == b"" and journal_blocks(finished) == all_blocks(finished)  # compacted


def test_flipped_byte_refuses_that_record_only(finished: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Decision (DEVELOPERS.md): a record whose own checksum fails is refused
    # alone and its block computed again; the other records are kept.
    raw = finished.read_bytes().split(b"\n")
    block_lines = [i for i, line in enumerate(raw) if line.startswith(b'{"block"')]
    i = block_lines[len(block_lines) // 2]
    obj = json.loads(raw[i].split(b"\t")[0])
    damaged_block = (obj["block"][0], obj["block"][1], obj["block"][2])
    line = bytearray(raw[i])
    pos = line.index(b'"', line.index(b"[") + 1) + 3  # inside the value's hex digits
    line[pos] ^= 0x01
    raw[i] = bytes(line)
    finished.write_bytes(b"\n".join(raw))
    assert damaged_block not in journal_blocks(finished)
    computed = []
    real = blocks.compute_block

    def counting(series, d, words, k0, k1):
        computed.append((d, words, k0))
        return real(series, d, words, k0, k1)

    monkeypatch.setattr(blocks, "compute_block", counting)
    result = run_with(finished)
    assert result.digits == EXPECTED
    assert computed == [damaged_block]
    assert len(result.warnings) == 1 and "damaged" in result.warnings[0]
    assert journal_blocks(finished) == all_blocks(finished)  # compacted without the damaged line


def test_flipped_byte_in_the_header_refuses_the_file(finished: Path) -> None:
    data = bytearray(finished.read_bytes())
    data[5] ^= 0x20
    finished.write_bytes(bytes(data))
    with pytest.raises(CheckpointError, match="refused"):
        run_with(finished)


def line_with_checksum(obj: dict) -> bytes:
    text = json.dumps(obj, separators=(",", ":"), sort_keys=True)
    return f"{text}\t{hashlib.sha256(text.encode()).hexdigest()[:32]}".encode()


def edit_first_block(path: Path, field: int, value: object) -> None:
    """Change one field of the first block and give the line a valid checksum."""
    raw = path.read_bytes().split(b"\n")
    i = next(i for i, line in enumerate(raw) if line.startswith(b'{"block"'))
    obj = json.loads(raw[i].split(b"\t")[0])
    obj["block"][field] = value
    raw[i] = line_with_checksum(obj)
    path.write_bytes(b"\n".join(raw))


def edit_first_section(path: Path, **change: object) -> None:
    raw = path.read_bytes().split(b"\n")
    i = next(i for i, line in enumerate(raw) if line.startswith(b'{"section"'))
    obj = json.loads(raw[i].split(b"\t")[0])
    obj["section"].update(change)
    raw[i] = line_with_checksum(obj)
    path.write_bytes(b"\n".join(raw))


def duplicate_line(path: Path, prefix: bytes) -> None:
    raw = path.read_bytes().split(b"\n")
    i = next(i for i, line in enumerate(raw) if line.startswith(prefix))
    raw.insert(i + 1, raw[i])
    path.write_bytes(b"\n".join(raw))


def block_first(path: Path) -> None:
    raw = path.read_bytes().split(b"\n")
    i = next(i for i, line in enumerate(raw) if line.startswith(b'{"block"'))
    raw.insert(1, raw.pop(i))
    path.write_bytes(b"\n".join(raw))


# Records with a valid checksum but content that is not this request's: the whole file is refused.
REFUSED = {
    "not a journal": lambda p: p.write_bytes(b"\x00\xff garbage\n"),
    "the old JSON format": lambda p: p.write_text('{"format": "spotcheck-head-blocks", "version": 1}\n'),
    "value beyond 2^P": lambda p: edit_first_block(p, 4, format(1 << 128, "x")),
    "wrong term count": lambda p: edit_first_block(p, 5, 1),
    "shifted range": lambda p: edit_first_block(p, 2, 1),
    "value not hex": lambda p: edit_first_block(p, 4, "xyz"),
    "k0 as a string": lambda p: edit_first_block(p, 2, "0"),
    "terms as a float": lambda p: edit_first_block(p, 5, float(7 * BLOCK_K)),
    "section of another series": lambda p: edit_first_section(p, k_total=5),
    "duplicated section": lambda p: duplicate_line(p, b'{"section"'),
    "duplicated block": lambda p: duplicate_line(p, b'{"block"'),
    "block before its section": block_first,
}


@pytest.mark.parametrize("damage", list(REFUSED))
def test_foreign_content_refuses_the_file(finished: Path, damage: str) -> None:
    REFUSED[damage](finished)
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="refused") as info:
        run_with(finished)
    assert isinstance(info.value, SpotcheckError) and isinstance(info.value, ValueError)
    assert finished.read_bytes() == before  # left alone


@pytest.mark.parametrize(
    ("position", "formula"),
    [(POSITION + 1, "bellard"), (POSITION, "bbp")],
    ids=["other position", "other formula"],
)
def test_journal_of_another_request_is_refused(finished: Path, position: int, formula: str) -> None:
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="another request"):
        run_with(finished, position, formula)
    assert finished.read_bytes() == before


def test_same_key_other_coefficients_is_refused(finished: Path) -> None:
    c = list(PI_BELLARD.coefficients)
    c[0], c[1] = c[1], c[0]
    other = Formula(
        key="bellard",
        s=1,
        base=PI_BELLARD.base,
        m=PI_BELLARD.m,
        coefficients=tuple(c),
        scale=PI_BELLARD.scale,
        source="test",
    )
    with pytest.raises(CheckpointError, match="another request"):
        Journal(finished, series_of(other), checkpoint_request("pi", other, POSITION, 14))


def test_other_block_size_is_refused(finished: Path) -> None:
    with pytest.raises(CheckpointError, match="blocks of"):
        extract("pi", POSITION, 14, block_k=BLOCK_K * 2, checkpoint=finished)


def test_directory_is_refused(tmp_path: Path) -> None:
    with pytest.raises(CheckpointError, match="directory"):
        run_with(tmp_path)


# --- faults ------------------------------------------------------------------------------


def test_uncreatable_checkpoint_is_refused_before_any_work(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Tests run as root, for whom a read-only folder is writable; a folder
    # that cannot exist (a path under a regular file) fails for everyone.
    plain = tmp_path / "plain-file"
    plain.write_text("x")
    monkeypatch.setattr(blocks, "compute_block", no_compute)
    with pytest.raises(CheckpointError, match="cannot be written"):
        run_with(plain / "cp.journal")


def test_uncreatable_checkpoint_cli_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from spotcheck.cli import run

    plain = tmp_path / "plain-file"
    plain.write_text("x")
    code = run(["digits", "pi", "--at", "1000", "--count", "8", "--checkpoint", str(plain / "cp")])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    errors = [line for line in err.splitlines() if line.startswith("error: ")]
    assert len(errors) == 1 and err.splitlines()[-1] == errors[0]
    assert "cannot be written" in errors[0] and "not a folder" in errors[0] and "Traceback" not in err


def read_only_folder(tmp_path: Path) -> Path:
    """A folder in which this process cannot create a file.

    Root ignores permission bits, so for root it is /sys (sysfs refuses new
    files to everyone); for anyone else a folder with mode 555.
    """
    if os.geteuid() == 0:
        folder = Path("/sys")
    else:
        folder = tmp_path / "ro"
        folder.mkdir()
        folder.chmod(0o555)
    probe = folder / "spotcheck-probe"
    try:
        probe.write_text("x")
    except OSError:
        return folder
    probe.unlink()
    pytest.skip(f"{folder} is writable here")


def test_read_only_folder_exit_2_before_any_work(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    from spotcheck.cli import run

    target = read_only_folder(tmp_path) / "spotcheck-test.journal"
    monkeypatch.setattr(blocks, "compute_block", no_compute)
    code = run(["digits", "pi", "--at", str(POSITION), "--count", "8", "--checkpoint", str(target)])
    out, err = capsys.readouterr()
    assert code == 2 and out == "", err
    errors = [line for line in err.splitlines() if line.startswith("error: ")]
    assert len(errors) == 1 and "cannot be written" in errors[0] and "Traceback" not in err
    assert not target.exists()


FILL_CHILD = textwrap.dedent(
    """
    import resource, signal, sys
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)   # a write past the limit fails with EFBIG
    from spotcheck.engine import blocks
    blocks.DEEP_BLOCK_K_MIN = 256                     # many small blocks through the CLI
    limit = int(sys.argv[2])
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    from spotcheck.cli import run
    sys.exit(run(["digits", "pi", "--at", "{position}", "--count", "14", "--checkpoint", sys.argv[1]]))
    """
).format(position=POSITION)


def test_disk_filling_mid_run_gives_a_warning_and_the_digits(tmp_path: Path) -> None:
    path = tmp_path / "cp.journal"
    # room for the header, the section and a few records (each about 120 bytes)
    proc = subprocess.run(
        [sys.executable, "-c", FILL_CHILD, str(path), "1200"],
        env=ENV,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.splitlines()[0] == EXPECTED
    warnings = [line for line in proc.stderr.splitlines() if line.startswith("warning: ")]
    assert len(warnings) == 1 and "File too large" in warnings[0], proc.stderr
    assert "Traceback" not in proc.stderr
    # the blocks written before the limit are valid and resume
    kept = journal_blocks(path)
    assert 0 < len(kept) < len(all_blocks(path))
    result = extract("pi", POSITION, 14, checkpoint=path, block_k=BLOCK_K)
    assert result.digits == EXPECTED and result.blocks_loaded == len(kept)


# --- kill -9 and resume ---------------------------------------------------------------------

KILL_CHILD = textwrap.dedent(
    """
    import sys, time
    from spotcheck.engine import blocks
    delay = float(sys.argv[5])
    if delay:
        compute = blocks.compute_block
        def slow(*args):
            time.sleep(delay)
            return compute(*args)
        blocks.compute_block = slow
    from spotcheck.engine.api import extract
    def said(p):
        print("done", p.d, p.words, p.done, flush=True)
    r = extract("pi", int(sys.argv[2]), 14, formula=sys.argv[3], block_k=int(sys.argv[4]),
                checkpoint=sys.argv[1], block_progress=said)
    print("digits", r.digits, r.blocks_loaded, r.blocks_computed, flush=True)
    """
)


class Child:
    """A child run whose stdout lines are collected by a thread."""

    def __init__(self, path: Path, position: int, formula: str, block_k: int, delay: float = 0.0) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-c", KILL_CHILD, str(path), str(position), formula, str(block_k), str(delay)],
            env=ENV,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        self.lines: list[str] = []
        self.reader = threading.Thread(target=self._read, daemon=True)
        self.reader.start()

    def _read(self) -> None:
        assert self.proc.stdout is not None
        for line in self.proc.stdout:
            self.lines.append(line.split())

    def reports(self) -> int:
        return sum(1 for fields in list(self.lines) if fields[0] == "done")

    def reported(self) -> dict[tuple[int, int], int]:
        """Blocks done per section, as the child last reported them."""
        out: dict[tuple[int, int], int] = {}
        for fields in list(self.lines):
            if fields[0] == "done":
                out[(int(fields[1]), int(fields[2]))] = int(fields[3])
        return out

    def finish(self) -> tuple[int, str]:
        self.proc.wait(timeout=600)
        self.reader.join(timeout=30)
        assert self.proc.stderr is not None
        return self.proc.returncode, self.proc.stderr.read()


LEVELS: list[int] = []
"""Blocks in the journal after each kill of the current campaign."""


def kill_and_check(path: Path, child: Child, wait_reports: int, rng: random.Random) -> bool:
    """Kill ``child`` after about ``wait_reports`` more reports; check nothing reported was lost.

    Returns True if the child finished before it could be killed.
    """
    deadline = time.monotonic() + 120
    while child.reports() < wait_reports and child.proc.poll() is None:
        assert time.monotonic() < deadline
        time.sleep(0.001)
    time.sleep(rng.uniform(0, 0.01))  # a random moment inside a block
    if child.proc.poll() is not None:
        child.finish()
        return True
    child.proc.send_signal(signal.SIGKILL)
    code, err = child.finish()
    assert code == -signal.SIGKILL, err
    LEVELS.append(len(journal_blocks(path)))
    # every block the child reported done is in the journal: at most the
    # block in flight (one worker) was lost
    on_disk: dict[tuple[int, int], int] = {}
    for d, words, _ in journal_blocks(path) if path.exists() else set():
        on_disk[(d, words)] = on_disk.get((d, words), 0) + 1
    for section, done in child.reported().items():
        assert on_disk.get(section, 0) >= done
        assert on_disk.get(section, 0) <= done + 1  # the one written, not yet reported
    return False


def kill_campaign(
    path: Path, position: int, formula: str, block_k: int, kills: int, delay: float, spread: int
) -> tuple[int, list[str]]:
    """Run, kill at random moments (``spread`` blocks apart on average), resume; return the kills
    and the final run's last line."""
    rng = random.Random(20_071_997)
    done_kills = 0
    LEVELS.clear()
    while True:
        child = Child(path, position, formula, block_k, delay)
        if done_kills < 3:  # some kills before the first block (startup, header write)
            time.sleep(rng.uniform(0, 0.3))
            if child.proc.poll() is None:
                child.proc.send_signal(signal.SIGKILL)
                child.finish()
                done_kills += 1
                continue
        if done_kills >= kills:
            code, err = child.finish()
            assert code == 0, err
            last = next(f for f in reversed(child.lines) if f[0] == "digits")
            return done_kills, last
        if kill_and_check(path, child, rng.randint(0, 2 * spread), rng):
            last = next(f for f in reversed(child.lines) if f[0] == "digits")
            return done_kills, last
        done_kills += 1


def test_sigkill_loses_at_most_the_block_in_flight(tmp_path: Path) -> None:
    # A short run on either backend (slowed to about 20 ms a block), killed 6 times.
    path = tmp_path / "cp.journal"
    kills, last = kill_campaign(path, POSITION, "bellard", BLOCK_K, kills=6, delay=0.02, spread=6)
    assert kills == 6
    assert last[1] == EXPECTED
    assert int(last[2]) > 0  # the final run resumed blocks of the killed ones


@pytest.mark.slow
def test_sigkill_campaign_gives_the_1997_table_digits(tmp_path: Path) -> None:
    # pi at 10^7 with bbp in blocks of 2^15 values of k (306 blocks, 4*10^7 terms),
    # killed at >= 20 random moments; the final resume must give the 1997
    # table's digits (Bailey, Borwein, Plouffe, Math. Comp. 66 (1997), table:
    # position 10^7 -> 17AF5863EFED8D).
    path = tmp_path / "cp.journal"
    rng_kills = 24
    # Each block is slowed by 10 ms in the child: the SIMD kernel finishes a
    # block of 2^15 values of k in about a millisecond, faster than the parent
    # can aim a kill between reports.
    kills, last = kill_campaign(path, 10**7, "bbp", 1 << 15, kills=rng_kills, delay=0.01, spread=12)
    assert kills >= 20
    assert len(set(LEVELS)) >= 15  # the kills fell all along the run, not in one place
    assert last[1] == "17AF5863EFED8D"
    again = extract("pi", 10**7, 14, formula="bbp", block_k=1 << 15, checkpoint=path)
    assert again.digits == "17AF5863EFED8D" and again.blocks_computed == 0


# --- Ctrl-C and SIGTERM ----------------------------------------------------------------------

STOP_CHILD = textwrap.dedent(
    """
    import sys, time
    from spotcheck.engine import blocks
    blocks.DEEP_BLOCK_K_MIN = 256
    compute = blocks.compute_block
    def slow(*args):
        time.sleep(0.05)
        return compute(*args)
    blocks.compute_block = slow
    from spotcheck.cli import run
    sys.exit(run(["digits", "pi", "--at", "{position}", "--count", "14", "--checkpoint", sys.argv[1],
                  "--workers", sys.argv[2]]))
    """
).format(position=POSITION)


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
@pytest.mark.parametrize("workers", ["1", "2"])
def test_ctrl_c_and_sigterm_stop_within_one_block(tmp_path: Path, sig: signal.Signals, workers: str) -> None:
    path = tmp_path / "cp.journal"
    child = subprocess.Popen(
        [sys.executable, "-c", STOP_CHILD, str(path), workers],
        env=ENV,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        deadline = time.monotonic() + 120
        while len(journal_blocks(path)) < 5:
            assert child.poll() is None, child.communicate()
            assert time.monotonic() < deadline
            time.sleep(0.005)
        t0 = time.monotonic()
        child.send_signal(sig)
        out, err = child.communicate(timeout=30)
        stopped_in = time.monotonic() - t0
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode == 130, err
    assert stopped_in < 5  # blocks take about 0.05 s; process exit included
    assert out == "" and "Traceback" not in err
    line = next(x for x in err.splitlines() if x.startswith("interrupted: "))
    assert "kept in" in line and str(path) in line
    kept = journal_blocks(path)
    assert 5 <= len(kept) < len(all_blocks(path))
    result = extract("pi", POSITION, 14, checkpoint=path, block_k=256)
    assert result.digits == EXPECTED and result.blocks_loaded == len(kept)


# --- one journal for every window of a check (verify, locate) -----------------------------------


def test_check_journal_resumes_across_windows_after_an_interruption(tmp_path: Path, monkeypatch) -> None:
    from spotcheck.checks import common, verify_file

    digits = pi_hex(30_000)  # gmpy2/MPFR's pi
    path = tmp_path / "pi.txt"
    path.write_text("3." + digits + "\n")
    journal = tmp_path / "check.journal"
    real = common.extract
    calls: list[tuple[int, int, int]] = []  # (position, blocks loaded, blocks computed)

    def stop_at_third(*args, **kw):
        if len(calls) == 3:  # head, tail and a sample done (the head at position 1 has no blocks)
            raise KeyboardInterrupt
        r = real(*args, **kw)
        calls.append((r.position, r.blocks_loaded, r.blocks_computed))
        return r

    monkeypatch.setattr(common, "extract", stop_at_third)
    args = dict(samples=3, seed=9, full_seconds=0.0, checkpoint=str(journal))
    first = verify_file(str(path), **args)
    assert first.interrupted and len(calls) == 3 and all(loaded == 0 for _, loaded, _ in calls)
    lines, torn = read_lines(journal)
    assert torn == b"" and all(line is not None for line in lines)
    assert lines[0]["request"]["file"]["checked"] == 30_000  # a check's request names its file
    sections = [ln["section"] for ln in lines if ln and "section" in ln]
    done = {p for p, _, computed in calls if computed}
    assert len(done) == 2 and len(sections) == 2  # the windows finished before the interruption, one file

    calls.clear()
    monkeypatch.setattr(common, "extract", lambda *a, **kw: _record(real, calls, *a, **kw))
    again = verify_file(str(path), **args)
    assert not again.interrupted and again.exit_code == 0
    for position, loaded, computed in calls:
        if position in done:  # read back, nothing computed again
            assert loaded > 0 and computed == 0
        elif position > 1:
            assert computed > 0 and loaded == 0
    assert len(calls) == 2 + 3  # head, tail and three samples
    sections = [ln["section"] for ln in read_lines(journal)[0] if ln and "section" in ln]
    assert len(sections) == 4  # every window with a head sum (all but position 1), in the one journal


def _record(real, calls, *args, **kw):
    r = real(*args, **kw)
    calls.append((r.position, r.blocks_loaded, r.blocks_computed))
    return r


def test_check_journal_refuses_another_request(tmp_path: Path, capsys) -> None:
    from spotcheck.cli import run

    one, two = tmp_path / "one.txt", tmp_path / "two.txt"
    one.write_text("3." + pi_hex(20_000) + "\n")
    two.write_text("3." + pi_hex(21_000) + "\n")
    journal = tmp_path / "j"
    assert run(["verify", str(one), "--budget", "0", "--samples", "1", "--checkpoint", str(journal)]) == 0
    before = journal.read_bytes()
    capsys.readouterr()
    for argv in (
        ["verify", str(two), "--checkpoint", str(journal)],  # another file
        ["locate", str(one), "--formula", "bbp", "--checkpoint", str(journal)],  # another formula
        ["digits", "pi", "--at", "1000", "--count", "8", "--checkpoint", str(journal)],  # not a check
    ):
        assert run(argv) == 2
        err = [ln for ln in capsys.readouterr().err.splitlines() if ln.startswith("error:")]
        assert len(err) == 1 and "refused" in err[0] and "another request" in err[0], err
    assert journal.read_bytes() == before  # left alone
    assert run(["verify", str(one), "--checkpoint", str(tmp_path)]) == 2  # a directory is no journal
    assert "is a directory" in capsys.readouterr().err


def _verify_blocks(path: Path, checkpoint: str | bool) -> tuple[int, int, str]:
    """(blocks loaded, blocks computed, journal path) of one verify run with a checkpoint."""
    from spotcheck.checks import common, verify_file

    calls: list[tuple[int, int, int]] = []
    real = common.extract
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(common, "extract", lambda *a, **kw: _record(real, calls, *a, **kw))
        seen: list[str] = []
        result = verify_file(
            str(path), samples=2, seed=4, full_seconds=0.0, checkpoint=checkpoint, on_checkpoint=seen.append
        )
    assert result.exit_code == 0
    return sum(c[1] for c in calls), sum(c[2] for c in calls), seen[0]


@pytest.mark.parametrize("how", ["file", "auto"])
def test_a_moved_and_renamed_file_resumes_its_check_journal(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, how: str
) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    first = tmp_path / "a" / "pi.txt"
    first.parent.mkdir()
    first.write_text("3." + pi_hex(30_000) + "\n")  # gmpy2/MPFR's pi
    checkpoint: str | bool = str(tmp_path / "check.journal") if how == "file" else True
    loaded, computed, journal = _verify_blocks(first, checkpoint)
    assert loaded == 0 and computed > 0
    moved = tmp_path / "b" / "copy of pi.txt"
    moved.parent.mkdir()
    first.rename(moved)
    loaded2, computed2, journal2 = _verify_blocks(moved, checkpoint)
    assert (loaded2, computed2, journal2) == (computed, 0, journal)  # every block read back, none again
    # the same size, one digit changed near the middle: another file, its journal refused
    text = moved.read_text()
    at = len(text) // 2
    other = tmp_path / "other.txt"
    other.write_text(text[:at] + ("1" if text[at] != "1" else "2") + text[at + 1 :])
    if how == "file":
        with pytest.raises(CheckpointError, match="another request"):
            _verify_blocks(other, checkpoint)
    else:
        assert _verify_blocks(other, checkpoint)[2] != journal  # a journal of its own


def test_a_check_journal_keyed_by_the_file_path_is_still_resumed(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Journals written before files were named by their fingerprint named them by their absolute
    path: such a journal, for the same file, still resumes (given as a file, and under auto)."""
    from spotcheck.checks import common

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    path = tmp_path / "pi.txt"
    path.write_text("3." + pi_hex(30_000) + "\n")
    real_request = common.check_checkpoint_request
    real_path = common.check_checkpoint_path
    with monkeypatch.context() as mp:  # the key and the auto name as they were
        mp.setattr(common, "check_checkpoint_request", common._legacy_request)
        mp.setattr(
            common, "check_checkpoint_path", lambda facts, request=None: str(common._legacy_auto_path(facts))
        )
        _, computed, journal = _verify_blocks(path, True)
        assert computed > 0 and "-pi_txt-" in Path(journal).name
        assert json.loads(Path(journal).read_text().split("\t")[0])["request"]["file"]["path"] == str(path)
    assert common.check_checkpoint_request is real_request and common.check_checkpoint_path is real_path
    for checkpoint in (True, journal):
        loaded, computed2, used = _verify_blocks(path, checkpoint)
        assert (loaded, computed2, used) == (computed, 0, journal)


# --- one run at a time; an empty file ----------------------------------------------------


REQUEST = checkpoint_request("pi", PI_BELLARD, POSITION, 14)


def test_a_journal_in_use_is_refused_until_its_run_closes_it(finished: Path) -> None:
    before = finished.read_bytes()
    first = Journal(finished, SERIES, REQUEST)
    with pytest.raises(CheckpointError, match="another spotcheck run is using it"):
        Journal(finished, SERIES, REQUEST)  # a second journal on the file, even in this process
    with pytest.raises(CheckpointError, match="another spotcheck run is using it"):
        run_with(finished)
    assert finished.read_bytes() == before  # the refused runs left it alone
    kept = first.blocks_kept
    first.close()
    again = Journal(finished, SERIES, REQUEST)  # compaction replaced the file: its new self is free
    assert again.loaded == kept > 0
    again.close(compact=False)
    Journal(finished, SERIES, REQUEST).close()  # closed without compaction: free too


def test_a_journal_locked_by_another_process_exits_2_before_any_work(
    finished: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from spotcheck.cli import run

    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            "import fcntl, os, sys, time\n"
            f"fd = os.open({str(finished)!r}, os.O_RDONLY)\n"
            "fcntl.flock(fd, fcntl.LOCK_EX)\n"
            "print('held', flush=True)\n"
            "sys.stdin.read()\n",
        ],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout is not None and holder.stdout.readline() == "held\n"
        before = finished.read_bytes()
        argv = ["digits", "pi", "--at", str(POSITION), "--count", "14", "--checkpoint", str(finished)]
        assert run(argv) == 2
        err = [ln for ln in capsys.readouterr().err.splitlines() if ln.startswith("error:")]
        assert len(err) == 1 and "is using it" in err[0], err
        assert finished.read_bytes() == before
    finally:
        holder.communicate("")
    assert run_with(finished).digits == EXPECTED  # let go: a run takes the journal again


def test_an_empty_file_gets_its_first_line_before_any_work(tmp_path: Path) -> None:
    """An empty file (``mktemp``'s, say) is a new journal: its first line is on disk at once, so
    a run killed before its end leaves a journal the next run reads."""
    path = tmp_path / "made-by-mktemp"
    path.touch()
    journal = Journal(path, SERIES, REQUEST)
    lines, torn = read_lines(path)
    assert (
        torn == b""
        and len(lines) == 1
        and lines[0]
        == {
            "format": "spotcheck-journal",
            "version": 2,
            "request": REQUEST,
        }
    )
    journal.close(compact=False)  # as after kill -9: nothing compacted
    assert run_with(path).digits == EXPECTED  # the file is read as a journal, and filled
    assert Journal(path, SERIES, REQUEST).loaded == len(all_blocks(path)) > 0
