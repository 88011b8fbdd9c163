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

A *comb block* (:class:`CombRequest`, :class:`CombRecord`) is the same range
of k for every window of a comb, bit offsets ``d0 + i * step``
(:mod:`spotcheck.engine.comb`): one task computes the block's sums for all
windows at once, each window's sum clipped to its own head, and its record
names the comb (``d0``, ``step``, ``count``, ``words``).  The comb's blocks
cut the deepest window's head; a shallower window simply has no terms in the
late blocks.  The same gate checks both kinds (:func:`block_problem`), the
same :func:`sum_blocks` loop runs both (:func:`sum_comb_blocks` returns one
:class:`HeadSum` per window), and the same runners take both
(:meth:`BlockRequest.task` names the function and its arguments).
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
    "CombRecord",
    "CombRequest",
    "Request",
    "compute_comb_block",
    "sum_comb_blocks",
    "BlockProgress",
    "BlockRunner",
    "HeadSum",
    "block_problem",
    "compute_block",
    "sum_blocks",
    "thread_runner",
    "deep_block_k",
    "deep_comb_block_k",
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
# A comb block's value of k costs about 2 + count / COMB_WINDOWS_PER_LADDER
# times a window's (two ladders, then a product and the words per window at
# about 1/8 of a ladder: DEVELOPERS.md's comb figures, 0.8 against 6.5 ns a
# term), so deep comb blocks are that much shorter and last as long.
COMB_WINDOWS_PER_LADDER = 8
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


