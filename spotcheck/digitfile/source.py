"""Read-only byte access to a digit file, plain or compressed.

A :class:`PlainSource` reads with ``os.pread`` on a read-only descriptor, so
any byte range costs one system call and memory stays bounded by the request.

A :class:`CompressedSource` streams gzip, bzip2 or xz content (recognised by
magic bytes, not by name).  Offsets are offsets in the *decompressed* content.
There is no random access without a pass: a read at or after the current
decompressor position continues forward (skipping what lies between), and a
read overlapping the previous window is served from it.  Any other read before
the current position costs, for gzip, a resume from the nearest decompressor
checkpoint kept by the first pass (at most ``gzipseek.CHECKPOINT_BYTES`` of
decompression, see :mod:`spotcheck.digitfile.gzipseek`); for bzip2 and xz,
whose decompressors cannot be copied, a restart from the beginning of the file.  Callers
that read many windows should therefore read them in increasing order; the
reader's ``iter_chunks`` does.  (We keep no decompressor checkpoints.)

A :class:`Utf16Source` reads text stored as UTF-16 with its byte order mark
(what Windows PowerShell's ``>`` and Notepad's "Unicode" write) over either of
them: its content is the text's characters, one byte each, so offsets, lines
and columns are those of the decoded text (as for compressed files, where they
are those of the decompressed content).  Only characters below U+0080 can be
digit-file text; any other, or half a character at the end, is an error that
names the character and its stored byte offset.

Every source remembers the file's size and modification time when opened and
raise :class:`DigitFileError` when either has changed, so a file that is still
being written is reported instead of read half-way.
"""

from __future__ import annotations

import bz2
import errno
import gzip
import io
import lzma
import os
import stat
import zlib
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import IO, Protocol

from spotcheck.digitfile.gzipseek import GzipSeeker, TruncatedError
from spotcheck.errors import DigitFileError, FileAccessError

__all__ = [
    "ByteSource",
    "PlainSource",
    "CompressedSource",
    "Utf16Source",
    "open_source",
    "detect_compression",
    "local_path",
    "STDIN_NAME",
]

# Bytes skipped per read when a compressed stream moves forward.
SKIP_BYTES = 4 << 20

_MAGIC = (
    (b"\x1f\x8b", "gzip"),
    (b"BZh", "bzip2"),
    (b"\xfd7zXZ\x00", "xz"),
)
_OPENERS: dict[str, Callable[[IO[bytes]], io.BufferedIOBase]] = {
    "gzip": lambda raw: gzip.GzipFile(fileobj=raw, mode="rb"),
    "bzip2": lambda raw: bz2.BZ2File(raw, mode="rb"),
    "xz": lambda raw: lzma.LZMAFile(raw, mode="rb"),
}


class ByteSource(Protocol):
    path: str
    size_bytes: int
    compression: str | None

    def read_at(self, offset: int, n: int) -> bytes: ...
    def stored_bytes_done(self, offset: int) -> int: ...
    def check_unchanged(self) -> None: ...
    def close(self) -> None: ...


def _pread_seek(fd: int, n: int, offset: int) -> bytes:
    """``os.pread`` for platforms without it (one reader per descriptor, so seek is safe)."""
    os.lseek(fd, offset, os.SEEK_SET)
    parts, want = [], n
    while want > 0:
        data = os.read(fd, want)
        if not data:
            break
        parts.append(data)
        want -= len(data)
    return b"".join(parts)


_pread = getattr(os, "pread", _pread_seek)


def detect_compression(magic: bytes) -> str | None:
    """``"gzip"``, ``"bzip2"``, ``"xz"`` or None, from the first bytes of a file."""
    for prefix, name in _MAGIC:
        if magic.startswith(prefix):
            return name
    return None


def _stat_checked(path: str) -> os.stat_result:
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise FileAccessError(errno.ENOENT, f"no such file: {path}") from None
    except PermissionError:
        raise FileAccessError(errno.EACCES, f"permission denied: {path}") from None
    except OSError as exc:
        raise FileAccessError(exc.errno, f"cannot open {path}: {exc.strerror}") from None
    if stat.S_ISDIR(st.st_mode):
        raise FileAccessError(errno.EISDIR, f"{path} is a directory, not a digit file")
    if not stat.S_ISREG(st.st_mode):
        raise FileAccessError(errno.EINVAL, f"{path} is not a regular file")
    return st


class PlainSource:
    """Uncompressed file read through ``os.pread``."""

    compression: str | None = None

    def __init__(self, path: str, fd: int, st: os.stat_result) -> None:
        self.path = path
        self._fd = fd
        self.size_bytes = st.st_size
        self._mtime = st.st_mtime_ns

    def read_at(self, offset: int, n: int) -> bytes:
        if offset >= self.size_bytes or n <= 0:
            return b""
        n = min(n, self.size_bytes - offset)
        try:
            return _pread(self._fd, n, offset)
        except OSError as exc:
            raise FileAccessError(exc.errno, f"cannot read {self.path}: {exc.strerror}") from None

    def stored_bytes_done(self, offset: int) -> int:
        """Bytes of the file behind content ``offset`` (for progress)."""
        return min(offset, self.size_bytes)

    def check_unchanged(self) -> None:
        _check_same(self.path, os.fstat(self._fd), self.size_bytes, self._mtime)

    def close(self) -> None:
        if self._fd >= 0:
            os.close(self._fd)
            self._fd = -1


