"""The read-and-check stream (digitfile/stream.py) against the index pass (the reference).

Contract: for any file, correct or damaged, ``open_stream`` followed by reading
every digit and ``finish()`` gives exactly what ``open_digit_file`` with the index
pass's own loops gives (``index.USE_STREAM_LOOPS`` off; on, the index pass runs
labelled and irregular layouts through the stream's loops, also tested here): the
same digits, count, findings, layout and last digits, or the same error (type
and message).  Files come from the fuzz writer (tests/fuzz: every layout family
of the model, mutated half of the time); both the compiled loops and their
Python twins are run, with small chunks so that chunk and index-step edges fall
everywhere.
"""

from __future__ import annotations

import dataclasses
import gzip
import os
import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import index as index_mod
from spotcheck.digitfile import loops as loops_mod
from spotcheck.digitfile import onepass, open_digit_file, open_stream
from spotcheck.digitfile import passrules as rules
from spotcheck.digitfile import stream as stream_mod
from spotcheck.errors import DigitFileError, LabelError, SpotcheckError, UsageError
from tests.fuzz.mutate import compress, mutation, random_spec
from tests.fuzz.writer import suffix, write

COMPILED = loops_mod.LOOPS == "c"


def _reference(path: str, base: int | None, strict: bool) -> tuple[str, object]:
    """The index pass with its own loops (not the stream's, which it otherwise uses for some layouts)."""
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(index_mod, "USE_STREAM_LOOPS", False)
        return _reference_read(path, base, strict)


def _reference_read(path: str, base: int | None, strict: bool) -> tuple[str, object]:
    try:
        with open_digit_file(path, base=base, strict_labels=strict) as df:
            return "ok", (
                df.read(1, df.count),
                df.count,
                df.findings,
                dataclasses.replace(df.layout, index_entries=0),  # where index entries fall may differ
                df.inspect().last_digits,
                df.integer_part,
                df.constant,
            )
    except SpotcheckError as exc:
        return "error", (type(exc), str(exc))


def _streamed(path: str, base: int | None, strict: bool, piece: int) -> tuple[str, object]:
    try:
        with open_stream(path, base=base, strict_labels=strict) as s:
            parts = []
            if piece == 0:  # the stream's own buffers, each copied before the next is asked for
                parts = [bytes(c) for c in s.chunks(copy=False)]
            while piece:
                got = s.take(piece)
                if not got:
                    break
                parts.append(got)
            digits = b"".join(parts).decode("ascii")
            assert s.done and s.digits_read == len(digits)
            df = s.finish()
        with df:
            assert df.read(1, df.count) == digits  # random access from the index the stream built
            return "ok", (
                digits,
                df.count,
                df.findings,
                dataclasses.replace(df.layout, index_entries=0),  # where index entries fall may differ
                df.inspect().last_digits,
                df.integer_part,
                df.constant,
            )
    except SpotcheckError as exc:
        return "error", (type(exc), str(exc))


@pytest.fixture(params=["compiled", "python"])
def loops(request, monkeypatch: pytest.MonkeyPatch) -> str:
    if request.param == "compiled":
        if not COMPILED:
            pytest.skip("the compiled loops were not built (or SPOTCHECK_PURE is set)")
    else:
        monkeypatch.setattr(loops_mod, "extract", loops_mod.extract_py)
        monkeypatch.setattr(loops_mod, "extract_labelled", loops_mod.extract_labelled_py)
    return str(request.param)


def _small_chunks(monkeypatch: pytest.MonkeyPatch, seed: int) -> None:
    """Chunk sizes that put chunk and index-step edges everywhere (INDEX_STEP and LABELLED_CHUNK_BYTES
    are the pass rules' settings, one for both passes: a labelled line longer than the chunk is
    refused by both alike)."""
    rng = random.Random(seed)
    monkeypatch.setattr(onepass, "STREAM_CHUNK_BYTES", rng.choice((1, 7, 64, 300, 4 << 20)))
    monkeypatch.setattr(rules, "LABELLED_CHUNK_BYTES", rng.choice((1000, 4096, 2 << 20)))
    monkeypatch.setattr(rules, "INDEX_STEP", rng.choice((1, 5, 64, 64 << 10)))


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), mutate=st.booleans(), strict=st.booleans())
@example(seed=90494, mutate=True, strict=False)  # a line longer than the labelled chunk
@example(seed=1, mutate=False, strict=False)
@example(seed=5, mutate=True, strict=True)
def test_stream_reads_what_the_index_pass_reads(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, loops: str, seed: int, mutate: bool, strict: bool
) -> None:
    rng = random.Random(seed)
    spec = random_spec(rng, max_digits=rng.choice((60, 400, 3000)))
    w = write(spec)
    data = w.stored
    if mutate:
        content, *_ = mutation(rng, spec, w.content, w.label_spans)
        data = compress(spec, content)
    path = tmp_path / f"f{seed}{suffix(spec)}"
    path.write_bytes(data)
    base = spec.base if rng.random() < 0.5 else None
    _small_chunks(monkeypatch, seed)  # before the reference too: INDEX_STEP is also the index pass's
    want = _reference(str(path), base, strict)
    got = _streamed(str(path), base, strict, rng.choice((0, 1, 13, 1000, 1 << 21)))
    assert got == want, (spec, data[:200])


