"""The checkpoint file: a journal of finished head-sum blocks, one line each.

A run with a checkpoint appends every finished block to the file as one line,
writes it and ``fsync``s it *before* the block is reported done, so a process
killed at any moment (``kill -9``, power loss) loses at most the blocks that
were still being computed.  Each line is a JSON object, a tab and the first
32 hex digits of the SHA-256 of that JSON text::

    {"format":"spotcheck-journal","version":2,"request":{...}}<TAB>checksum
    {"section":{"d":...,"words":...,"block_k":...,"k_total":...,"series":"..."}}<TAB>checksum
    {"block":[d,words,k0,k1,"value in hex",terms]}<TAB>checksum
    ...

The first line names the request: for ``digits``, constant, formula and its
coefficients, position and count; for a check (``verify``, ``locate``), the
constant, formula and digit file, and then one journal holds every window the
check evaluates.  A *section* line opens one evaluated window and precision
``(d, words)`` with its block size; block lines follow their section.  A
head sum depends only on the series, ``d``, ``words`` and the block size, so
two windows that meet at the same ``(d, words)`` share their section.

A comb of windows (:mod:`spotcheck.engine.comb`) has sections of its own,
named by the comb, and comb blocks, each holding every window's sum of its
range of k::

    {"comb":{"d0":...,"step":...,"count":...,"words":...,"block_k":...,"k_total":...,"series":"..."}}<TAB>checksum
    {"combblock":[d0,step,count,words,k0,k1,["hex",...],[terms,...]]}<TAB>checksum

They are read, checked (the same :func:`~spotcheck.engine.blocks.block_problem`)
and refused exactly as a window's are, and sit in the same file beside window
sections (a check's windows evaluated alone, say).  ``k_total`` is the deepest
window's head.

Reading:

* a last line without its newline is a write torn by a crash: ignored (and cut
  off before the next append);
* a complete line whose checksum does not match (a flipped byte, a damaged
  sector) is *that record refused*: it is skipped and counted in
  :attr:`Journal.damaged`, its block is computed again, the other records are
  kept.  Every record carries its own checksum, so damage to one says nothing
  about the others, and a skipped block can only cost time, never a digit;
* a damaged first line, another request, a checksummed record that fails
  :func:`~spotcheck.engine.blocks.block_problem` (another series, offset,
  precision or range, a wrong term count, a duplicate), a block before its
  section, or a section that does not match the series refuses the whole file
  (:class:`CheckpointError`): that is not storage damage but another run's or
  another program's file, and the file is left alone.

A file that cannot be created or opened for appending is refused at once,
before any work.  So is a file another run is using: a run holds an
exclusive lock (``flock``) on its journal from before it reads the file until
it closes it, and a second run (another process, or a second journal on the
same file in this one) is refused at once instead of appending to it in
turn and losing the other's records at compaction.  Where the platform or
the filesystem has no such locks, the journal goes on unlocked.  An empty
file is a new journal: its first line is written before any work.  A write
that fails later (disk full, file-size limit) is not an error:
:attr:`Journal.failure` says why, the run goes on without the file, and the
blocks already written stay valid.  At the end of a run the
file is *compacted*: rewritten atomically (temporary file, ``fsync``,
``os.replace``) with each section's records in order and no damaged lines.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
import tempfile
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any, BinaryIO

from spotcheck.engine.blocks import BlockRecord, BlockRequest, CombRecord, CombRequest, Request, block_problem
from spotcheck.engine.series import Series
from spotcheck.errors import CheckpointError

try:
    import fcntl
except ImportError:  # pragma: no cover - platforms without flock: journals are not locked
    fcntl = None  # type: ignore[assignment]

__all__ = [
    "Journal",
    "default_checkpoint_dir",
    "request_path",
    "JOURNAL_FORMAT",
    "JOURNAL_VERSION",
    "journal_line",
    "parse_line",
]

JOURNAL_FORMAT = "spotcheck-journal"
JOURNAL_VERSION = 2
_CHECKSUM_HEX = 32
# The longest line a journal holds: a line longer than this is no record of any request, so the
# file is refused there (nothing more is read, nothing longer is held).  A block line is about
# 1.1 KB at most (its value is below 2^(64 words), words at most evaluate.MAX_WORDS = 64: 1,024
# hex digits); the first line names the request, which a formula file's formula with thousands of
# coefficients makes long.  1 MiB holds both with a wide margin (tests/test_cli_bad_input.py).
MAX_LINE_BYTES = 1 << 20


def default_checkpoint_dir() -> Path:
    """``$XDG_CACHE_HOME/spotcheck`` (``~/.cache/spotcheck`` when unset)."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "spotcheck"


