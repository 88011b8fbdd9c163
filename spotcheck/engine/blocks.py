"""The head sum as independent blocks of k.

A *block* is one range ``k0 <= k < k1`` of the head sum of one series at bit
offset ``d`` with ``64 * words`` fractional bits.  Its result is a plain
record, :class:`BlockRecord`: the fixed-point partial sum mod ``2^P`` and the
number of terms (each term is floored once, so the record's exact value lies
in ``[value, value + terms)`` ulps).  Partial sums add exactly mod ``2^P``, in
any order, so blocks can run on threads, on Dask workers, or in an earlier,
interrupted process whose finished blocks a :class:`Checkpoint` kept.

Every record is checked by :func:`block_problem` before it is added, whatever
its origin: a record for another series, offset, precision or range, a value
outside ``[0, 2^P)``, a wrong term count, or a block already added is
refused, never mixed in.

Blocks are generated lazily (:meth:`BlockRequest.blocks` is an iterator), so
a head sum of any length starts at once in bounded memory.  The checkpoint
file of finished blocks is :mod:`spotcheck.engine.journal`.
"""

from __future__ import annotations

import hashlib
import time
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from spotcheck.engine import backend
from spotcheck.engine.series import Series
from spotcheck.errors import CertificationError

if TYPE_CHECKING:
    from spotcheck.engine.journal import Journal

__all__ = [
    "BlockRecord",
    "BlockRequest",
    "BlockProgress",
    "BlockRunner",
    "HeadSum",
    "block_problem",
    "compute_block",
    "sum_blocks",
    "thread_runner",
    "deep_block_k",
    "series_fingerprint",
]

# --- tuning -----------------------------------------------------------------
# Block size for checkpointed and cluster runs.  The compiled kernel takes
# about 55-110 ns per term on a 2020s x86-64 core, so 2^27 terms are about
# 7-15 s: long enough that scheduling and checkpoint writes cost nothing,
# short enough that an interruption loses little.
DEEP_BLOCK_TERMS = 1 << 27
# ... but split a shorter head into at least this many blocks (for
# parallelism), with blocks of no fewer than DEEP_BLOCK_K_MIN values of k.
DEEP_MIN_BLOCKS = 256
DEEP_BLOCK_K_MIN = 1 << 16
# ---------------------------------------------------------------------------


def series_fingerprint(series: Series) -> str:
    """A short hash of every integer the kernels see, naming the series exactly."""
    data = (series.m, series.s, series.e, series.q, series.shift, series.alternating, series.js, series.cs)
    return hashlib.sha256(repr(data).encode()).hexdigest()[:20]