class CompressedSource:
    """gzip/bzip2/xz content, streamed; offsets count decompressed bytes."""

    def __init__(self, path: str, fd: int, st: os.stat_result, compression: str) -> None:
        self.path = path
        self.compression: str | None = compression
        self.size_bytes = st.st_size
        self._mtime = st.st_mtime_ns
        self._fd = fd
        self._raw: IO[bytes] | None = None
        self._stream: io.BufferedIOBase | None = None
        self._pos = 0
        self._restarts = 0
        self._gz = GzipSeeker(fd, self.size_bytes) if compression == "gzip" else None
        self._last: tuple[int, bytes] = (0, b"")
        """The previous window: reads that overlap it do not restart the decompressor."""

    def _restart(self) -> None:
        self._close_stream()
        self._raw = os.fdopen(os.dup(self._fd), "rb")
        self._raw.seek(0)
        self._stream = _OPENERS[self.compression or ""](self._raw)
        self._pos = 0
        self._last = (0, b"")
        self._restarts += 1

    @property
    def restarts(self) -> int:
        """How often a read went back to the start or to a checkpoint (for tests and benchmarks)."""
        return self._restarts + (self._gz.restores if self._gz is not None else 0)

    @contextmanager
    def _decoding(self) -> Iterator[None]:
        """Turn the decompressors' exceptions into one-line :class:`DigitFileError`."""
        try:
            yield
        except (EOFError, TruncatedError):
            raise DigitFileError(
                f"{self.path}: the {self.compression} stream is truncated (it ends before its end marker)"
            ) from None
        except (OSError, zlib.error, lzma.LZMAError, ValueError) as exc:
            raise DigitFileError(f"{self.path}: corrupt {self.compression} data ({exc})") from None

    def _read(self, n: int) -> bytes:
        with self._decoding():
            if self._gz is not None:
                data = self._gz.read(n)
                self._pos = self._gz.pos
                return data
            assert self._stream is not None
            data = self._stream.read(n)
        self._pos += len(data)
        return data

    def _seek(self, offset: int) -> None:
        if self._gz is not None:
            with self._decoding():
                self._gz.seek(offset)
            self._pos = self._gz.pos
            return
        if self._stream is None or offset < self._pos:
            self._restart()
        while self._pos < offset:
            if not self._read(min(SKIP_BYTES, offset - self._pos)):
                return

    def read_at(self, offset: int, n: int) -> bytes:
        if n <= 0:
            return b""
        last_off, last = self._last
        if last_off <= offset < last_off + len(last) and self._pos == last_off + len(last):
            # Overlaps the previous window, which ends where the decompressor stands.
            data = last[offset - last_off : offset - last_off + n]
            if len(data) < n:
                data += self._read(n - len(data))
        else:
            self._seek(offset)
            if self._pos < offset:
                return b""
            data = self._read(n)
        if offset + len(data) == self._pos:
            self._last = (offset, data)
        return data

    def stored_bytes_done(self, offset: int) -> int:
        """Compressed bytes consumed so far (for progress; ``offset`` is ignored)."""
        if self._gz is not None:
            done = self._gz.consumed
        else:
            done = self._raw.tell() if self._raw is not None and not self._raw.closed else 0
        return min(done, self.size_bytes)

    def check_unchanged(self) -> None:
        _check_same(self.path, os.fstat(self._fd), self.size_bytes, self._mtime)

    def _close_stream(self) -> None:
        if self._stream is not None:
            self._stream.close()
            self._stream = None
        if self._raw is not None:
            self._raw.close()
            self._raw = None

    def close(self) -> None:
        self._close_stream()
        if self._fd >= 0:
            os.close(self._fd)
            self._fd = -1


class Utf16Source:
    """UTF-16 text (after its byte order mark) read as the one-byte characters it holds."""

    def __init__(self, inner: ByteSource, encoding: str) -> None:
        self._inner = inner
        self.path = inner.path
        self.size_bytes = inner.size_bytes
        self.encoding = encoding
        self.compression: str | None = f"{inner.compression}, {encoding}" if inner.compression else encoding
        """The stored form: the encoding, after the compression if there is one."""
        self._low = 0 if encoding == "utf-16le" else 1  # where a character's low byte lies

    def read_at(self, offset: int, n: int) -> bytes:
        if n <= 0:
            return b""
        raw = self._inner.read_at(2 + 2 * offset, 2 * n)
        if len(raw) % 2:
            raise DigitFileError(
                f"{os.path.basename(self.path)}: {self.encoding} text ends in half a character "
                f"(byte {2 + 2 * offset + len(raw) - 1})"
            )
        low, high = raw[self._low :: 2], raw[1 - self._low :: 2]
        if high.count(0) != len(high) or not low.isascii():
            i = next(j for j in range(len(low)) if high[j] or low[j] >= 0x80)
            code = (high[i] << 8) | low[i]
            raise DigitFileError(
                f"{os.path.basename(self.path)}: character U+{code:04X} at byte {2 + 2 * (offset + i)} of this "
                f"{self.encoding} file: not a digit, space, line break or header text"
            )
        return low

    def stored_bytes_done(self, offset: int) -> int:
        return self._inner.stored_bytes_done(2 + 2 * offset)

    def check_unchanged(self) -> None:
        self._inner.check_unchanged()

    def close(self) -> None:
        self._inner.close()