def request_path(label: str, request: dict[str, Any]) -> Path:
    """Where ``--checkpoint auto`` keeps the journal of ``request``: the one rule of every command.

    Under :func:`default_checkpoint_dir`, one file per request, named by
    ``label`` (made safe for a file name) and the first 10 hex digits of the
    SHA-256 of the request, so two requests never share a file by accident.

    >>> request_path("pi-bellard-at5-n8", {"position": 5}).name
    'pi-bellard-at5-n8-d5598ab9d0.json'
    """
    tag = hashlib.sha256(json.dumps(request, sort_keys=True).encode()).hexdigest()[:10]
    safe = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in label)
    return default_checkpoint_dir() / f"{safe}-{tag}.json"


def _checksum(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:_CHECKSUM_HEX]


def journal_line(obj: dict[str, Any]) -> str:
    """One journal line (newline included) for a JSON object."""
    text = json.dumps(obj, separators=(",", ":"), sort_keys=True)
    return f"{text}\t{_checksum(text)}\n"


def parse_line(raw: bytes) -> dict[str, Any] | None:
    """The object of one complete line (no newline), or ``None`` if its checksum fails."""
    try:
        line = raw.decode("utf-8")
    except UnicodeDecodeError:
        return None
    text, tab, checksum = line.rpartition("\t")
    if not tab or _checksum(text) != checksum:
        return None
    try:
        obj = json.loads(text)
    except ValueError:
        return None
    return obj if isinstance(obj, dict) else None


def _exact_int(x: object) -> int:
    """``x`` if it is a JSON integer (not a bool, float or string), else TypeError."""
    if type(x) is not int:
        raise TypeError(f"expected an integer, got {x!r}")
    return x