def deep_comb_block_k(series: Series, k_total: int, count: int) -> int:
    """Values of k per comb block of ``count`` windows for checkpointed and cluster runs: a window's
    :func:`deep_block_k` over the comb's cost per value of k (see the tuning block)."""
    per_ladder = COMB_WINDOWS_PER_LADDER
    return max(1, deep_block_k(series, k_total) * per_ladder // (2 * per_ladder + count))


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

    def window_sums(self) -> list[tuple[Any, Any]]:
        """``(value, terms)`` of each window the record serves: one here."""
        return [(self.value, self.terms)]


@dataclass(frozen=True)
class CombRecord:
    """One finished comb block: ``values[i]``, ``terms[i]`` of window ``i`` (bit offset ``d0 + i * step``)."""

    series: str
    """:func:`series_fingerprint` of the series the block was computed for."""
    d0: int
    step: int
    count: int
    words: int
    k0: int
    k1: int
    values: tuple[int, ...]
    terms: tuple[int, ...]

    def to_list(self) -> list[Any]:
        return [self.k0, self.k1, [format(v, "x") for v in self.values], list(self.terms)]

    def window_sums(self) -> list[tuple[Any, Any]]:
        """``(value, terms)`` of each window of the comb, in order."""
        return list(zip(self.values, self.terms, strict=True))


class _Cut:
    """What a request for a blocked head sum shares: ``k_total`` values of k cut into blocks of ``block_k``."""

    series: Series
    words: int
    block_k: int

    @property
    def k_total(self) -> int:
        raise NotImplementedError

    @property
    def windows(self) -> int:
        """Windows the sum serves (one head sum each)."""
        return 1

    def window_k_total(self, i: int) -> int:
        """Values of k in window ``i``'s head."""
        return self.k_total

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

    def block_terms(self, k0: int, k1: int) -> list[int]:
        """The terms each window has in block ``[k0, k1)`` (its k clipped to the window's head)."""
        per_k = len(self.series.js)
        return [max(0, min(k1, self.window_k_total(i)) - k0) * per_k for i in range(self.windows)]


@dataclass(frozen=True)
class BlockRequest(_Cut):
    """The head sum of ``series`` at bit offset ``d`` and ``words``, cut into blocks of ``block_k``."""

    series: Series
    d: int
    words: int
    block_k: int

    @property
    def k_total(self) -> int:
        return self.series.head_length(self.d)

    def task(self) -> tuple[Callable[..., Any], tuple[Any, ...]]:
        """The function computing a block and its arguments before ``k0, k1`` (what runners call)."""
        return compute_block, (self.series, self.d, self.words)


@dataclass(frozen=True)
class CombRequest(_Cut):
    """The head sums of the comb of windows at bit offsets ``d0 + i * step`` (``i < count``), ``words``
    each, cut into blocks of ``block_k`` over the deepest window's head."""

    series: Series
    d0: int
    step: int
    count: int
    words: int
    block_k: int

    def __post_init__(self) -> None:
        if self.count < 1 or self.step < 0:
            raise ValueError("a comb has at least one window and a step >= 0")

    @property
    def d_last(self) -> int:
        return self.d0 + (self.count - 1) * self.step

    @property
    def k_total(self) -> int:
        return self.series.head_length(self.d_last)

    @property
    def windows(self) -> int:
        return self.count

    def window_k_total(self, i: int) -> int:
        return self.series.head_length(self.d0 + i * self.step)

    def task(self) -> tuple[Callable[..., Any], tuple[Any, ...]]:
        """The function computing a comb block and its arguments before ``k0, k1``."""
        return compute_comb_block, (self.series, self.d0, self.step, self.count, self.words)


Request = BlockRequest | CombRequest
"""A blocked head sum: one window's, or a comb's."""


def _shape_problem(request: Request, record: object) -> str | None:
    """Why ``record`` is not, by its kind and the types of its fields, a record of ``request``."""
    comb = isinstance(request, CombRequest)
    kind = CombRecord if comb else BlockRecord
    if not isinstance(record, kind):
        return f"not a {'comb ' if comb else ''}block record: {type(record).__name__}"
    place = ("d0", "step", "count") if comb else ("d",)
    for name in (*place, "words", "k0", "k1"):
        if type(getattr(record, name)) is not int:
            return f"field {name} is not an integer"
    if isinstance(record, CombRecord):
        for name in ("values", "terms"):
            got = getattr(record, name)
            if not isinstance(got, tuple) or len(got) != record.count:
                return f"field {name} is not a tuple of {record.count} entries"
    for value, terms in record.window_sums():
        if type(value) is not int:
            return "field value is not an integer"
        if type(terms) is not int:
            return "field terms is not an integer"
    return None


def block_problem(request: Request, record: object) -> str | None:
    """Why ``record`` cannot be added to ``request``'s sum, or ``None`` if it can.

    One gate for both kinds: a comb's record must name the comb (``d0``,
    ``step``, ``count``) where a window's names its ``d``, and each of its
    windows' sums is checked as a window's is (range of k, value, term count).
    """
    problem = _shape_problem(request, record)
    if problem is not None:
        return problem
    assert isinstance(record, (BlockRecord, CombRecord))
    if record.series != request.fingerprint:
        return "the block belongs to another series"
    if isinstance(request, CombRequest):
        assert isinstance(record, CombRecord)
        mine, theirs = (request.d0, request.step, request.count), (record.d0, record.step, record.count)
        if theirs != mine:
            return "comb (d0 {}, step {}, count {}) instead of (d0 {}, step {}, count {})".format(
                *theirs, *mine
            )
    else:
        assert isinstance(record, BlockRecord)
        if record.d != request.d:
            return f"bit offset {record.d} instead of {request.d}"
    if record.words != request.words:
        return f"{record.words} words instead of {request.words}"
    if not request.is_block(record.k0, record.k1):
        return f"k range [{record.k0}, {record.k1}) is not a block of this head sum"
    top = 1 << (64 * request.words)
    expected = request.block_terms(record.k0, record.k1)
    which = isinstance(request, CombRequest)
    for i, ((value, terms), want) in enumerate(zip(record.window_sums(), expected, strict=True)):
        window = f" in window {i}" if which else ""
        if not 0 <= value < top:
            return f"value outside [0, 2^{64 * request.words}){window}"
        if terms != want:
            return f"{terms} terms instead of {want}{window}"
        if terms == 0 and value != 0:
            return f"a value without terms{window}"
    return None


def compute_block(series: Series, d: int, words: int, k0: int, k1: int) -> BlockRecord:
    """Compute one block: the function threads and Dask workers run."""
    value, terms = backend.head_block(series, d - series.shift, k0, k1, words)
    return BlockRecord(series_fingerprint(series), d, words, k0, k1, value, terms)


def compute_comb_block(
    series: Series, d0: int, step: int, count: int, words: int, k0: int, k1: int
) -> CombRecord:
    """Compute one comb block, every window at once (``backend.head_block_comb``): what threads and
    Dask workers run for a comb."""
    sums = backend.head_block_comb(series, d0 - series.shift, step, count, k0, k1, words)
    return CombRecord(
        series_fingerprint(series),
        d0,
        step,
        count,
        words,
        k0,
        k1,
        tuple(v for v, _ in sums),
        tuple(t for _, t in sums),
    )


BlockRunner = Callable[[Any, Iterable[tuple[int, int]]], Iterator[object]]
"""Runs the given blocks of a request (a :class:`BlockRequest` or :class:`CombRequest`;
a lazy iterable: never made a list) and yields their records as they finish, in any
order.  ``request.task()`` names the function to call with ``k0, k1``."""


def thread_runner(workers: int = 1) -> BlockRunner:
    """Run blocks on this machine: serially, or on ``workers`` threads (the kernel releases the GIL)."""

    def run(request: Request, blocks: Iterable[tuple[int, int]]) -> Iterator[object]:
        fn, args = request.task()
        if workers <= 1:
            for k0, k1 in blocks:
                yield fn(*args, k0, k1)
            return
        pool = ThreadPoolExecutor(max_workers=workers)
        try:
            # Keep at most 2 * workers blocks queued, so an interruption does
            # not leave a long queue to drain.
            todo = iter(blocks)
            running: set[Future[object]] = set()
            for k0, k1 in todo:
                running.add(pool.submit(fn, *args, k0, k1))
                if len(running) >= 2 * workers:
                    break
            while running:
                finished, running = wait(running, return_when=FIRST_COMPLETED)
                for f in finished:
                    nxt = next(todo, None)
                    if nxt is not None:
                        running.add(pool.submit(fn, *args, *nxt))
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
    windows: int = 1
    """Windows the sum serves: a comb's count (``d`` is then its first window's offset), else 1."""

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
    return _sum(request, runner, journal, on_block)[0]


def sum_comb_blocks(
    request: CombRequest,
    *,
    runner: BlockRunner,
    journal: Journal | None = None,
    on_block: Callable[[BlockProgress], None] | None = None,
) -> list[HeadSum]:
    """The head sums of every window of a comb, block by block, as :func:`sum_blocks` sums one
    window's: journal first, the rest from ``runner``, every record checked before it is added.
    Each window's :class:`HeadSum` counts the comb's blocks (loaded, computed) and its own terms."""
    return _sum(request, runner, journal, on_block)


def _sum(
    request: Request,
    runner: BlockRunner,
    journal: Journal | None,
    on_block: Callable[[BlockProgress], None] | None,
) -> list[HeadSum]:
    """The loop of :func:`sum_blocks` and :func:`sum_comb_blocks`: one :class:`HeadSum` per window."""
    t0 = time.monotonic()
    mask = (1 << (64 * request.words)) - 1
    total = request.block_count
    count = request.windows
    per_k = len(request.series.js)
    terms_total = sum(request.window_k_total(i) for i in range(count)) * per_k
    d = request.d0 if isinstance(request, CombRequest) else request.d
    # Memory stays bounded: the loaded blocks' starts, and the blocks handed
    # to the runner and not yet back (a record for any other block is refused).
    loaded: set[int] = set()
    issued: set[int] = set()
    values, terms, loaded_terms = [0] * count, [0] * count, [0] * count
    resumed = computed = 0

    def add(record: BlockRecord | CombRecord) -> None:
        for i, (v, t) in enumerate(record.window_sums()):
            values[i] = (values[i] + v) & mask
            terms[i] += t

    def report() -> None:
        if on_block:
            done_loaded = sum(loaded_terms)
            on_block(
                BlockProgress(
                    d,
                    request.words,
                    resumed + computed,
                    total,
                    resumed,
                    computed,
                    time.monotonic() - t0,
                    terms_total,
                    done_loaded,
                    sum(terms) - done_loaded,
                    count,
                )
            )

    if journal is not None:
        for record in journal.records(request):  # validated when the file was read
            add(record)
            loaded.add(record.k0)
            resumed += 1
            for i, (_, t) in enumerate(record.window_sums()):
                loaded_terms[i] += t
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
            if problem is None and isinstance(item, (BlockRecord, CombRecord)) and item.k0 not in issued:
                problem = f"block [{item.k0}, {item.k1}) was not asked for, or arrived twice"
            if problem is not None or not isinstance(item, (BlockRecord, CombRecord)):
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
    return [HeadSum(values[i], terms[i], loaded_terms[i], resumed, computed) for i in range(count)]
