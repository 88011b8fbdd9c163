"""The head sum as independent blocks of k, and a checkpoint of finished blocks.

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

A checkpoint file is JSON: the request it belongs to (constant, formula and
its coefficients, position, count), one *section* per evaluated window and
precision ``(d, words, block size)``, and a SHA-256 checksum over both.  It is
rewritten atomically (temporary file, fsync, ``os.replace``).
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import time
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from spotcheck.engine import backend
from spotcheck.engine.series import Series
from spotcheck.errors import CertificationError, CheckpointError

__all__ = [
    "BlockRecord",
    "BlockRequest",
    "BlockProgress",
    "BlockPlan",
    "Checkpoint",
    "block_problem",
    "compute_block",
    "head_block",
    "sum_blocks",
    "thread_runner",
    "deep_block_k",
    "default_checkpoint_dir",
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
# A checkpoint is rewritten at most this often (seconds); it is always
# written at the end of a window and when a run is interrupted.
CHECKPOINT_SECONDS = 5.0
# ---------------------------------------------------------------------------

CHECKPOINT_FORMAT = "spotcheck-head-blocks"
CHECKPOINT_VERSION = 1


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

    def blocks(self) -> list[tuple[int, int]]:
        k_total, step = self.k_total, self.block_k
        return [(k, min(k + step, k_total)) for k in range(0, k_total, step)]

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


def head_block(series: Series, big_d: int, k0: int, k1: int, words: int) -> tuple[int, int]:
    """One block's head sum, split between the compiled kernel and the twin."""
    limit = backend.kernel_k_limit(series) if big_d <= backend.KERNEL_MAX_EXPONENT else 0
    if words > backend.KERNEL_MAX_WORDS:
        limit = 0
    args = (series.m, series.s, series.e, series.q, series.alternating, series.js, series.cs)
    value, terms = 0, 0
    split = min(max(limit, k0), k1)
    if split > k0:
        value, terms = backend.head_sum(big_d, k0, split, *args, words)
    if k1 > split:
        v, t = backend.head_sum_py(big_d, split, k1, *args, words)
        value, terms = (value + v) & ((1 << (64 * words)) - 1), terms + t
    return value, terms


def compute_block(series: Series, d: int, words: int, k0: int, k1: int) -> BlockRecord:
    """Compute one block: the function threads and Dask workers run."""
    value, terms = head_block(series, d - series.shift, k0, k1, words)
    return BlockRecord(series_fingerprint(series), d, words, k0, k1, value, terms)


BlockRunner = Callable[[BlockRequest, Sequence[tuple[int, int]]], Iterator[object]]
"""Runs the given blocks of a request and yields their records as they finish, in any order."""


def thread_runner(workers: int = 1) -> BlockRunner:
    """Run blocks on this machine: serially, or on ``workers`` threads (the kernel releases the GIL)."""

    def run(request: BlockRequest, blocks: Sequence[tuple[int, int]]) -> Iterator[object]:
        s, d, w = request.series, request.d, request.words
        if workers <= 1 or len(blocks) <= 1:
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

    @property
    def rate(self) -> float:
        """Blocks computed per second in this run (0.0 before the first)."""
        return self.computed / self.elapsed if self.elapsed > 0 else 0.0

    @property
    def eta(self) -> float | None:
        """Estimated seconds left, or ``None`` until a rate is known."""
        rate = self.rate
        return (self.total - self.done) / rate if rate > 0 else None


@dataclass
class BlockPlan:
    """How a head sum's blocks are run: where, with what checkpoint, in blocks of what size."""

    runner: BlockRunner | None = None
    """``None``: :func:`thread_runner` with the caller's ``workers``."""
    checkpoint: Checkpoint | None = None
    block_k: int | None = None
    """``None``: :func:`deep_block_k`."""
    on_block: Callable[[BlockProgress], None] | None = None