class Journal:
    """Finished blocks of one request, kept in a journal file across runs.

    Opening reads and checks an existing file (see the module docstring for
    what is refused) and makes sure it can be appended to; a missing file is
    created with its first line.  Either failure raises
    :class:`CheckpointError` before any block is computed.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        series: Series,
        request: dict[str, Any],
        also: Sequence[dict[str, Any]] = (),
        *,
        create_folder: bool = False,
    ) -> None:
        self.path = Path(path)
        self.create_folder = create_folder
        """Whether a missing folder is made (the cache folder of ``auto``); else a missing folder is refused."""
        self.series = series
        self.request = json.loads(json.dumps(request))  # a plain JSON copy
        self.also = [json.loads(json.dumps(r)) for r in also]
        """Other requests a file may name and still be this one's (an earlier version's key of the same work)."""
        self.damaged = 0
        """Complete lines skipped on reading because their checksum failed."""
        self.failure: str | None = None
        """Why writing stopped mid-run (``None`` while it works)."""
        self.loaded = 0
        """Blocks read from the file when it was opened."""
        self._sections: dict[tuple[int, int], dict[str, Any]] = {}
        self._records: dict[tuple[int, int], dict[int, BlockRecord]] = {}
        # Combs, keyed by (d0, step, count, words): their sections and records.
        self._combs: dict[tuple[int, int, int, int], dict[str, Any]] = {}
        self._comb_records: dict[tuple[int, int, int, int], dict[int, CombRecord]] = {}
        self._fd: int | None = None
        self._lock_fd: int | None = None
        exists = self._examine()
        try:
            if exists:
                self._take_lock()  # before reading: no other run is writing it meanwhile
            valid_length = self._load() if exists else None
            self._open_for_append(valid_length)
            if self._lock_fd is None:
                self._take_lock()  # a file this run made
        except BaseException:
            self._stop_quietly()
            raise
        self.loaded = self.blocks_kept

    def _examine(self) -> bool:
        """Whether the file exists; CheckpointError unless it is a regular file, or a new file whose
        folder exists (or may be made: ``create_folder``).  Nothing is read or made here."""
        try:
            st = os.stat(self.path)
        except FileNotFoundError:
            if os.path.lexists(self.path):  # a symbolic link to nothing: a new file cannot take its name
                raise self._refuse("it is a symbolic link to a file that does not exist") from None
            st = None
        except NotADirectoryError:
            raise self._unwritable(f"{self._blocker()} is not a folder") from None
        except OSError as exc:  # no permission to look in a folder on the way, a symbolic-link loop
            raise self._refuse(f"it cannot be reached ({exc.strerror or exc})") from None
        if st is not None:
            if stat.S_ISDIR(st.st_mode):
                raise self._refuse("it is a directory")
            if not stat.S_ISREG(st.st_mode):
                raise self._refuse(f"it is {_kind(st.st_mode)}, not a regular file")
            return True
        folder = self.path.parent
        try:
            folder_is_dir = stat.S_ISDIR(os.stat(folder).st_mode)
        except FileNotFoundError:
            if self.create_folder:
                return False
            raise self._unwritable(f"its folder {folder} does not exist") from None
        except OSError as exc:
            raise self._refuse(f"its folder {folder} cannot be reached ({exc.strerror or exc})") from None
        if not folder_is_dir:
            raise self._unwritable(f"{folder} is not a folder")
        return False

    def _blocker(self) -> Path:
        """The first folder on the way to the file that is not a folder (the path's own folder if none is found)."""
        for p in reversed(self.path.parents):
            try:
                if not stat.S_ISDIR(os.stat(p).st_mode):
                    return p
            except OSError:
                break
        return self.path.parent

    def _take_lock(self) -> None:
        """Hold an exclusive lock on the journal file until :meth:`close` (CheckpointError if another
        run holds one).  A file replaced meanwhile (another run's compaction) is locked afresh."""
        if fcntl is None:  # pragma: no cover
            return
        for _ in range(8):
            try:
                fd = os.open(self.path, os.O_RDONLY | _O_NONBLOCK)  # a FIFO put there meanwhile: no wait
            except OSError as exc:
                raise self._refuse(f"it cannot be read ({exc.strerror or exc})") from None
            mode = os.fstat(fd).st_mode
            if not stat.S_ISREG(mode):
                os.close(fd)
                raise self._refuse(f"it is {_kind(mode)}, not a regular file")
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                os.close(fd)
                raise self._refuse(
                    "another spotcheck run is using it (the file is locked); let that run end or use another file"
                ) from None
            except OSError:  # a filesystem without locks: go on unlocked
                os.close(fd)
                return
            try:
                held, now = os.fstat(fd), os.stat(self.path)
                same = (held.st_dev, held.st_ino) == (now.st_dev, now.st_ino)
            except OSError:  # the name is gone: try again
                same = False
            if same:
                self._lock_fd = fd
                return
            os.close(fd)  # the name points at another file now: lock that one
        raise self._refuse("it keeps being replaced by another run")

    # -- reading ------------------------------------------------------------
    def _refuse(self, why: str) -> CheckpointError:
        return CheckpointError(f"checkpoint {self.path} refused: {why}")

    def _unwritable(self, why: str) -> CheckpointError:
        return CheckpointError(f"checkpoint {self.path} cannot be written: {why}")

    def _load(self) -> int:
        """Read the file; return the length of its complete lines (a torn tail excluded).

        Reading is bounded: no more bytes than the file's size when opened (a file that goes on
        giving bytes is refused), and no line longer than :data:`MAX_LINE_BYTES` (the file is
        refused there)."""
        try:
            with open(self.path, "rb", opener=_nonblocking) as fh:
                st = os.fstat(fh.fileno())
                if not stat.S_ISREG(st.st_mode):
                    raise self._refuse(f"it is {_kind(st.st_mode)}, not a regular file")
                lines, cut = _complete_lines(fh, st.st_size)
                valid_length = self._take_lines(lines, cut)
                if fh.read(1):
                    raise self._refuse(
                        f"it holds more than the {st.st_size:,} bytes its size says (not an ordinary file)"
                    )
                return valid_length
        except OSError as exc:
            raise self._refuse(f"it cannot be read ({exc.strerror or exc})") from None

    def _take_lines(self, lines: Iterator[bytes | None], cut: list[int]) -> int:
        first = next(lines, False)
        if first is False:
            if cut[1]:
                raise self._refuse("not a spotcheck checkpoint file (no complete first line)")
            return 0
        if not isinstance(first, bytes):  # None: longer than MAX_LINE_BYTES
            raise self._refuse(
                "not a spotcheck checkpoint file (its first line is longer than any checkpoint line)"
            )
        header = parse_line(first)
        if header is None or header.get("format") != JOURNAL_FORMAT:
            raise self._refuse("not a spotcheck checkpoint file, or its first line is damaged")
        if header.get("version") != JOURNAL_VERSION:
            raise self._refuse(f"unsupported checkpoint version {header.get('version')!r}")
        request = header.get("request")
        if request != self.request and request not in self.also:
            req = request if isinstance(request, dict) else {}
            diff = sorted(k for k in set(req) | set(self.request) if req.get(k) != self.request.get(k))
            theirs = ", ".join(f"{k} {req.get(k)!r}" for k in diff)
            ours = ", ".join(f"{k} {self.request.get(k)!r}" for k in diff)
            raise self._refuse(
                f"it belongs to another request ({theirs}, not {ours}); use another file or delete it"
            )
        for number, raw in enumerate(lines, start=2):
            if raw is None:
                raise self._refuse(
                    f"line {number} is longer than any checkpoint record; not a checkpoint file"
                )
            obj = parse_line(raw)
            if obj is None:
                self.damaged += 1
                continue
            try:
                if "section" in obj:
                    self._load_section(obj["section"])
                elif "block" in obj:
                    self._load_block(obj["block"])
                elif "comb" in obj:
                    self._load_comb(obj["comb"])
                elif "combblock" in obj:
                    self._load_comb_block(obj["combblock"])
                else:
                    raise self._refuse(f"line {number} is neither a section nor a block")
            except (KeyError, TypeError, ValueError) as exc:
                if isinstance(exc, CheckpointError):
                    raise
                raise self._refuse(f"line {number} is malformed ({exc!r})") from None
        return cut[0]

    def _load_section(self, section: Any) -> None:
        d, words, block_k = (
            _exact_int(section["d"]),
            _exact_int(section["words"]),
            _exact_int(section["block_k"]),
        )
        if block_k < 1 or section.get("k_total") != self.series.head_length(d):
            raise self._refuse(f"section for bit offset {d} does not match this series")
        key = (d, words)
        if key in self._sections:
            raise self._refuse(f"two sections for bit offset {d} at {words} words")
        self._sections[key] = {
            "d": d,
            "words": words,
            "block_k": block_k,
            "k_total": section["k_total"],
            "series": section.get("series"),
        }
        self._records[key] = {}

    def _load_block(self, fields: Any) -> None:
        d, words, k0, k1, v, t = fields
        key = (_exact_int(d), _exact_int(words))
        section = self._sections.get(key)
        if section is None:
            if self.damaged:  # its section line was the damaged one: this record goes with it
                self.damaged += 1
                return
            raise self._refuse(f"a block of bit offset {d} comes before its section")
        if not isinstance(v, str):
            raise TypeError(f"expected a hex string, got {v!r}")
        record = BlockRecord(
            section["series"], key[0], key[1], _exact_int(k0), _exact_int(k1), int(v, 16), _exact_int(t)
        )
        request = BlockRequest(self.series, section["d"], section["words"], section["block_k"])
        problem = block_problem(request, record)
        if problem is None and record.k0 in self._records[key]:
            problem = "a block appears twice"
        if problem is not None:
            raise self._refuse(f"a block of bit offset {d} failed its check: {problem}")
        self._records[key][record.k0] = record

    def _load_comb(self, section: Any) -> None:
        d0, step, count, words, block_k = (
            _exact_int(section[name]) for name in ("d0", "step", "count", "words", "block_k")
        )
        if (
            min(d0, step) < 0
            or min(count, words, block_k) < 1
            or section.get("k_total") != self.series.head_length(d0 + (count - 1) * step)
        ):
            raise self._refuse(f"comb section at bit offset {d0} does not match this series")
        key = (d0, step, count, words)
        if key in self._combs:
            raise self._refuse(f"two sections for the comb at bit offset {d0}, step {step}, count {count}")
        self._combs[key] = {
            "d0": d0,
            "step": step,
            "count": count,
            "words": words,
            "block_k": block_k,
            "k_total": section["k_total"],
            "series": section.get("series"),
        }
        self._comb_records[key] = {}

    def _load_comb_block(self, fields: Any) -> None:
        d0, step, count, words, k0, k1, vs, ts = fields
        key = (_exact_int(d0), _exact_int(step), _exact_int(count), _exact_int(words))
        section = self._combs.get(key)
        if section is None:
            if self.damaged:  # its section line was the damaged one: this record goes with it
                self.damaged += 1
                return
            raise self._refuse(f"a block of the comb at bit offset {d0} comes before its section")
        if not isinstance(vs, list) or not all(isinstance(v, str) for v in vs):
            raise TypeError(f"expected a list of hex strings, got {vs!r}")
        if not isinstance(ts, list):
            raise TypeError(f"expected a list of term counts, got {ts!r}")
        record = CombRecord(
            section["series"],
            *key,
            _exact_int(k0),
            _exact_int(k1),
            tuple(int(v, 16) for v in vs),
            tuple(ts),
        )
        request = CombRequest(self.series, *key, section["block_k"])
        problem = block_problem(request, record)
        if problem is None and record.k0 in self._comb_records[key]:
            problem = "a block appears twice"
        if problem is not None:
            raise self._refuse(f"a block of the comb at bit offset {d0} failed its check: {problem}")
        self._comb_records[key][record.k0] = record

    def records(self, request: Request) -> list[BlockRecord] | list[CombRecord]:
        """The finished blocks of ``request`` (empty if none); refuses a different block size."""
        if isinstance(request, CombRequest):
            return self._comb_records_of(request)
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

    def _comb_records_of(self, request: CombRequest) -> list[CombRecord]:
        key = (request.d0, request.step, request.count, request.words)
        section = self._combs.get(key)
        if section is None:
            return []
        if section["block_k"] != request.block_k or section["series"] != request.fingerprint:
            raise self._refuse(
                f"the comb at bit offset {request.d0} was cut into blocks of {section['block_k']} "
                f"values of k, this run uses {request.block_k}"
            )
        return list(self._comb_records[key].values())

    @property
    def blocks_kept(self) -> int:
        return sum(len(r) for r in self._records.values()) + sum(len(r) for r in self._comb_records.values())

    # -- writing ------------------------------------------------------------
    def _open_for_append(self, valid_length: int | None) -> None:
        try:
            header = journal_line(
                {"format": JOURNAL_FORMAT, "version": JOURNAL_VERSION, "request": self.request}
            )
            if valid_length is None:  # a new file, made whole with its first line, durable before any work
                if self.create_folder:
                    self.path.parent.mkdir(parents=True, exist_ok=True)
                if not _write_new(self.path, header):
                    raise self._refuse(
                        "another spotcheck run created it at the same moment; let that run end"
                    )
            self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND)
            if valid_length is not None and valid_length < os.fstat(self._fd).st_size:
                os.ftruncate(self._fd, valid_length)  # cut a torn last line
            if valid_length == 0:  # an empty file (made by mktemp, say), locked by this run: its first line
                os.write(self._fd, header.encode("utf-8"))
                os.fsync(self._fd)
        except OSError as exc:
            self._fd = None
            why = exc.strerror or str(exc)
            if isinstance(exc, NotADirectoryError):
                why = f"{self._blocker()} is not a folder"
            raise self._unwritable(why) from None

    def _append(self, text: str) -> None:
        if self._fd is None:
            return
        data = text.encode("utf-8")
        try:
            while data:
                n = os.write(self._fd, data)
                data = data[n:]
            os.fsync(self._fd)
        except OSError as exc:
            self._stop(f"writing the checkpoint {self.path} failed ({exc.strerror or exc})")

    def _stop(self, why: str) -> None:
        self.failure = why
        if self._fd is not None:
            try:
                os.close(self._fd)
            except OSError:
                pass
            self._fd = None

    def add(self, request: Request, record: BlockRecord | CombRecord) -> None:
        """Keep a checked record and append it to the file (written and fsync'd on return)."""
        if isinstance(request, CombRequest):
            assert isinstance(record, CombRecord)
            self._add_comb(request, record)
            return
        assert isinstance(record, BlockRecord)
        key = (request.d, request.words)
        if key not in self._sections:
            section = {
                "d": request.d,
                "words": request.words,
                "block_k": request.block_k,
                "k_total": request.k_total,
                "series": request.fingerprint,
            }
            self._sections[key] = section
            self._records[key] = {}
            self._append(journal_line({"section": section}))
        self._records[key][record.k0] = record
        self._append(journal_line({"block": [record.d, record.words, *record.to_list()]}))

    def _add_comb(self, request: CombRequest, record: CombRecord) -> None:
        key = (request.d0, request.step, request.count, request.words)
        if key not in self._combs:
            section = {
                "d0": request.d0,
                "step": request.step,
                "count": request.count,
                "words": request.words,
                "block_k": request.block_k,
                "k_total": request.k_total,
                "series": request.fingerprint,
            }
            self._combs[key] = section
            self._comb_records[key] = {}
            self._append(journal_line({"comb": section}))
        self._comb_records[key][record.k0] = record
        line = journal_line({"combblock": [*key, *record.to_list()]})
        if len(line.encode("utf-8")) > MAX_LINE_BYTES:  # the reader would refuse the file there
            self._stop(
                f"a block of the comb of {request.count} windows is longer than a checkpoint line "
                f"({MAX_LINE_BYTES:,} bytes), so the checkpoint {self.path} was not written"
            )
        self._append(line)

    def close(self, *, compact: bool = True) -> None:
        """Stop appending; with ``compact``, rewrite the file in order without damaged lines.  The
        file's lock is let go last."""
        if self._fd is None:
            self._unlock()
            return
        self._stop_fd()
        if not compact:
            self._unlock()
            return
        lines = [
            journal_line({"format": JOURNAL_FORMAT, "version": JOURNAL_VERSION, "request": self.request})
        ]
        for key in sorted(self._sections):
            lines.append(journal_line({"section": self._sections[key]}))
            for _, r in sorted(self._records[key].items()):
                lines.append(journal_line({"block": [r.d, r.words, *r.to_list()]}))
        for ckey in sorted(self._combs):
            lines.append(journal_line({"comb": self._combs[ckey]}))
            for _, c in sorted(self._comb_records[ckey].items()):
                lines.append(journal_line({"combblock": [*ckey, *c.to_list()]}))
        try:
            _write_atomic(self.path, "".join(lines))
        except OSError as exc:  # the journal as appended stays valid
            self.failure = f"compacting the checkpoint {self.path} failed ({exc.strerror or exc})"
        finally:
            self._unlock()

    def _stop_fd(self) -> None:
        fd, self._fd = self._fd, None
        if fd is not None:
            try:
                os.close(fd)
            except OSError:
                pass

    def _unlock(self) -> None:
        fd, self._lock_fd = self._lock_fd, None
        if fd is not None:
            try:
                os.close(fd)  # closing the locked descriptor lets the lock go
            except OSError:
                pass

    def _stop_quietly(self) -> None:
        self._stop_fd()
        self._unlock()


