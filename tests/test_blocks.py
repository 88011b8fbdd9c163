"""Head-sum blocks: record checks, checkpoints (resume, refusal), runners."""

from __future__ import annotations

import sys

import pytest

from spotcheck.engine import blocks
from spotcheck.engine.api import extract
from spotcheck.engine.blocks import (
    BlockRecord,
    BlockRequest,
    block_problem,
    compute_block,
    deep_block_k,
    sum_blocks,
    thread_runner,
)
from spotcheck.engine.evaluate import head_fixed
from spotcheck.engine.plan import BLOCK_K as BLOCK_K_PLAIN
from spotcheck.engine.plan import RunPlan
from spotcheck.engine.series import series_of
from spotcheck.errors import CertificationError, UsageError
from spotcheck.formulas import PI_BBP, PI_BELLARD

from .reference import pi_hex

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
    listed = list(req.blocks())
    assert len(listed) > 50
    for k0, k1 in (listed[0], listed[-1]):
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
    k0, k1 = list(req.blocks())[-1]
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
    assert (whole.value, whole.terms) == blocks.backend.head_block(
        SERIES, D - SERIES.shift, 0, SERIES.head_length(D), 2
    )
    for runner in (thread_runner(1), thread_runner(2)):
        got = sum_blocks(request(), runner=runner)
        assert (got.value, got.terms) == (whole.value, whole.terms)
        assert got.blocks_computed == request().block_count and got.blocks_loaded == got.terms_loaded == 0
    plan = RunPlan(SERIES, POSITION, 14, thread_runner(2), block_k=100)
    assert (head_fixed(SERIES, D, 2, plan).value, head_fixed(SERIES, D, 2, plan).terms) == (
        whole.value,
        whole.terms,
    )


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
    def runner(req: BlockRequest, todo):
        recs = [compute_block(req.series, req.d, req.words, k0, k1) for k0, k1 in todo]
        yield from BAD_RUNS[name](recs)

    with pytest.raises(CertificationError, match="block"):
        head_fixed(SERIES, D, 2, RunPlan(SERIES, POSITION, 14, runner, block_k=BLOCK_K))


def test_block_progress_reports_every_block() -> None:
    seen = []
    digits = extract("pi", POSITION, 14, block_k=BLOCK_K, block_progress=seen.append).digits
    assert digits == EXPECTED
    last = seen[-1]
    assert last.done == last.total == len(list(request(last.words).blocks()))
    assert (
        last.terms_done
        == last.terms_computed
        == last.terms_total
        == SERIES.head_length(last.d) * len(SERIES.js)
    )
    assert last.computed == last.total and last.resumed == 0
    assert [p.done for p in seen if (p.d, p.words) == (last.d, last.words)] == list(range(1, last.total + 1))
    assert last.rate > 0 and last.eta == 0


def test_block_progress_does_not_change_the_block_size() -> None:
    seen = []
    extract("pi", POSITION, 14, block_progress=seen.append)
    # an ordinary run keeps the ordinary block size (plan.BLOCK_K) with a progress callback
    assert seen[-1].total == -(-SERIES.head_length(D) // BLOCK_K_PLAIN)


def test_blocks_are_lazy() -> None:
    # A head of 4 * 10^14 values of k (pi at 10^15) cut into blocks: the first
    # ones come at once, nothing is listed.
    deep = BlockRequest(SERIES, 4 * 10**15, 2, 1 << 18)
    it = deep.blocks()
    assert next(it) == (0, 1 << 18) and next(it) == (1 << 18, 2 << 18)
    assert deep.block_count == -(-deep.k_total // (1 << 18))


def test_bad_block_size_is_a_usage_error() -> None:
    with pytest.raises(UsageError):
        extract("pi", POSITION, 14, block_k=0)


def test_cluster_without_dask_explains_install(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed -> ImportError
    with pytest.raises(UsageError, match=r"pip install 'spotcheck\[cluster\]'"):
        extract("pi", POSITION, 14, cluster="tcp://127.0.0.1:1")