def sum_blocks(
    request: BlockRequest,
    *,
    runner: BlockRunner,
    checkpoint: Checkpoint | None = None,
    progress: Callable[[int, int], None] | None = None,
    on_block: Callable[[BlockProgress], None] | None = None,
) -> tuple[int, int]:
    """The head sum ``(value mod 2^P, terms)`` of ``request``, block by block.

    Blocks already in ``checkpoint`` are taken from it; the rest go to
    ``runner``.  Every record is checked with :func:`block_problem` before it
    is added; a bad one raises :class:`CertificationError`.
    """
    t0 = time.monotonic()
    mask = (1 << (64 * request.words)) - 1
    blocks = request.blocks()
    k_total = request.k_total
    seen: set[int] = set()
    value = terms = done_k = 0
    resumed = computed = 0

    def add(record: BlockRecord) -> None:
        nonlocal value, terms, done_k
        seen.add(record.k0)
        value = (value + record.value) & mask
        terms += record.terms
        done_k += record.k1 - record.k0

    def report() -> None:
        if progress:
            progress(done_k, k_total)
        if on_block:
            elapsed = time.monotonic() - t0
            on_block(
                BlockProgress(request.d, request.words, len(seen), len(blocks), resumed, computed, elapsed)
            )

    if checkpoint is not None:
        for record in checkpoint.records(request):  # validated when the file was read
            add(record)
            resumed += 1
        if resumed:
            report()
    missing = [b for b in blocks if b[0] not in seen]
    records = runner(request, missing)
    try:
        for item in records:
            problem = block_problem(request, item)
            if problem is None and isinstance(item, BlockRecord) and item.k0 in seen:
                problem = f"block [{item.k0}, {item.k1}) arrived twice"
            if problem is not None or not isinstance(item, BlockRecord):
                raise CertificationError(f"a head-sum block result was rejected: {problem}")
            record = item
            add(record)
            computed += 1
            if checkpoint is not None:
                checkpoint.add(request, record)
            report()
    finally:
        close = getattr(records, "close", None)
        if close is not None:  # stop a generator runner now: cancel its queued blocks
            close()
        if checkpoint is not None:
            checkpoint.flush()
    if len(seen) != len(blocks):
        raise CertificationError(f"only {len(seen)} of {len(blocks)} head-sum blocks came back")
    return value, terms