def _kind(mode: int) -> str:
    """What a file that is not a regular file is, in words."""
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISFIFO(mode):
        return "a pipe"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "a special file"


_O_NONBLOCK = getattr(os, "O_NONBLOCK", 0)


def _nonblocking(path: str, flags: int) -> int:
    return os.open(path, flags | _O_NONBLOCK)


def _complete_lines(fh: BinaryIO, size: int) -> tuple[Iterator[bytes | None], list[int]]:
    """The complete lines of the first ``size`` bytes of ``fh`` (without their newlines), one at a
    time; a line longer than :data:`MAX_LINE_BYTES` is given as ``None``, and nothing after it is
    read.  The list holds, once the lines are consumed, the length of the complete lines and the
    length of a torn tail (bytes after the last newline)."""
    cut = [0, 0]

    def lines() -> Iterator[bytes | None]:
        left = size
        while left > 0:
            raw = fh.readline(min(left, MAX_LINE_BYTES + 1))
            if not raw:
                return
            left -= len(raw)
            if not raw.endswith(b"\n"):
                if len(raw) > MAX_LINE_BYTES:
                    yield None
                else:  # the file ends inside this line: a torn tail
                    cut[1] = len(raw)
                return
            cut[0] += len(raw)
            yield raw[:-1]

    return lines(), cut


