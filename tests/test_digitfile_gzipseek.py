"""gzip reads at any offset through decompressor checkpoints.

Content is random bytes and true pi digits (gmpy2/MPFR); the reference for
every read is the uncompressed bytes themselves.
"""

from __future__ import annotations

import gzip
import os
import random

import gmpy2
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import gzipseek, open_digit_file
from spotcheck.digitfile import passrules as scan_module
from spotcheck.digitfile.gzipseek import GzipSeeker, TruncatedError

CONTENT = random.Random(9).randbytes(300_000)


@pytest.fixture(scope="module", autouse=True)
def small_steps():
    mp = pytest.MonkeyPatch()
    mp.setattr(gzipseek, "CHECKPOINT_BYTES", 10_000)
    mp.setattr(gzipseek, "RAW_STEP", 777)
    mp.setattr(gzipseek, "OUT_STEP", 3_001)
    yield
    mp.undo()


@pytest.fixture(scope="module")
def gz_path(tmp_path_factory):
    # Three members and zero padding, as concatenated or padded gzip files have.
    third = len(CONTENT) // 3
    data = b"".join(gzip.compress(CONTENT[i : i + third]) for i in range(0, len(CONTENT), third))
    path = tmp_path_factory.mktemp("gz") / "content.gz"
    path.write_bytes(data + b"\0" * 100)
    return path


@pytest.fixture(scope="module")
def seeker(gz_path):
    fd = os.open(gz_path, os.O_RDONLY)
    s = GzipSeeker(fd, os.path.getsize(gz_path))
    s.seek(len(CONTENT))  # one pass: checkpoints are laid down
    yield s
    os.close(fd)


@given(offset=st.integers(0, len(CONTENT)), n=st.integers(0, 25_000))
@example(offset=0, n=10)
@example(offset=len(CONTENT) - 1, n=10)
@example(offset=100_000, n=1)  # a member boundary
@settings(max_examples=150, deadline=None)
def test_any_offset(seeker, offset, n):
    seeker.seek(offset)
    assert seeker.read(n) == CONTENT[offset : offset + n]


def test_checkpoints_are_used(seeker):
    seeker.seek(290_000)
    seeker.read(5)
    before = seeker.restores
    seeker.seek(150_123)
    assert seeker.read(100) == CONTENT[150_123:150_223]
    assert seeker.restores == before + 1
    assert len(seeker._offsets) >= 20


def test_truncated(tmp_path):
    path = tmp_path / "cut.gz"
    data = gzip.compress(CONTENT)
    path.write_bytes(data[: len(data) // 2])
    fd = os.open(path, os.O_RDONLY)
    try:
        s = GzipSeeker(fd, os.path.getsize(path))
        with pytest.raises(TruncatedError):
            s.read(len(CONTENT))
    finally:
        os.close(fd)


def pi_hex(n: int) -> str:
    """First n hex digits of pi after the point, by gmpy2/MPFR."""
    bits = 4 * n + 64
    with gmpy2.context(gmpy2.get_context(), precision=bits + 16):
        fixed = int(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpfr(2) ** bits))
    return gmpy2.mpz((fixed - (3 << bits)) >> 64).digits(16).upper().zfill(n)


def test_digit_file_random_reads_resume_from_checkpoints(tmp_path, monkeypatch):
    monkeypatch.setattr(scan_module, "INDEX_STEP", 300)
    truth = pi_hex(20_000)
    text = "3." + "\n".join(truth[i : i + 37] + " " * (i % 3) for i in range(0, len(truth), 37)) + "\n"
    path = tmp_path / "pi.txt.gz"
    path.write_bytes(gzip.compress(text.encode()))
    rng = random.Random(4)
    with open_digit_file(path) as df:
        assert df.layout.access == "indexed"
        for _ in range(60):
            p = rng.randint(1, len(truth))
            assert df.read(p, 40) == truth[p - 1 : p + 39]