def default_checkpoint_dir() -> Path:
    """``$XDG_CACHE_HOME/spotcheck`` (``~/.cache/spotcheck`` when unset)."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "spotcheck"


def _checksum(request: dict[str, Any], sections: list[dict[str, Any]]) -> str:
    body = json.dumps({"request": request, "sections": sections}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(body.encode()).hexdigest()


class Checkpoint:
    """Finished blocks of one request, kept in a JSON file across runs.

    Opening reads and checks an existing file: it must be a spotcheck
    checkpoint with a correct checksum, for exactly ``request`` (constant,
    formula, position, count), and every record must pass
    :func:`block_problem` for its section; otherwise :class:`CheckpointError`
    is raised and the file is left alone.  A missing file starts empty.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        series: Series,
        request: dict[str, Any],
        *,
        interval: float | None = None,
    ) -> None:
        self.path = Path(path)
        self.series = series
        self.request = json.loads(json.dumps(request))  # a plain JSON copy
        self.interval = CHECKPOINT_SECONDS if interval is None else interval
        self._sections: dict[tuple[int, int], dict[str, Any]] = {}
        self._records: dict[tuple[int, int], dict[int, BlockRecord]] = {}
        self._dirty = False
        self._last_write = time.monotonic()
        if self.path.is_dir():
            raise self._refuse("it is a directory")
        if self.path.exists():
            self._load()

    # -- reading ------------------------------------------------------------
    def _refuse(self, why: str) -> CheckpointError:
        return CheckpointError(f"checkpoint {self.path} refused: {why}")

    def _load(self) -> None:
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, ValueError) as exc:
            raise self._refuse(f"damaged, not readable as JSON ({exc})") from None
        if not isinstance(data, dict) or data.get("format") != CHECKPOINT_FORMAT:
            raise self._refuse("not a spotcheck checkpoint file")
        if data.get("version") != CHECKPOINT_VERSION:
            raise self._refuse(f"unsupported checkpoint version {data.get('version')!r}")
        request, sections = data.get("request"), data.get("sections")
        if not isinstance(request, dict) or not isinstance(sections, list):
            raise self._refuse("damaged, missing request or sections")
        if data.get("checksum") != _checksum(request, sections):
            raise self._refuse("damaged, checksum does not match its contents")
        if request != self.request:
            diff = sorted(
                k for k in set(request) | set(self.request) if request.get(k) != self.request.get(k)
            )
            theirs = ", ".join(f"{k} {request.get(k)!r}" for k in diff)
            ours = ", ".join(f"{k} {self.request.get(k)!r}" for k in diff)
            raise self._refuse(
                f"it belongs to another request ({theirs}, not {ours}); use another file or delete it"
            )
        for section in sections:
            self._load_section(section)

    def _load_section(self, section: Any) -> None:
        try:
            d, words, block_k = (
                _exact_int(section["d"]),
                _exact_int(section["words"]),
                _exact_int(section["block_k"]),
            )
            records = [
                BlockRecord(
                    section["series"], d, words, _exact_int(k0), _exact_int(k1), int(v, 16), _exact_int(t)
                )
                for k0, k1, v, t in section["blocks"]
            ]
        except (KeyError, TypeError, ValueError) as exc:
            raise self._refuse(f"damaged section ({exc!r})") from None
        if block_k < 1 or section.get("k_total") != self.series.head_length(d):
            raise self._refuse(f"section for bit offset {d} does not match this series")
        request = BlockRequest(self.series, d, words, block_k)
        key = (d, words)
        if key in self._sections:
            raise self._refuse(f"two sections for bit offset {d} at {words} words")
        kept: dict[int, BlockRecord] = {}
        for record in records:
            problem = block_problem(request, record)
            if problem is None and record.k0 in kept:
                problem = "a block appears twice"
            if problem is not None:
                raise self._refuse(f"a block of bit offset {d} failed its check: {problem}")
            kept[record.k0] = record
        self._sections[key] = dict(section)
        self._records[key] = kept

    def records(self, request: BlockRequest) -> list[BlockRecord]:
        """The finished blocks of ``request`` (empty if none); refuses a different block size."""
        key = (request.d, request.words)
        section = self._sections.get(key)
        if section is None:
            return []
        if section["block_k"] != request.block_k or section["series"] != request.fingerprint:
            raise self._refuse(
                f"bit offset {request.d} was cut into blocks of {section['block_k']} "
                f"values of k, this run uses {request.block_k}"
            )
        return list(self._records[key].values())

    # -- writing ------------------------------------------------------------
    def add(self, request: BlockRequest, record: BlockRecord) -> None:
        """Keep a checked record; write the file if :attr:`interval` seconds have passed."""
        key = (request.d, request.words)
        if key not in self._sections:
            self._sections[key] = {
                "d": request.d,
                "words": request.words,
                "block_k": request.block_k,
                "k_total": request.k_total,
                "series": request.fingerprint,
            }
            self._records[key] = {}
        self._records[key][record.k0] = record
        self._dirty = True
        if time.monotonic() - self._last_write >= self.interval:
            self.flush()

    @property
    def blocks_kept(self) -> int:
        return sum(len(r) for r in self._records.values())

    def flush(self) -> None:
        """Write every kept block now (atomically), if anything changed."""
        if not self._dirty:
            return
        sections = []
        for key in sorted(self._sections):
            section = {k: v for k, v in self._sections[key].items() if k != "blocks"}
            section["blocks"] = [r.to_list() for _, r in sorted(self._records[key].items())]
            sections.append(section)
        payload = {
            "format": CHECKPOINT_FORMAT,
            "version": CHECKPOINT_VERSION,
            "request": self.request,
            "sections": sections,
            "checksum": _checksum(self.request, sections),
        }
        _write_atomic(self.path, json.dumps(payload, separators=(",", ":")) + "\n")
        self._dirty = False
        self._last_write = time.monotonic()


def _exact_int(x: object) -> int:
    """``x`` if it is a JSON integer (not a bool, float or string), else TypeError."""
    if type(x) is not int:
        raise TypeError(f"expected an integer, got {x!r}")
    return x


def _write_atomic(path: Path, text: str) -> None:
    """Replace ``path`` by ``text`` so that a crash leaves the old or the new file, never half."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    try:  # make the rename itself durable
        dir_fd = os.open(path.parent, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory fds
        return
    try:
        os.fsync(dir_fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(dir_fd)
