"""Digit files of every layout, built from true digits, read back at any position.

True digits come from gmpy2 (MPFR's ``const_pi`` / ``const_log2`` at a set
precision), never from spotcheck's own engine.
"""

from __future__ import annotations

import bz2
import gzip
import json
import lzma
import random
from collections.abc import Callable
from pathlib import Path

import gmpy2
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import DigitFile, inspect_file, open_digit_file
from spotcheck.digitfile import passrules as scan_module

N = 6000  # digits after the point in every test file


def mpfr_digits(const: str, base: int, n: int) -> tuple[str, str]:
    """(integer part, first n digits after the point) of pi or log 2, by gmpy2/MPFR."""
    bits = int(n * (4 if base == 16 else 3.33)) + 128
    with gmpy2.context(gmpy2.get_context(), precision=bits + 16):
        value = gmpy2.const_pi() if const == "pi" else gmpy2.const_log2()
        fixed = int(gmpy2.floor(value * gmpy2.mpfr(2) ** bits))  # exact: scaling by a power of two
    whole = fixed >> bits
    frac = ((fixed - (whole << bits)) * base**n) >> bits
    text = gmpy2.mpz(frac).digits(base).upper()
    return (format(whole, "X") if base == 16 else str(whole)), text.zfill(n)


PI16 = mpfr_digits("pi", 16, N)[1]
PI10 = mpfr_digits("pi", 10, N)[1]
LOG2_16 = mpfr_digits("log2", 16, N)[1]


def lines_of(d: str, width: int, group: int | None = None) -> list[str]:
    out = []
    for i in range(0, len(d), width):
        line = d[i : i + width]
        if group:
            line = " ".join(line[j : j + group] for j in range(0, len(line), group))
        out.append(line)
    return out


def irregular(d: str, seed: int = 7) -> list[str]:
    rng = random.Random(seed)
    out, i = [], 0
    while i < len(d):
        w = rng.randint(1, 150)
        out.append(d[i : i + w] + " " * rng.randint(0, 2))
        i += w
    return out


# Each builder: digits -> (file bytes, integer part written or None).
Builder = Callable[[str], tuple[bytes, str | None]]


def b_one_line(d: str) -> tuple[bytes, str | None]:
    return d.encode(), None


def b_point_lines(d: str) -> tuple[bytes, str | None]:
    return ("3." + "\n".join(lines_of(d, 64)) + "\n").encode(), "3"


def b_header_groups(d: str) -> tuple[bytes, str | None]:
    head = "# digits of pi\n# produced for a test\n\n"
    body = lines_of(d, 100, 10)
    return (head + "3.\n" + "\n".join(body) + "\n\n").encode(), "3"


def b_preamble_crlf_lower(d: str) -> tuple[bytes, str | None]:
    head = "Digits of pi after the point, made up for a test.\r\nSource: unit test\r\n"
    return (head + "\r\n".join(x.lower() for x in lines_of(d, 50, 5)) + "\r\n").encode(), None


def b_mixed_case(d: str) -> tuple[bytes, str | None]:
    rng = random.Random(3)
    mixed = "".join(c.lower() if rng.random() < 0.5 else c for c in d)
    return ("3." + "\n".join(lines_of(mixed, 80)) + "\n").encode(), "3"


def b_labels_start(d: str) -> tuple[bytes, str | None]:
    rows = [f"{i * 50:8d}: {row}" for i, row in enumerate(lines_of(d, 50, 10))]
    return ("# label = digits before the line\n" + "\n".join(rows) + "\n").encode(), None


def b_labels_start_unpadded(d: str) -> tuple[bytes, str | None]:
    rows = [f"{i * 60 + 1}:{row}" for i, row in enumerate(lines_of(d, 60))]
    return ("\n".join(rows) + "\n").encode(), None


def b_labels_end(d: str) -> tuple[bytes, str | None]:
    rows = [f"{row} : {min((i + 1) * 40, len(d))}" for i, row in enumerate(lines_of(d, 40, 10))]
    return ("3." + "\n".join(rows) + "\n").encode(), "3"


