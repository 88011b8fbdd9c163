"""Comb blocks: a comb of windows through the block runner, the record gate and the checkpoint journal.

Contract (DEVELOPERS.md, blocks.py, journal.py): a comb block holds every window's sum of one range
of k; its record names its comb and is checked by the same ``block_problem`` as a window's; the
comb's sums through ``sum_comb_blocks`` are each window's own head sum bit for bit; its journal
sections resume, refuse and recompute exactly as a window's do, and sit beside window sections in
one file.  (The cluster: tests/test_cluster.py.)
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from spotcheck.engine import blocks
from spotcheck.engine.api import extract, extract_comb
from spotcheck.engine.blocks import (
    BlockRequest,
    CombRecord,
    CombRequest,
    block_problem,
    compute_block,
    compute_comb_block,
    sum_blocks,
    sum_comb_blocks,
    thread_runner,
)
from spotcheck.engine.comb import comb_heads_fixed, comb_window_digits
from spotcheck.engine.journal import Journal
from spotcheck.engine.plan import RunPlan
from spotcheck.engine.series import Series, series_of
from spotcheck.errors import CertificationError, CheckpointError, UsageError
from spotcheck.formulas import BUILTIN_CONSTANTS, PI_BBP, PI_BELLARD

from .reference import pi_hex

SERIES_ALL = [series_of(f) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
SERIES = series_of(PI_BELLARD)

# A comb short on either backend, cut into many small blocks: Bellard's formula, 5 windows
# 997 positions apart from 50,000 (the deepest head: 21,595 values of k -> 85 blocks of 256).
POSITION, GAP, COUNT, DIGITS = 50_000, 997, 5, 12
BLOCK_K = 256
D0, STEP = 4 * (POSITION - 1), 4 * GAP
POSITIONS = tuple(POSITION + i * GAP for i in range(COUNT))
# gmpy2/MPFR's pi (tests/reference.py), not spotcheck.
EXPECTED = tuple(pi_hex(POSITIONS[-1] + DIGITS)[p - 1 : p - 1 + DIGITS] for p in POSITIONS)
WORDS = 2


def run_comb(checkpoint: object = None, **kw: object):
    kw.setdefault("block_k", BLOCK_K)
    return extract_comb("pi", POSITION, GAP, COUNT, DIGITS, formula="bellard", checkpoint=checkpoint, **kw)


def comb_request(**change: object) -> CombRequest:
    fields = {"series": SERIES, "d0": D0, "step": STEP, "count": COUNT, "words": WORDS, "block_k": BLOCK_K}
    return CombRequest(**{**fields, **change})  # type: ignore[arg-type]


# --- the comb's sums are each window's own --------------------------------------------


@settings(max_examples=40, deadline=None)
@given(
    series=st.sampled_from(SERIES_ALL),
    d0=st.integers(0, 6000),
    step=st.integers(0, 3000),
    count=st.integers(1, 12),
    words=st.integers(1, 4),
    block_k=st.integers(1, 400),
    workers=st.sampled_from([1, 2]),
)
def test_comb_blocks_sum_to_each_window_alone(
    series: Series, d0: int, step: int, count: int, words: int, block_k: int, workers: int
) -> None:
    request = CombRequest(series, d0, step, count, words, block_k)
    heads = sum_comb_blocks(request, runner=thread_runner(workers))
    assert len(heads) == count
    for i, head in enumerate(heads):
        d = d0 + i * step
        alone = sum_blocks(BlockRequest(series, d, words, block_k), runner=thread_runner(1))
        assert (head.value, head.terms) == (alone.value, alone.terms)
        assert head.terms == series.head_length(d) * len(series.js)
        assert (head.blocks_loaded, head.blocks_computed) == (0, request.block_count)


@settings(max_examples=10, deadline=None)
@given(
    position=st.integers(1, 3000),
    gap=st.integers(1, 500),
    count=st.integers(1, 10),
    block_k=st.integers(1, 200),
)
def test_comb_digits_through_small_blocks_are_the_comb_s(
    position: int, gap: int, count: int, block_k: int
) -> None:
    series = series_of(PI_BBP)
    plan = RunPlan(series, position, 10, thread_runner(2), block_k=block_k)
    got = comb_window_digits(series, position, gap, count, 10, plan)
    want = comb_window_digits(series, position, gap, count, 10)  # one block a window, no plan

    def seen(w):
        return (w.position, w.digits, w.interval.lo, w.interval.hi, w.interval.bits, w.interval.terms)

    assert [seen(w) for w in got] == [seen(w) for w in want]
    reference = pi_hex(position + (count - 1) * gap + 10)
    assert [w.digits for w in got] == [reference[p - 1 : p + 9] for p in (w.position for w in got)]


def test_extract_comb_with_workers_and_progress() -> None:
    seen = []
    result = run_comb(workers=2, block_progress=seen.append)
    assert result.digits == EXPECTED
    assert result.digits == tuple(extract("pi", p, DIGITS).digits for p in POSITIONS)
    last = seen[-1]
    assert last.windows == COUNT and last.d == D0 and last.done == last.total == comb_request().block_count
    heads = sum(SERIES.head_length(4 * (p - 1)) for p in POSITIONS) * len(SERIES.js)
    assert last.terms_done == last.terms_computed == last.terms_total == heads
    assert [p.done for p in seen] == list(range(1, last.total + 1))
    assert result.blocks_computed == last.total and result.blocks_loaded == 0


def test_deep_comb_blocks_are_shorter_by_the_comb_s_cost(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(blocks, "DEEP_BLOCK_K_MIN", BLOCK_K)  # so that this short head has deep blocks of 256
    k_total = 10**9
    window = blocks.deep_block_k(SERIES, k_total)
    assert blocks.deep_comb_block_k(SERIES, k_total, 1) < window  # two ladders a term
    assert blocks.deep_comb_block_k(SERIES, k_total, 64) == window * 8 // 80
    seen = []
    result = extract_comb(
        "pi",
        POSITION,
        GAP,
        COUNT,
        DIGITS,
        formula="bellard",
        checkpoint=tmp_path / "j",
        block_progress=seen.append,
    )
    assert result.digits == EXPECTED
    deep = blocks.deep_comb_block_k(SERIES, SERIES.head_length(D0 + (COUNT - 1) * STEP), COUNT)
    assert deep == BLOCK_K * 8 // 21 and seen[-1].total == -(
        -SERIES.head_length(D0 + (COUNT - 1) * STEP) // deep
    )


# --- one gate for both kinds of record ------------------------------------------------


def good() -> CombRecord:
    return compute_comb_block(SERIES, D0, STEP, COUNT, WORDS, BLOCK_K, 2 * BLOCK_K)


def late() -> CombRecord:
    """A block past the first windows' heads: they have no terms in it."""
    request = comb_request()
    k0, k1 = list(request.blocks())[-1]
    return compute_comb_block(SERIES, D0, STEP, COUNT, WORDS, k0, k1)