def _labelled(path: Path, digits: str, width: int, fmt) -> str:
    lines = [fmt(i, digits[i : i + width]) for i in range(0, len(digits), width)]
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    return str(path)


def test_disagreeing_labels_are_the_same_findings(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, loops: str
) -> None:
    rng = random.Random(11)
    digits = "".join(rng.choice("0123456789") for _ in range(50_000))
    lines = [f"{i:>8} : {digits[i : i + 100]}" for i in range(0, len(digits), 100)]
    lines[7] = lines[7].replace("     700", "     701")  # a label that lies
    lines[300] = lines[300][11:]  # a line without its label
    for k in range(400, 430):  # more disagreements than are kept in full
        lines[k] = lines[k].replace(f"{k * 100} :", f"{k * 100 + 9} :")
    path = tmp_path / "lab.txt"
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    want = _reference(str(path), None, False)
    got = _streamed(str(path), None, False, 4096)
    assert want[0] == "ok" and got == want
    findings = got[1][2]  # type: ignore[index]
    assert findings[0].kind == "label-mismatch" and findings[0].line == 9 and findings[0].expected == 700
    assert any(f.kind == "label-missing" and f.line == 302 for f in findings)
    with pytest.raises(LabelError, match="line 9"):
        with open_stream(path, strict_labels=True) as s:
            s.drain()


@pytest.mark.parametrize("where", ["start", "end", "plain", "grouped"])
def test_a_stray_byte_anywhere_is_the_index_pass_error(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, loops: str, where: str
) -> None:
    rng = random.Random(3)
    digits = "".join(rng.choice("0123456789ABCDEF") for _ in range(20_000))
    fmt = {
        "start": lambda i, d: f"{i:08X}  {d}",
        "end": lambda i, d: f"{d} : {i + len(d)}",
        "plain": lambda i, d: d,
        "grouped": lambda i, d: " ".join(d[j : j + 8] for j in range(0, len(d), 8)),
    }[where]
    clean = Path(_labelled(tmp_path / "c.txt", digits, 64, fmt)).read_bytes()
    monkeypatch.setattr(rules, "INDEX_STEP", 100)
    for at in sorted(rng.sample(range(200, len(clean)), 25)) + [len(clean) - 2]:
        if clean[at] in b"\n\r":
            continue
        path = tmp_path / f"s{at}.txt"
        path.write_bytes(clean[:at] + b"x" + clean[at + 1 :])
        want = _reference(str(path), 16, False)
        got = _streamed(str(path), 16, False, 777)
        assert got == want, at
        assert want[0] == "error" or where == "end", at
        if where in ("plain", "grouped"):
            assert "stray character 'x'" in str(want[1][1]) and f"at byte {at}" in str(want[1][1])  # type: ignore[index]


def test_gzip_crlf_cr_only_and_packed_stream(tmp_path: Path, loops: str) -> None:
    rng = random.Random(5)
    digits = "".join(rng.choice("0123456789abcdef") for _ in range(30_000))
    text = "3." + "\r\n".join(digits[i : i + 70] for i in range(0, len(digits), 70)) + "\r\n"
    cases = {
        "crlf.txt.gz": gzip.compress(text.encode()),
        "cr.txt": text.replace("\r\n", "\r").encode(),
        "p.bin": bytes.fromhex(digits),
        "p.bin.gz": gzip.compress(bytes.fromhex(digits)),
    }
    for name, data in cases.items():
        path = tmp_path / name
        path.write_bytes(data)
        want = _reference(str(path), 16, False)
        got = _streamed(str(path), 16, False, 5000)
        assert want[0] == "ok" and got == want, name
        assert got[1][0] == digits.upper()  # type: ignore[index]