def b_irregular(d: str) -> tuple[bytes, str | None]:
    return ("3.\n" + "\n".join(irregular(d)) + "\n").encode(), "3"


def b_long_line_groups(d: str) -> tuple[bytes, str | None]:
    return ("3." + " ".join(d[i : i + 5] for i in range(0, len(d), 5)) + "\n").encode(), "3"


def b_regular_then_odd(d: str) -> tuple[bytes, str | None]:
    rows = lines_of(d, 70)
    rows[40] = rows[40][:30] + "  " + rows[40][30:]  # one line breaks the pattern
    return ("3.\n" + "\n".join(rows)).encode(), "3"


TEXT_BUILDERS: dict[str, Builder] = {
    f.__name__[2:]: f
    for f in (
        b_one_line,
        b_point_lines,
        b_header_groups,
        b_preamble_crlf_lower,
        b_mixed_case,
        b_labels_start,
        b_labels_start_unpadded,
        b_labels_end,
        b_irregular,
        b_long_line_groups,
        b_regular_then_odd,
    )
}
COMPRESSORS = {"gzip": gzip.compress, "bzip2": bz2.compress, "xz": lzma.compress}


def _cases() -> list[tuple[str, int, str]]:
    cases = [(name, base, "") for name in TEXT_BUILDERS for base in (16, 10)]
    cases += [
        (name, 16, comp) for name in ("header_groups", "labels_end", "irregular") for comp in COMPRESSORS
    ]
    cases += [("point_lines", 10, "gzip")]
    return cases


CASES = _cases()


@pytest.fixture(scope="module", autouse=True)
def small_steps():
    """Small chunks and index steps, so that a 6000-digit file crosses many of both."""
    mp = pytest.MonkeyPatch()
    mp.setattr(scan_module, "CHUNK_BYTES", 4099)
    mp.setattr(scan_module, "INDEX_STEP", 257)
    yield
    mp.undo()


@pytest.fixture(scope="module")
def files(
    tmp_path_factory: pytest.TempPathFactory,
) -> dict[tuple[str, int, str], tuple[Path, str, str | None]]:
    root = tmp_path_factory.mktemp("layouts")
    out = {}
    for name, base, comp in CASES:
        truth = PI16 if base == 16 else PI10
        data, ip = TEXT_BUILDERS[name](truth)
        path = root / f"{name}-{base}{'.' + comp if comp else ''}"
        path.write_bytes(COMPRESSORS[comp](data) if comp else data)
        out[(name, base, comp)] = (path, truth, ip)
    return out


@pytest.fixture(scope="module")
def opened(files):
    handles = {key: open_digit_file(path) for key, (path, _, _) in files.items()}
    yield handles
    for df in handles.values():
        df.close()


@pytest.mark.parametrize("key", CASES, ids=["-".join(map(str, c)).rstrip("-") for c in CASES])
def test_detects_layout(key, files, opened):
    path, truth, ip = files[key]
    df: DigitFile = opened[key]
    assert df.base == key[1]
    assert df.count == len(truth)
    assert df.integer_part == ip
    assert df.compression == (key[2] or None)
    assert df.constant == "pi", df.constant_how
    assert "pi" in df.constant_how and "of the first" in df.constant_how and df.constant_match.agreed >= 60
    assert df.findings == []
    assert df.read(1, 40) == truth[:40]
    assert df.read(len(truth) - 9, 100) == truth[-10:]  # clipped at the end
    assert df.read(len(truth) + 1, 5) == ""


@pytest.mark.parametrize("key", CASES, ids=["-".join(map(str, c)).rstrip("-") for c in CASES])
@settings(max_examples=25, deadline=None)
@given(data=st.data())
def test_reads_true_digits(key, files, opened, data):
    _, truth, _ = files[key]
    df = opened[key]
    p = data.draw(st.integers(1, len(truth)), label="position")
    n = data.draw(st.integers(1, 300), label="count")
    assert df.read(p, n) == truth[p - 1 : p - 1 + n]