def _check_same(path: str, st: os.stat_result, size: int, mtime: int) -> None:
    """DigitFileError saying what changed (size, modification time) if the file is not as it was opened."""
    if st.st_size != size:
        raise DigitFileError(
            f"{path} changed while being read: its size went from {size:,} to {st.st_size:,} bytes "
            f"(modified at {_clock(st.st_mtime_ns, mtime)}); is it still being written? "
            "Check it again once it is complete"
        )
    if st.st_mtime_ns != mtime:
        raise DigitFileError(
            f"{path} changed while being read: it was modified again at {_clock(st.st_mtime_ns, mtime)} "
            f"(before: {_clock(mtime, st.st_mtime_ns)}), its size unchanged at {size:,} bytes, so digits "
            "may have been changed in place; check it again once nothing writes to it"
        )


def _clock(ns: int, other: int) -> str:
    """A modification time as local date and time, to the millisecond where ``other`` is in the same second."""
    import time

    text = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(ns // 10**9))
    if ns // 10**9 == other // 10**9:
        text += f".{ns // 10**6 % 1000:03d}"
    return text


# --- standard input: "-" as the file --------------------------------------------
STDIN_NAME = "-"
_stdin_copy: list[str] = []  # the path of this process's copy, once made


def stdin_copy() -> str:
    """The path of a private copy of standard input, made on first use (the copy is removed at exit).

    A check reads its file more than once and at positions out of order (detection, the first
    pass, the windows), which a pipe cannot do; so standard input is copied once, as it
    arrives, into a file of the temporary folder that only this user can read.  Standard input
    itself is only read.  A terminal is refused, and so is a copy that does not fit (the
    message says what to do).
    """
    if _stdin_copy:
        return _stdin_copy[0]
    import atexit
    import tempfile

    fd_in = 0  # the process's standard input, whatever wraps it in Python
    try:
        os.fstat(fd_in)
    except OSError:
        raise FileAccessError(
            errno.EBADF, "standard input (-) is closed: pipe the digits in or name the file"
        ) from None
    if os.isatty(fd_in):
        raise FileAccessError(
            errno.EINVAL,
            "standard input (-) is a terminal, not a digit file: pipe the digits in or name the file",
        )
    out, name = tempfile.mkstemp(prefix="spotcheck-stdin-")
    atexit.register(_remove_quietly, name)
    try:
        while chunk := os.read(fd_in, 1 << 20):
            view = memoryview(chunk)
            while view:
                view = view[os.write(out, view) :]
    except OSError as exc:
        _remove_quietly(name)
        raise FileAccessError(
            exc.errno,
            f"standard input (-) could not be copied to {os.path.dirname(name)} ({exc.strerror}): the checks read "
            "a file more than once, so the copy needs as much room as the input; write it to a file where "
            "there is room and name that file",
        ) from None
    finally:
        os.close(out)
    _stdin_copy.append(name)
    return name


def _remove_quietly(name: str) -> None:
    try:
        os.unlink(name)
    except OSError:
        pass


def local_path(path: str | os.PathLike[str]) -> str:
    """The file to open for ``path``: itself, or the copy of standard input for ``-``."""
    p = os.fspath(path)
    return stdin_copy() if p == STDIN_NAME else p


def open_source(path: str | os.PathLike[str]) -> ByteSource:
    """Open ``path`` read-only and pick the plain or decompressing source (``-``: standard input)."""
    p = os.fspath(path)
    st = _stat_checked(local_path(p))
    try:
        fd = os.open(local_path(p), os.O_RDONLY | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_BINARY", 0))
    except PermissionError:
        raise FileAccessError(errno.EACCES, f"permission denied: {p}") from None
    except OSError as exc:
        raise FileAccessError(exc.errno, f"cannot open {p}: {exc.strerror}") from None
    try:
        st = os.fstat(fd)
        magic = _pread(fd, 8, 0)
    except OSError as exc:
        os.close(fd)
        raise FileAccessError(exc.errno, f"cannot read {p}: {exc.strerror}") from None
    kind = detect_compression(magic)
    if kind is None:
        return PlainSource(p, fd, st)
    return CompressedSource(p, fd, st, kind)