def _synced_temp(path: Path, text: str) -> str:
    """A temporary file beside ``path`` holding ``text``, written and fsync'd; its name."""
    fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
    except BaseException:
        _unlink_quietly(tmp)
        raise
    return tmp


def _unlink_quietly(name: str) -> None:
    try:
        os.unlink(name)
    except OSError:
        pass


def _write_new(path: Path, text: str) -> bool:
    """Create ``path`` holding ``text``, whole or not at all; False when ``path`` exists by then
    (a hard link from a finished temporary file never replaces anything; where the filesystem has
    no hard links, a rename does)."""
    tmp = _synced_temp(path, text)
    try:
        try:
            os.link(tmp, path)
        except FileExistsError:
            return False
        except OSError:  # no hard links here
            if path.exists():
                return False
            os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            _unlink_quietly(tmp)
    _sync_folder(path)
    return True


def _sync_folder(path: Path) -> None:
    """Make a new name in ``path``'s folder durable."""
    try:
        dir_fd = os.open(path.parent, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory fds
        return
    try:
        os.fsync(dir_fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(dir_fd)


def _write_atomic(path: Path, text: str) -> None:
    """Replace ``path`` by ``text`` so that a crash leaves the old or the new file, never half."""
    tmp = _synced_temp(path, text)
    try:
        os.replace(tmp, path)
    except BaseException:
        _unlink_quietly(tmp)
        raise
    _sync_folder(path)  # make the rename itself durable