def deep_block_k(series: Series, k_total: int) -> int:
    """Values of k per block for checkpointed and cluster runs (see the tuning block)."""
    most = max(1, DEEP_BLOCK_TERMS // len(series.js))
    wanted = -(-k_total // DEEP_MIN_BLOCKS)
    return max(1, min(most, max(DEEP_BLOCK_K_MIN, wanted)))


@dataclass(frozen=True)
class BlockRecord:
    """One finished block: ``value`` = its head partial sum mod ``2^(64 words)``."""

    series: str
    """:func:`series_fingerprint` of the series the block was computed for."""
    d: int
    words: int
    k0: int
    k1: int
    value: int
    terms: int

    def to_list(self) -> list[Any]:
        return [self.k0, self.k1, format(self.value, "x"), self.terms]


@dataclass(frozen=True)
class BlockRequest:
    """The head sum of ``series`` at bit offset ``d`` and ``words``, cut into blocks of ``block_k``."""

    series: Series
    d: int
    words: int
    block_k: int

    @property
    def k_total(self) -> int:
        return self.series.head_length(self.d)

    @property
    def fingerprint(self) -> str:
        return series_fingerprint(self.series)

    @property
    def block_count(self) -> int:
        return -(-self.k_total // self.block_k)

    def blocks(self, skip: Callable[[int], bool] | None = None) -> Iterator[tuple[int, int]]:
        """The blocks ``(k0, k1)`` in order, generated lazily; those with ``skip(k0)`` left out."""
        k_total, step = self.k_total, self.block_k
        for k in range(0, k_total, step):
            if skip is None or not skip(k):
                yield k, min(k + step, k_total)

    def is_block(self, k0: int, k1: int) -> bool:
        """Is ``(k0, k1)`` one of this request's blocks?"""
        return 0 <= k0 < k1 and k0 % self.block_k == 0 and k1 == min(k0 + self.block_k, self.k_total)


def block_problem(request: BlockRequest, record: object) -> str | None:
    """Why ``record`` cannot be added to ``request``'s sum, or ``None`` if it can."""
    if not isinstance(record, BlockRecord):
        return f"not a block record: {type(record).__name__}"
    for name in ("d", "words", "k0", "k1", "value", "terms"):
        if type(getattr(record, name)) is not int:
            return f"field {name} is not an integer"
    if record.series != request.fingerprint:
        return "the block belongs to another series"
    if record.d != request.d:
        return f"bit offset {record.d} instead of {request.d}"
    if record.words != request.words:
        return f"{record.words} words instead of {request.words}"
    if not request.is_block(record.k0, record.k1):
        return f"k range [{record.k0}, {record.k1}) is not a block of this head sum"
    if not 0 <= record.value < 1 << (64 * request.words):
        return f"value outside [0, 2^{64 * request.words})"
    expected = (record.k1 - record.k0) * len(request.series.js)
    if record.terms != expected:
        return f"{record.terms} terms instead of {expected}"
    return None


def compute_block(series: Series, d: int, words: int, k0: int, k1: int) -> BlockRecord:
    """Compute one block: the function threads and Dask workers run."""
    value, terms = backend.head_block(series, d - series.shift, k0, k1, words)
    return BlockRecord(series_fingerprint(series), d, words, k0, k1, value, terms)


BlockRunner = Callable[[BlockRequest, Iterable[tuple[int, int]]], Iterator[object]]
"""Runs the given blocks of a request (a lazy iterable: never made a list) and yields
their records as they finish, in any order."""


def thread_runner(workers: int = 1) -> BlockRunner:
    """Run blocks on this machine: serially, or on ``workers`` threads (the kernel releases the GIL)."""

    def run(request: BlockRequest, blocks: Iterable[tuple[int, int]]) -> Iterator[object]:
        s, d, w = request.series, request.d, request.words
        if workers <= 1:
            for k0, k1 in blocks:
                yield compute_block(s, d, w, k0, k1)
            return
        pool = ThreadPoolExecutor(max_workers=workers)
        try:
            # Keep at most 2 * workers blocks queued, so an interruption does
            # not leave a long queue to drain.
            todo = iter(blocks)
            running: set[Future[BlockRecord]] = set()
            for k0, k1 in todo:
                running.add(pool.submit(compute_block, s, d, w, k0, k1))
                if len(running) >= 2 * workers:
                    break
            while running:
                finished, running = wait(running, return_when=FIRST_COMPLETED)
                for f in finished:
                    nxt = next(todo, None)
                    if nxt is not None:
                        running.add(pool.submit(compute_block, s, d, w, *nxt))
                    yield f.result()
        finally:
            pool.shutdown(wait=False, cancel_futures=True)

    return run


@dataclass(frozen=True)
class BlockProgress:
    """Where a blocked head sum stands; passed to ``on_block`` after each block."""

    d: int
    words: int
    done: int
    """Blocks finished, resumed ones included."""
    total: int
    resumed: int
    """Blocks taken from the checkpoint, not computed in this run."""
    computed: int
    elapsed: float
    """Seconds since this head sum started."""
    terms_total: int = 0
    """Head terms of the whole sum."""
    terms_loaded: int = 0
    """Terms of the blocks taken from the checkpoint."""
    terms_computed: int = 0
    """Terms computed in this run."""

    @property
    def terms_done(self) -> int:
        return self.terms_loaded + self.terms_computed

    @property
    def rate(self) -> float:
        """Terms computed per second in this run (0.0 before the first block)."""
        return self.terms_computed / self.elapsed if self.elapsed > 0 else 0.0

    @property
    def eta(self) -> float | None:
        """Estimated seconds left (terms to do over this run's rate), ``None`` until a rate is known."""
        rate = self.rate
        return (self.terms_total - self.terms_done) / rate if rate > 0 else None


@dataclass(frozen=True)
class HeadSum:
    """A finished head sum: ``value`` mod ``2^P`` and its term counts."""

    value: int
    terms: int
    terms_loaded: int
    """Terms of blocks taken from the checkpoint (included in ``terms``)."""
    blocks_loaded: int
    blocks_computed: int


def sum_blocks(
    request: BlockRequest,
    *,
    runner: BlockRunner,
    journal: Journal | None = None,
    on_block: Callable[[BlockProgress], None] | None = None,
) -> HeadSum:
    """The head sum of ``request``, block by block.

    Blocks already in ``journal`` are taken from it; the rest go to
    ``runner``, lazily.  Every record is checked with :func:`block_problem`
    before it is added; a bad one raises :class:`CertificationError`.  Each
    computed block is appended to ``journal`` (written and fsync'd) before
    ``on_block`` hears of it.
    """
    t0 = time.monotonic()
    mask = (1 << (64 * request.words)) - 1
    total = request.block_count
    per_k = len(request.series.js)
    terms_total = request.k_total * per_k
    # Memory stays bounded: the loaded blocks' starts, and the blocks handed
    # to the runner and not yet back (a record for any other block is refused).
    loaded: set[int] = set()
    issued: set[int] = set()
    value = terms = loaded_terms = 0
    resumed = computed = 0

    def add(record: BlockRecord) -> None:
        nonlocal value, terms
        value = (value + record.value) & mask
        terms += record.terms

    def report() -> None:
        if on_block:
            on_block(
                BlockProgress(
                    request.d,
                    request.words,
                    resumed + computed,
                    total,
                    resumed,
                    computed,
                    time.monotonic() - t0,
                    terms_total,
                    loaded_terms,
                    terms - loaded_terms,
                )
            )

    if journal is not None:
        for record in journal.records(request):  # validated when the file was read
            add(record)
            loaded.add(record.k0)
            resumed += 1
            loaded_terms += record.terms
        if resumed:
            report()

    def todo() -> Iterator[tuple[int, int]]:
        for block in request.blocks(skip=loaded.__contains__ if loaded else None):
            issued.add(block[0])
            yield block

    records = runner(request, todo())
    try:
        for item in records:
            problem = block_problem(request, item)
            if problem is None and isinstance(item, BlockRecord) and item.k0 not in issued:
                problem = f"block [{item.k0}, {item.k1}) was not asked for, or arrived twice"
            if problem is not None or not isinstance(item, BlockRecord):
                raise CertificationError(f"a head-sum block result was rejected: {problem}")
            issued.discard(item.k0)
            add(item)
            computed += 1
            if journal is not None:
                journal.add(request, item)
            report()
    finally:
        close = getattr(records, "close", None)
        if close is not None:  # stop a generator runner now: cancel its queued blocks
            close()
    if resumed + computed != total:
        raise CertificationError(f"only {resumed + computed} of {total} head-sum blocks came back")
    return HeadSum(value, terms, loaded_terms, resumed, computed)
