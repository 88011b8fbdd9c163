"""Head-sum blocks: record checks, checkpoints (resume, refusal), runners."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from spotcheck.engine import blocks
from spotcheck.engine.api import checkpoint_request, default_checkpoint_path, extract
from spotcheck.engine.blocks import (
    BlockPlan,
    BlockRecord,
    BlockRequest,
    Checkpoint,
    block_problem,
    compute_block,
    deep_block_k,
    sum_blocks,
    thread_runner,
)
from spotcheck.engine.evaluate import head_fixed
from spotcheck.engine.series import series_of
from spotcheck.errors import CertificationError, CheckpointError, SpotcheckError, UsageError
from spotcheck.formulas import PI_BBP, PI_BELLARD, Formula

from .reference import pi_hex

ROOT = Path(__file__).resolve().parents[1]

# A position whose head sum is short on either backend, cut into small blocks
# so that it needs many of them (bellard: 20,000 values of k -> 79 blocks).
POSITION = 50_000
BLOCK_K = 256
# gmpy2/MPFR's pi (tests/reference.py), not spotcheck.
EXPECTED = pi_hex(POSITION + 13)[POSITION - 1 :]

SERIES = series_of(PI_BELLARD)
D = 4 * (POSITION - 1)


def request(words: int = 2, block_k: int = BLOCK_K) -> BlockRequest:
    return BlockRequest(SERIES, D, words, block_k)


def test_plain_path_matches_reference() -> None:
    assert extract("pi", POSITION, 14).digits == EXPECTED


# --- block records ------------------------------------------------------------


def test_computed_block_passes_its_check() -> None:
    req = request()
    assert len(req.blocks()) > 50
    for k0, k1 in (req.blocks()[0], req.blocks()[-1]):
        assert block_problem(req, compute_block(SERIES, D, 2, k0, k1)) is None


def good() -> BlockRecord:
    return compute_block(SERIES, D, 2, BLOCK_K, 2 * BLOCK_K)


@pytest.mark.parametrize(
    ("change", "reason"),
    [
        ({"d": D + 4}, "bit offset"),
        ({"words": 3}, "words"),
        ({"series": series_of(PI_BBP) and blocks.series_fingerprint(series_of(PI_BBP))}, "another series"),
        ({"k0": BLOCK_K + 1}, "not a block"),
        ({"k1": 2 * BLOCK_K + 1}, "not a block"),
        ({"k0": 10**9, "k1": 10**9 + BLOCK_K}, "not a block"),
        ({"value": 1 << 128}, "value outside"),
        ({"value": -1}, "value outside"),
        ({"terms": 7 * BLOCK_K - 1}, "terms instead of"),
        ({"value": 1.5}, "not an integer"),
    ],
)
def test_bad_record_is_named(change: dict, reason: str) -> None:
    fields = {**good().__dict__, **change}
    problem = block_problem(request(), BlockRecord(**fields))
    assert problem is not None and reason in problem


def test_last_block_is_short() -> None:
    req = request()
    k0, k1 = req.blocks()[-1]
    assert k1 == req.k_total and k1 - k0 < BLOCK_K
    last = compute_block(SERIES, D, 2, k0, k1)
    assert block_problem(req, last) is None
    too_long = replace(last, k1=k0 + BLOCK_K, terms=BLOCK_K * len(SERIES.js))
    assert "not a block" in str(block_problem(req, too_long))


def test_not_a_record() -> None:
    assert block_problem(request(), (0, 0)) is not None


def test_deep_block_size() -> None:
    # Long heads get blocks of DEEP_BLOCK_TERMS terms; short ones at least DEEP_MIN_BLOCKS blocks.
    assert deep_block_k(SERIES, 10**12) * len(SERIES.js) <= blocks.DEEP_BLOCK_TERMS
    assert deep_block_k(SERIES, 10**12) * len(SERIES.js) > blocks.DEEP_BLOCK_TERMS - len(SERIES.js)
    assert deep_block_k(SERIES, 10**8) == -(-(10**8) // blocks.DEEP_MIN_BLOCKS)
    assert deep_block_k(SERIES, 100) == blocks.DEEP_BLOCK_K_MIN


# --- runners and the checked sum ------------------------------------------------


def test_block_sum_equals_one_piece() -> None:
    whole = head_fixed(SERIES, D, 2)
    assert sum_blocks(request(), runner=thread_runner(1)) == whole
    assert sum_blocks(request(), runner=thread_runner(2)) == whole
    assert head_fixed(SERIES, D, 2, plan=BlockPlan(block_k=100), workers=2) == whole


def replace(record: BlockRecord, **change: object) -> BlockRecord:
    return BlockRecord(**{**record.__dict__, **change})


BAD_RUNS = {
    "value out of range": lambda recs: [replace(recs[0], value=1 << 128)] + recs[1:],
    "wrong precision": lambda recs: [replace(recs[0], words=3)] + recs[1:],
    "range outside the request": lambda recs: recs + [replace(recs[0], k0=10**6, k1=10**6 + BLOCK_K)],
    "same block twice": lambda recs: recs + [recs[3]],
    "missing block": lambda recs: recs[:-1],
    "not a record": lambda recs: [(r.value, r.terms) for r in recs],
}


@pytest.mark.parametrize("name", list(BAD_RUNS))
def test_bad_runner_result_is_rejected(name: str) -> None:
    def runner(req: BlockRequest, todo: list[tuple[int, int]]):
        recs = [compute_block(req.series, req.d, req.words, k0, k1) for k0, k1 in todo]
        yield from BAD_RUNS[name](recs)

    with pytest.raises(CertificationError, match="block"):
        head_fixed(SERIES, D, 2, plan=BlockPlan(runner=runner, block_k=BLOCK_K))


def test_block_progress_reports_every_block() -> None:
    seen = []
    digits = extract("pi", POSITION, 14, block_k=BLOCK_K, block_progress=seen.append).digits
    assert digits == EXPECTED
    last = seen[-1]
    assert last.done == last.total == len(request(last.words).blocks())
    assert last.computed == last.total and last.resumed == 0
    assert [p.done for p in seen if (p.d, p.words) == (last.d, last.words)] == list(range(1, last.total + 1))
    assert last.rate > 0 and last.eta == 0


# --- checkpoints ------------------------------------------------------------------


def run_with(path: Path, position: int = POSITION, formula: str = "bellard", **kw) -> str:
    return extract("pi", position, 14, formula=formula, block_k=BLOCK_K, checkpoint=path, **kw).digits


def test_checkpoint_written_and_reused(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "cp.json"
    assert run_with(path) == EXPECTED
    data = json.loads(path.read_text())
    assert data["request"]["position"] == POSITION and data["request"]["formula"] == "bellard"
    kept = sum(len(s["blocks"]) for s in data["sections"])
    assert kept == sum(
        len(BlockRequest(SERIES, s["d"], s["words"], BLOCK_K).blocks()) for s in data["sections"]
    )

    def no_compute(*args: object) -> BlockRecord:
        raise AssertionError("a finished block was computed again")

    monkeypatch.setattr(blocks, "compute_block", no_compute)
    progress = []
    assert run_with(path, block_progress=progress.append) == EXPECTED
    assert progress[-1].resumed == progress[-1].total and progress[-1].computed == 0


def test_default_checkpoint_path(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    path = default_checkpoint_path("pi", POSITION, 14)
    assert path.parent == tmp_path / "spotcheck"
    assert path != default_checkpoint_path("pi", POSITION + 1, 14)
    assert path != default_checkpoint_path("pi", POSITION, 14, formula="bbp")
    assert extract("pi", POSITION, 14, block_k=BLOCK_K, checkpoint=True).digits == EXPECTED
    assert path.exists()


@pytest.fixture
def finished(tmp_path: Path) -> Path:
    path = tmp_path / "cp.json"
    assert run_with(path) == EXPECTED
    return path


@pytest.mark.parametrize(
    ("position", "formula"),
    [(POSITION + 1, "bellard"), (POSITION, "bbp")],
    ids=["other position", "other formula"],
)
def test_checkpoint_of_another_request_is_refused(finished: Path, position: int, formula: str) -> None:
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="another request"):
        run_with(finished, position, formula)
    assert finished.read_bytes() == before


def test_same_key_other_coefficients_is_refused(finished: Path) -> None:
    # A formula named like the built-in one but with other coefficients
    # (bellard's with two terms swapped) must not reuse its blocks.
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
    assert checkpoint_request("pi", other, POSITION, 14) != checkpoint_request("pi", PI_BELLARD, POSITION, 14)
    with pytest.raises(CheckpointError, match="another request"):
        Checkpoint(finished, series_of(other), checkpoint_request("pi", other, POSITION, 14))


def test_other_block_size_is_refused(finished: Path) -> None:
    with pytest.raises(CheckpointError, match="blocks of"):
        extract("pi", POSITION, 14, block_k=BLOCK_K * 2, checkpoint=finished)


def rewrite(path: Path, edit) -> None:
    """Apply ``edit`` to the checkpoint's data and store it with a valid checksum."""
    data = json.loads(path.read_text())
    edit(data)
    data["checksum"] = blocks._checksum(data["request"], data["sections"])
    path.write_text(json.dumps(data))