def test_progress_and_misuse(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(onepass, "STREAM_CHUNK_BYTES", 10_000)
    path = tmp_path / "a.txt"
    path.write_text("3.\n" + "\n".join("1415926535" * 10 for _ in range(2000)) + "\n")
    with open_stream(path) as s:
        assert s.bytes_done == 0 and s.base == 10 and s.integer_part == "3"
        with pytest.raises(UsageError, match="before the end"):
            s.finish()
        s.take(150_000)
        assert 0 < s.bytes_done < os.path.getsize(path)
        s.drain()
        assert s.bytes_done == os.path.getsize(path) and s.done
        df = s.finish()
    with df:
        assert df.count == 200_000 and df.layout.line_width == 100 and df.layout.access == "regular"
    with pytest.raises(DigitFileError, match="empty"):
        (tmp_path / "e.txt").write_bytes(b"")
        open_stream(tmp_path / "e.txt")


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), mutate=st.booleans(), strict=st.booleans())
def test_index_pass_through_the_stream_loops_is_the_same(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, seed: int, mutate: bool, strict: bool
) -> None:
    if not COMPILED:
        pytest.skip("the compiled loops were not built (or SPOTCHECK_PURE is set)")
    rng = random.Random(seed)
    spec = random_spec(rng, max_digits=rng.choice((60, 400, 3000)))
    w = write(spec)
    data = w.stored
    if mutate:
        content, *_ = mutation(rng, spec, w.content, w.label_spans)
        data = compress(spec, content)
    path = tmp_path / f"i{seed}{suffix(spec)}"
    path.write_bytes(data)
    _small_chunks(monkeypatch, seed)
    want = _reference(str(path), spec.base, strict)
    monkeypatch.setattr(index_mod, "USE_STREAM_LOOPS", True)
    assert _reference_read(str(path), spec.base, strict) == want, (spec, data[:200])


def test_a_layout_the_loops_do_not_know_is_read_by_the_index_pass(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A Detection field added later (a layout the loops do not know) that is set on a file: the stream
    # must not guess; it runs the index pass first and streams from the opened file.
    from spotcheck.digitfile.detect import Detection

    @dataclasses.dataclass
    class Later(Detection):
        end_labels: object = None

    plan = Later(**{f.name: None for f in dataclasses.fields(Detection)})
    plan.syntax = None
    assert loops_mod.reads(plan)
    plan.end_labels = "something"
    assert not loops_mod.reads(plan)
    # The fallback reads what the index pass reads.
    monkeypatch.setattr(stream_mod, "reads", lambda plan: False)
    rng = random.Random(8)
    digits = "".join(rng.choice("0123456789") for _ in range(5000))
    path = tmp_path / "f.txt"
    path.write_text("3.\n" + "\n".join(f"{i:>6}: {digits[i : i + 50]}" for i in range(0, 5000, 50)) + "\n")
    with open_stream(path) as s:
        assert s.how == "index pass, then read"
        assert b"".join(s.chunks()).decode() == digits
        df = s.finish()
    with df:
        assert df.count == 5000 and df.layout.labels == "start"


@pytest.mark.parametrize("loops_kind", ["compiled", "python"])
def test_labels_at_both_ends_stream_in_one_pass(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, loops_kind: str
) -> None:
    """Start labels before, end labels through the line, one end label lying: one read, the digits,
    and the index pass's own finding."""
    if loops_kind == "python":
        monkeypatch.setattr(loops_mod, "extract_labelled", loops_mod.extract_labelled_py)
    elif not COMPILED:
        pytest.skip("the compiled loops were not built (or SPOTCHECK_PURE is set)")
    rng = random.Random(9)
    digits = "".join(rng.choice("0123456789") for _ in range(5000))
    lines = [f"{i:>6}: {digits[i : i + 50]} : {i + 50 + (i == 2500)}" for i in range(0, 5000, 50)]
    path = tmp_path / "both.txt"
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    with open_stream(path) as s:
        assert s.how == "read and checked in one pass"
        assert b"".join(s.chunks()).decode() == digits
        df = s.finish()
    want = _reference(str(path), None, False)
    with df:
        assert (df.count, df.layout.labels, df.layout.end_label_meaning) == (5000, "both", "through")
        assert [(f.line, f.end, f.found) for f in df.findings] == [(52, "end", "2551")]
        assert want[1][2] == df.findings