def test_computed_comb_blocks_pass_the_gate() -> None:
    request = comb_request()
    for k0, k1 in list(request.blocks())[:: request.block_count // 7]:
        assert block_problem(request, compute_comb_block(SERIES, D0, STEP, COUNT, WORDS, k0, k1)) is None
    record = late()
    assert record.terms[0] == 0 and record.values[0] == 0 and record.terms[-1] > 0
    assert block_problem(request, record) is None


BAD_COMB_RECORDS = {
    "other first window": ({"d0": D0 + 4}, "comb (d0"),
    "other step": ({"step": STEP + 4}, "comb (d0"),
    "other count": (
        {"count": COUNT + 1, "values": good().values + (0,), "terms": good().terms + (0,)},
        "comb (d0",
    ),
    "other precision": ({"words": 3}, "words"),
    "other series": ({"series": blocks.series_fingerprint(series_of(PI_BBP))}, "another series"),
    "shifted range": ({"k0": BLOCK_K + 1}, "not a block"),
    "outside the head": ({"k0": 10**9, "k1": 10**9 + BLOCK_K}, "not a block"),
    "value beyond 2^P in one window": (
        {"values": good().values[:2] + (1 << 128,) + good().values[3:]},
        "window 2",
    ),
    "negative value": ({"values": (-1,) + good().values[1:]}, "value outside"),
    "wrong terms in one window": ({"terms": good().terms[:4] + (good().terms[4] - 1,)}, "terms instead of"),
    "a value short": ({"values": good().values[1:]}, "not a tuple of 5"),
    "terms as a list": ({"terms": list(good().terms)}, "not a tuple"),
    "a value as a float": ({"values": (1.5,) + good().values[1:]}, "not an integer"),
    "step as a string": ({"step": str(STEP)}, "not an integer"),
}


@pytest.mark.parametrize("name", list(BAD_COMB_RECORDS))
def test_bad_comb_record_is_named(name: str) -> None:
    change, reason = BAD_COMB_RECORDS[name]
    problem = block_problem(comb_request(), dataclasses.replace(good(), **change))
    assert problem is not None and reason in problem


def test_a_value_without_terms_is_refused() -> None:
    record = late()
    bad = dataclasses.replace(record, values=(1,) + record.values[1:])
    assert "without terms" in str(block_problem(comb_request(), bad))


def test_records_of_the_other_kind_are_refused() -> None:
    window = compute_block(SERIES, D0, WORDS, 0, BLOCK_K)
    assert "not a comb block record" in str(block_problem(comb_request(), window))
    assert "not a block record: CombRecord" in str(
        block_problem(BlockRequest(SERIES, D0, WORDS, BLOCK_K), good())
    )


def replace_comb(record: CombRecord, **change: object) -> CombRecord:
    return dataclasses.replace(record, **change)


BAD_COMB_RUNS = {
    "value out of range": lambda recs: [replace_comb(recs[0], values=(1 << 128,) * COUNT)] + recs[1:],
    "another comb": lambda recs: [replace_comb(recs[0], step=STEP + 4)] + recs[1:],
    "same block twice": lambda recs: recs + [recs[3]],
    "missing block": lambda recs: recs[:-1],
    "a window's record": lambda recs: [compute_block(SERIES, D0, WORDS, 0, BLOCK_K)] + recs[1:],
}


@pytest.mark.parametrize("name", list(BAD_COMB_RUNS))
def test_bad_comb_runner_result_is_rejected(name: str) -> None:
    def runner(req: CombRequest, todo):
        fn, args = req.task()
        yield from BAD_COMB_RUNS[name]([fn(*args, k0, k1) for k0, k1 in todo])

    plan = RunPlan(SERIES, POSITION, DIGITS, runner, block_k=BLOCK_K)
    with pytest.raises(CertificationError, match="block"):
        comb_heads_fixed(SERIES, D0, STEP, COUNT, WORDS, plan)


# --- the journal: comb sections ---------------------------------------------------------


def read_lines(path: Path) -> list[dict | None]:
    """Complete lines of a journal (``None`` where the checksum fails), read as DEVELOPERS.md describes."""
    data = path.read_bytes()
    out: list[dict | None] = []
    for raw in data[: data.rfind(b"\n") + 1].split(b"\n")[:-1]:
        text, _, checksum = raw.decode("utf-8", "replace").rpartition("\t")
        out.append(json.loads(text) if hashlib.sha256(text.encode()).hexdigest()[:32] == checksum else None)
    return out


def comb_blocks_in(path: Path) -> list[int]:
    """``k0`` of every comb block line with a good checksum, in file order."""
    return [obj["combblock"][4] for obj in read_lines(path) if obj and "combblock" in obj]


def line_with_checksum(obj: dict) -> bytes:
    text = json.dumps(obj, separators=(",", ":"), sort_keys=True)
    return f"{text}\t{hashlib.sha256(text.encode()).hexdigest()[:32]}".encode()


@pytest.fixture
def finished(tmp_path: Path) -> Path:
    path = tmp_path / "comb.journal"
    assert run_comb(path).digits == EXPECTED
    return path


def counting_comb_blocks(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """Record the k0 of every comb block computed from now on."""
    computed: list[int] = []
    real = blocks.compute_comb_block

    def counting(series, d0, step, count, words, k0, k1):
        computed.append(k0)
        return real(series, d0, step, count, words, k0, k1)

    monkeypatch.setattr(blocks, "compute_comb_block", counting)
    return computed


def test_comb_journal_names_its_comb_and_is_reused(finished: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    lines = read_lines(finished)
    assert all(obj is not None for obj in lines)
    request = lines[0]["request"]
    assert (request["position"], request["gap"], request["windows"], request["count"]) == (
        POSITION,
        GAP,
        COUNT,
        DIGITS,
    )
    sections = [obj["comb"] for obj in lines if "comb" in obj]
    assert [(s["d0"], s["step"], s["count"], s["words"], s["block_k"]) for s in sections] == [
        (D0, STEP, COUNT, WORDS, BLOCK_K)
    ]
    assert not any("section" in obj or "block" in obj for obj in lines[1:])
    assert comb_blocks_in(finished) == [k0 for k0, _ in comb_request().blocks()]  # compacted, in order
    computed = counting_comb_blocks(monkeypatch)
    again = run_comb(finished)
    assert again.digits == EXPECTED and computed == []
    assert again.blocks_computed == 0 and again.blocks_loaded == comb_request().block_count
    assert again.terms_loaded == sum(SERIES.head_length(D0 + i * STEP) for i in range(COUNT)) * len(SERIES.js)


def test_resume_after_a_kill_computes_only_the_missing_blocks(
    finished: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # What a run killed after 30 blocks leaves: its first line, the section, 30 blocks appended
    # in the order they finished, and the start of a 31st (a torn write).
    raw = finished.read_bytes().split(b"\n")
    kept = [line for line in raw if not line.startswith(b'{"combblock"')]
    block_lines = [line for line in raw if line.startswith(b'{"combblock"')]
    order = block_lines[::2] + block_lines[1::2]  # not in k order: threads finish out of order
    finished.write_bytes(b"\n".join(kept[:2] + order[:30]) + b"\n" + order[30][:40])
    have = set(comb_blocks_in(finished))
    computed = counting_comb_blocks(monkeypatch)
    progress = []
    result = run_comb(finished, workers=2, block_progress=progress.append)
    assert result.digits == EXPECTED
    assert sorted(computed) == [k0 for k0, _ in comb_request().blocks() if k0 not in have]
    assert result.blocks_loaded == 30 and result.blocks_computed == comb_request().block_count - 30
    assert progress[0].resumed == 30 and progress[0].computed == 0 and progress[-1].computed == len(computed)
    assert 0 < result.terms_loaded < result.terms
    assert comb_blocks_in(finished) == [k0 for k0, _ in comb_request().blocks()]


def test_an_interrupted_comb_run_resumes(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "comb.journal"

    def stop_after_20(p) -> None:
        if p.done == 20:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_comb(path, block_progress=stop_after_20)
    assert len(comb_blocks_in(path)) == 20  # every reported block is on disk
    computed = counting_comb_blocks(monkeypatch)
    result = run_comb(path)
    assert result.digits == EXPECTED and len(computed) == comb_request().block_count - 20


def test_a_damaged_comb_record_is_refused_and_recomputed(
    finished: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    raw = finished.read_bytes().split(b"\n")
    i = [n for n, line in enumerate(raw) if line.startswith(b'{"combblock"')][40]
    damaged_k0 = json.loads(raw[i].split(b"\t")[0])["combblock"][4]
    line = bytearray(raw[i])
    line[line.index(b'["') + 5] ^= 0x01  # a hex digit of the first window's value
    raw[i] = bytes(line)
    finished.write_bytes(b"\n".join(raw))
    assert damaged_k0 not in comb_blocks_in(finished)
    computed = counting_comb_blocks(monkeypatch)
    result = run_comb(finished)
    assert result.digits == EXPECTED and computed == [damaged_k0]
    assert len(result.warnings) == 1 and "1 damaged record(s)" in result.warnings[0]
    assert comb_blocks_in(finished) == [k0 for k0, _ in comb_request().blocks()]


def edit_comb_line(path: Path, prefix: bytes, edit) -> None:
    """Change the first line starting with ``prefix`` and give it a valid checksum."""
    raw = path.read_bytes().split(b"\n")
    i = next(n for n, line in enumerate(raw) if line.startswith(prefix))
    obj = json.loads(raw[i].split(b"\t")[0])
    edit(obj)
    raw[i] = line_with_checksum(obj)
    path.write_bytes(b"\n".join(raw))


def edit_block(field: int, value: object):
    """Set one field of the first comb block (a valid checksum)."""
    return lambda path: edit_comb_line(
        path, b'{"combblock"', lambda obj: obj["combblock"].__setitem__(field, value)
    )


def edit_block_with(edit):
    return lambda path: edit_comb_line(path, b'{"combblock"', lambda obj: edit(obj["combblock"]))


def edit_section(**change: object):
    return lambda path: edit_comb_line(path, b'{"comb"', lambda obj: obj["comb"].update(change))


def copy_line_of_another_comb(path: Path) -> None:
    """A block of another comb (d0 + 4) computed for real, with its own good checksum, among this one's."""
    other = compute_comb_block(SERIES, D0 + 4, STEP, COUNT, WORDS, 0, BLOCK_K)
    line = line_with_checksum({"combblock": [D0 + 4, STEP, COUNT, WORDS, *other.to_list()]})
    raw = path.read_bytes().split(b"\n")
    raw.insert(3, line)
    path.write_bytes(b"\n".join(raw))


def duplicate_first_block(path: Path) -> None:
    raw = path.read_bytes().split(b"\n")
    i = next(n for n, line in enumerate(raw) if line.startswith(b'{"combblock"'))
    raw.insert(i + 1, raw[i])
    path.write_bytes(b"\n".join(raw))


# Records with a good checksum whose content is not this comb's: the whole file is refused.
REFUSED = {
    "a block of another comb": copy_line_of_another_comb,
    "a block naming another step": edit_block(1, STEP + 4),
    "value beyond 2^P": edit_block(6, ["1" + "0" * 32] * COUNT),
    "a window's value missing": edit_block_with(lambda fields: fields[6].pop()),
    "wrong terms": edit_block_with(lambda fields: fields[7].__setitem__(0, 1)),
    "values not a list": edit_block(6, "00"),
    "shifted range": edit_block(4, 1),
    "duplicated block": duplicate_first_block,
    "comb section of another series": edit_section(k_total=5),
    "comb section with no windows": edit_section(count=0),
}


@pytest.mark.parametrize("damage", list(REFUSED))
def test_foreign_comb_content_refuses_the_file(finished: Path, damage: str) -> None:
    REFUSED[damage](finished)
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="refused"):
        run_comb(finished)
    assert finished.read_bytes() == before  # left alone


@pytest.mark.parametrize(
    "other",
    [{"gap": GAP + 1}, {"count": COUNT + 1}, {"digits": DIGITS - 1}],
    ids=["other gap", "other count", "other digits"],
)
def test_journal_of_another_comb_is_refused(finished: Path, other: dict) -> None:
    args = {"gap": GAP, "count": COUNT, "digits": DIGITS, **other}
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="another request"):
        extract_comb("pi", POSITION, formula="bellard", block_k=BLOCK_K, checkpoint=finished, **args)
    with pytest.raises(CheckpointError, match="another request"):  # nor is a window's run served by it
        extract("pi", POSITION, DIGITS, formula="bellard", block_k=BLOCK_K, checkpoint=finished)
    assert finished.read_bytes() == before


def test_a_comb_too_wide_for_a_journal_line(tmp_path: Path) -> None:
    with pytest.raises(UsageError, match="at most 4,096 windows"):
        extract_comb("pi", 1, 1, 4097, 8, checkpoint=tmp_path / "never")
    assert not (tmp_path / "never").exists()
    # a record too long for a line is never written (the reader would refuse the file there)
    journal = Journal(tmp_path / "long", SERIES, {"test": "long lines"})
    request = CombRequest(SERIES, 0, 4, 10_000, 8, 1)
    wide = CombRecord(request.fingerprint, 0, 4, 10_000, 8, 0, 1, (1 << 500,) * 10_000, (7,) * 10_000)
    journal.add(request, wide)
    assert journal.failure is not None and "longer than a checkpoint line" in journal.failure
    journal.close()
    assert b"combblock" not in (tmp_path / "long").read_bytes()
    reread = Journal(tmp_path / "long", SERIES, {"test": "long lines"})
    assert reread.blocks_kept == 0
    reread.close()


def test_comb_checkpoint_auto_and_a_missing_folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    result = run_comb(True)
    assert result.digits == EXPECTED and result.checkpoint is not None
    auto = Path(result.checkpoint)
    assert auto.parent == tmp_path / "cache" / "spotcheck" and f"gap{GAP}-w{COUNT}" in auto.name
    assert read_lines(auto)[0]["request"]["windows"] == COUNT
    with pytest.raises(CheckpointError):  # a named checkpoint's folder must exist
        run_comb(tmp_path / "missing" / "comb.journal")


def test_other_comb_block_size_is_refused(finished: Path) -> None:
    with pytest.raises(CheckpointError, match="blocks of"):
        run_comb(finished, block_k=2 * BLOCK_K)


def test_comb_and_window_sections_share_one_journal(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """As a check holds every window it evaluates in one journal: a window alone and a comb side by side."""
    path = tmp_path / "check.journal"
    request = {"constant": "pi", "test": "a check's journal"}

    def both(journal: Journal):
        alone = extract("pi", 40_000, DIGITS, formula="bellard", block_k=BLOCK_K, checkpoint=journal)
        comb = run_comb(journal)
        return alone, comb

    journal = Journal(path, SERIES, request)
    alone, comb = both(journal)
    journal.close()
    assert alone.digits == pi_hex(40_000 + DIGITS)[39_999 : 39_999 + DIGITS] and comb.digits == EXPECTED
    lines = read_lines(path)
    assert sum("section" in obj for obj in lines) == 1 and sum("comb" in obj for obj in lines) == 1
    assert len(comb_blocks_in(path)) == comb_request().block_count
    computed = counting_comb_blocks(monkeypatch)
    monkeypatch.setattr(blocks, "compute_block", lambda *a: pytest.fail("a window's block was computed"))
    journal = Journal(path, SERIES, request)
    try:
        again_alone, again_comb = both(journal)
    finally:
        journal.close()
    assert (again_alone.digits, again_comb.digits) == (alone.digits, comb.digits)
    assert computed == [] and again_alone.blocks_computed == 0 and again_comb.blocks_computed == 0


def test_a_window_evaluated_alone_goes_through_the_plan(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    """A window the comb's precision does not certify is evaluated alone with the same journal."""
    import spotcheck.engine.comb as comb

    monkeypatch.setattr(comb, "certified_hex_prefix", lambda interval, limit: "")
    path = tmp_path / "comb.journal"
    result = run_comb(path)
    assert result.digits == EXPECTED and result.alone == COUNT
    lines = read_lines(path)
    assert sum("comb" in obj for obj in lines) == 1 and sum("section" in obj for obj in lines) == COUNT
    assert result.blocks_computed == comb_request().block_count + sum(
        BlockRequest(SERIES, 4 * (p - 1), WORDS + 1, BLOCK_K).block_count for p in POSITIONS
    )