def set_first(field: int, value: object):
    def edit(data: dict) -> None:
        data["sections"][0]["blocks"][0][field] = value

    return edit


DAMAGE = {
    "truncated": lambda p: p.write_bytes(p.read_bytes()[: len(p.read_bytes()) // 2]),
    "not JSON": lambda p: p.write_bytes(b"\x00\xff garbage"),
    "other JSON": lambda p: p.write_text("[1, 2, 3]"),
    "checksum altered": lambda p: p.write_text(
        json.dumps({**json.loads(p.read_text()), "checksum": "0" * 64})
    ),
    "k_total changed, checksum kept": lambda p: p.write_text(
        p.read_text().replace('"k_total":', '"k_total":1', 1)
    ),
    "a value changed, checksum kept": lambda p: p.write_text(
        json.dumps(
            {
                **json.loads(p.read_text()),
                "sections": [
                    {**s, "blocks": [[b[0], b[1], format(int(b[2], 16) ^ 1, "x"), b[3]] for b in s["blocks"]]}
                    for s in json.loads(p.read_text())["sections"]
                ],
            }
        )
    ),
    "value beyond 2^P": lambda p: rewrite(p, set_first(2, format(1 << 128, "x"))),
    "wrong term count": lambda p: rewrite(p, set_first(3, 1)),
    "shifted range": lambda p: rewrite(p, set_first(0, 1)),
    "value not hex": lambda p: rewrite(p, set_first(2, "xyz")),
    "k0 as a string": lambda p: rewrite(p, set_first(0, "0")),
    "terms as a float": lambda p: rewrite(p, set_first(3, float(7 * BLOCK_K))),
    "section of another series": lambda p: rewrite(p, lambda d: d["sections"][0].update(k_total=5)),
    "duplicated section": lambda p: rewrite(p, lambda d: d["sections"].append(d["sections"][0])),
}


@pytest.mark.parametrize("damage", list(DAMAGE))
def test_damaged_checkpoint_is_refused(finished: Path, damage: str) -> None:
    DAMAGE[damage](finished)
    before = finished.read_bytes()
    with pytest.raises(CheckpointError, match="refused") as info:
        run_with(finished)
    assert isinstance(info.value, SpotcheckError) and isinstance(info.value, ValueError)
    assert finished.read_bytes() == before


def test_directory_is_refused(tmp_path: Path) -> None:
    with pytest.raises(CheckpointError, match="directory"):
        run_with(tmp_path)


def test_bad_block_size_is_a_usage_error() -> None:
    with pytest.raises(UsageError):
        extract("pi", POSITION, 14, block_k=0)


def test_cluster_without_dask_explains_install(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed -> ImportError
    with pytest.raises(UsageError, match=r"pip install 'spotcheck\[cluster\]'"):
        extract("pi", POSITION, 14, cluster="tcp://127.0.0.1:1")


# --- interruption and resume ---------------------------------------------------------

CHILD = textwrap.dedent(
    """
    import sys, time
    from spotcheck.engine import blocks
    blocks.CHECKPOINT_SECONDS = float(sys.argv[2])
    compute = blocks.compute_block
    def slow(*args):  # make the run last long enough to be interrupted
        time.sleep(0.02)
        return compute(*args)
    blocks.compute_block = slow
    from spotcheck.engine.api import extract
    def said(p):
        print(p.done, flush=True)
    print(extract("pi", {position}, 14, block_k={block_k}, checkpoint=sys.argv[1], block_progress=said).digits)
    """
).format(position=POSITION, block_k=BLOCK_K)


def recorded(path: Path) -> set[tuple[int, int, int]]:
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        return set()
    return {(s["d"], s["words"], b[0]) for s in data["sections"] for b in s["blocks"]}


@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGINT], ids=["SIGKILL", "SIGINT"])
def test_interrupted_run_resumes_with_missing_blocks_only(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, sig: signal.Signals
) -> None:
    # SIGKILL: the child writes after every block and is killed once the file
    # holds 10.  SIGINT: it would write only every 60 s, so the blocks in the
    # file after Ctrl-C were written by the interrupted run on its way out.
    path = tmp_path / "cp.json"
    interval = "0" if sig == signal.SIGKILL else "60"
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    child = subprocess.Popen(
        [sys.executable, "-c", CHILD, str(path), interval],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        assert child.stdout is not None
        if sig == signal.SIGKILL:
            deadline = time.monotonic() + 60
            while len(recorded(path)) < 10:
                assert child.poll() is None, child.communicate()
                assert time.monotonic() < deadline, "the child recorded no blocks"
                time.sleep(0.005)
        else:
            while int(child.stdout.readline() or 10**9) < 10:  # blocks done, as the child reports them
                pass
            assert not path.exists()  # nothing written yet
        child.send_signal(sig)
        child.wait(timeout=30)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode != 0  # it was stopped, not finished
    before = recorded(path)
    total = len(request().blocks())
    assert 10 <= len(before) < total

    computed: list[tuple[int, int, int]] = []
    real = blocks.compute_block

    def counting(series, d, words, k0, k1):
        computed.append((d, words, k0))
        return real(series, d, words, k0, k1)

    monkeypatch.setattr(blocks, "compute_block", counting)
    assert run_with(path) == EXPECTED
    assert len(computed) == len(set(computed))
    assert not set(computed) & before  # nothing recorded was computed again
    assert set(computed) | before == recorded(path)  # and everything else was
    assert len(recorded(path)) >= total