@pytest.mark.parametrize("key", [c for c in CASES if not c[2]], ids=lambda c: f"{c[0]}-{c[1]}")
@given(p=st.integers(1, N))
@example(p=1)
@example(p=N)
@settings(max_examples=30, deadline=None)
def test_single_digit_and_locate(key, files, opened, p):
    path, truth, _ = files[key]
    df = opened[key]
    assert df.read(p, 1) == truth[p - 1]
    offset, line = df.locate(p)
    raw = path.read_bytes()
    assert chr(raw[offset]).upper() == truth[p - 1]
    assert raw.count(b"\n", 0, offset) + 1 == line


def test_layout_facts(opened):
    lay = opened[("header_groups", 16, "")].layout
    assert (lay.kind, lay.line_width, lay.group_size, lay.header_lines, lay.access) == (
        "text",
        100,
        10,
        3,
        "regular",
    )
    lay = opened[("preamble_crlf_lower", 16, "")].layout
    assert (lay.newline, lay.letter_case, lay.line_width, lay.group_size, lay.header_lines) == (
        "\r\n",
        "lower",
        50,
        5,
        2,
    )
    lay = opened[("labels_start", 10, "")].layout
    assert (lay.labels, lay.label_meaning, lay.line_width, lay.access) == ("start", "before", 50, "indexed")
    assert opened[("labels_start_unpadded", 16, "")].layout.label_meaning == "first"
    lay = opened[("labels_end", 16, "")].layout
    assert (lay.labels, lay.label_meaning) == ("end", "through")
    assert opened[("irregular", 16, "")].layout.access == "indexed"
    assert opened[("irregular", 16, "")].layout.index_entries > 10
    assert opened[("regular_then_odd", 16, "")].layout.access == "indexed"
    lay = opened[("long_line_groups", 10, "")].layout
    assert (lay.line_width, lay.group_size, lay.newline) == (None, 5, "\n")


@pytest.mark.parametrize("key", [("irregular", 16, "xz"), ("labels_start", 16, ""), ("point_lines", 10, "")])
def test_iter_chunks_streams_everything(key, files, opened):
    _, truth, _ = files[key]
    df = opened[key]
    df.read(1, 10)  # stand at the start
    restarts = getattr(df._src, "restarts", 0)
    got = list(df.iter_chunks(chunk_digits=777, start=5))
    assert got[0][0] == 5 and got[1][0] == 5 + 777
    assert "".join(d for _, d in got) == truth[4:]
    assert getattr(df._src, "restarts", 0) - restarts <= 1  # streamed, not re-decompressed per chunk


# --- packed binary hex --------------------------------------------------------


@pytest.mark.parametrize(
    "name, comp",
    [("pi.bin", ""), ("pi-digits.dat", ""), ("pi.hexbin", "bzip2"), ("pi.bin.gz", "gzip"), ("pi.raw", "xz")],
)
@given(p=st.integers(1, N))
@example(p=1)
@example(p=N)
@settings(max_examples=20, deadline=None)
def test_packed(tmp_path_factory, name, comp, p):
    folder = tmp_path_factory.getbasetemp() / "packed"
    folder.mkdir(exist_ok=True)
    path = folder / name
    if not path.exists():
        raw = bytes.fromhex(PI16)
        path.write_bytes(COMPRESSORS[comp](raw) if comp else raw)
    with open_digit_file(path) as df:
        assert (df.layout.kind, df.base, df.count, df.constant) == ("packed", 16, N, "pi")
        assert df.read(p, 20) == PI16[p - 1 : p + 19]


def test_packed_unknown_constant_by_suffix(tmp_path):
    raw = random.Random(1).randbytes(500)
    path = tmp_path / "digits.bin"
    path.write_bytes(raw)
    with open_digit_file(path) as df:
        assert df.constant is None and "explicitly" in df.constant_how
        assert df.read(1, 1000) == raw.hex().upper()


# --- constants ----------------------------------------------------------------


def test_guesses_log2_and_reports_digits(tmp_path):
    path = tmp_path / "l2.txt"
    path.write_text("0." + LOG2_16[:500] + "\n")
    with open_digit_file(path) as df:
        assert (df.constant, df.base, df.integer_part) == ("log2", 16, "0")
        assert "64 of the first 64 digits agree" in df.constant_how  # LOG2_16 is from mpmath


def test_unknown_digits_need_explicit_constant(tmp_path):
    rng = random.Random(5)
    path = tmp_path / "noise.txt"
    path.write_text("".join(rng.choice("0123456789") for _ in range(1000)))
    with open_digit_file(path) as df:
        assert df.constant is None
        assert "explicitly" in df.constant_how
    with open_digit_file(path, constant="pi") as df:
        assert df.constant == "pi" and df.constant_how.startswith("given explicitly")
        assert [f.kind for f in df.findings] == ["constant-mismatch"]


def test_explicit_constant_overrides(tmp_path):
    path = tmp_path / "p.txt"
    path.write_text("3." + PI10[:300])
    with open_digit_file(path, constant="PI", base=10) as df:
        assert df.constant == "pi" and df.findings == []
        assert df.base_how.startswith("given explicitly")


def test_short_file_base_from_constant(tmp_path):
    # 3.1415926535 has no letter: decimal by its digits' match with pi.
    path = tmp_path / "short.txt"
    path.write_text("3.1415926535\n")
    with open_digit_file(path) as df:
        assert (df.base, df.constant, df.count) == (10, "pi", 10)
    path.write_text("3.243F6A8885A3\n")
    with open_digit_file(path) as df:
        assert (df.base, df.constant, df.count) == (16, "pi", 12)


def test_inspect_to_dict_is_json(files):
    path, truth, _ = files[("labels_end", 16, "gzip")]
    result = inspect_file(path)
    d = json.loads(json.dumps(result.to_dict()))
    assert d["base"] == 16 and d["constant"] == "pi" and d["count"] == len(truth)
    assert d["compression"] == "gzip" and d["integer_part"] == "3"
    assert d["first_digits"] == truth[:64] and d["last_digits"] == truth[-64:]
    assert d["layout"]["labels"] == "end" and d["findings"] == []
    assert d["size_bytes"] == path.stat().st_size


def test_default_tuning_large_file(tmp_path):
    """Default chunk and index sizes on a file larger than one chunk (plain and gzip)."""
    truth = PI10 * 700  # not pi past N, but true digits are only needed for reading back
    body = "3.\n" + "\n".join(irregular(truth, seed=11)) + "\n"
    path = tmp_path / "big.txt"
    path.write_text(body)
    with scan_module_defaults():
        with open_digit_file(path, constant="pi") as df:
            assert df.count == len(truth) and df.layout.access == "indexed"
            for p in (1, 65_537, 1_000_003, len(truth) - 3):
                assert df.read(p, 50) == truth[p - 1 : p + 49]


class scan_module_defaults:
    def __enter__(self):
        self.mp = pytest.MonkeyPatch()
        self.mp.setattr(scan_module, "CHUNK_BYTES", 8 << 20)
        self.mp.setattr(scan_module, "INDEX_STEP", 64 << 10)

    def __exit__(self, *exc):
        self.mp.undo()


@pytest.mark.parametrize(
    "key", [("irregular", 16, ""), ("labels_end", 16, "gzip"), ("irregular", 16, "bzip2")]
)
def test_progress_counts_stored_bytes(key, files):
    path, truth, _ = files[key]
    calls: list[tuple[int, int]] = []
    with open_digit_file(path, progress=lambda done, total: calls.append((done, total))) as df:
        assert df.count == len(truth)
    size = path.stat().st_size
    assert calls and all(total == size for _, total in calls)
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    assert calls[-1][0] <= size and calls[-1][0] >= size * 0.5


def test_sparse_lines_tail_and_reads(tmp_path):
    # Two digits per line between wide runs of spaces: the last digits come from many lines.
    truth = PI16[:3000]
    text = "".join(truth[i : i + 2] + " " * 40 + "\n" for i in range(0, len(truth), 2))
    path = tmp_path / "sparse.txt"
    path.write_text(text)
    result = inspect_file(path)
    assert result.layout.access == "regular" and result.layout.line_width == 2
    assert result.last_digits == truth[-64:] and result.first_digits == truth[:64]


def test_docstring_examples():
    import doctest

    from spotcheck.digitfile import reader

    assert doctest.testmod(reader).failed == 0
