"""gzip decompression with checkpoints, for reads at any offset of the content.

gzip has no index, so reaching offset X means decompressing everything before
it.  While decompressing forward this reader keeps a *checkpoint* every
``CHECKPOINT_BYTES`` of output: a copy of the zlib state (``Decompress.copy``:
its 32 KiB window and a few KiB of tables) with the input position.  A later
read at X resumes from the nearest checkpoint at or before X, so after the
first pass any window costs at most ``CHECKPOINT_BYTES`` of decompression
(about 40 KiB of memory per checkpoint: about 10 MiB for 4 GiB of content).

Multi-member files (``cat a.gz b.gz``) and zero padding after a member are
read like ``gzip.GzipFile`` reads them.
"""

from __future__ import annotations

import os
import zlib
from bisect import bisect_right

__all__ = ["GzipSeeker", "CHECKPOINT_BYTES"]

# --- tuning -----------------------------------------------------------------
CHECKPOINT_BYTES = 16 << 20  # decompressed bytes between checkpoints
RAW_STEP = 256 << 10  # compressed bytes fed to zlib at a time
OUT_STEP = 4 << 20  # most decompressed bytes produced per zlib call


def _pread_seek(fd: int, n: int, offset: int) -> bytes:
    os.lseek(fd, offset, os.SEEK_SET)
    return os.read(fd, n)


_pread = getattr(os, "pread", _pread_seek)
_GZIP_WBITS = 16 + zlib.MAX_WBITS  # a gzip header and trailer around each member


class TruncatedError(Exception):
    """The compressed data ends inside a member."""


class GzipSeeker:
    """Decompressed reads at any offset of a gzip file open as ``fd``."""

    def __init__(self, fd: int, size: int) -> None:
        self._fd = fd
        self._size = size
        self._offsets: list[int] = []
        self._states: list[tuple[int, zlib._Decompress]] = []  # type: ignore[name-defined]
        self.restores = 0
        self._reset()

    def _reset(self) -> None:
        self._d = zlib.decompressobj(_GZIP_WBITS)
        self._cin = 0  # compressed bytes taken from the file
        self._feed = b""  # taken but not yet consumed by zlib
        self._pending = b""  # decompressed, delivered from _at on
        self._at = 0
        self.pos = 0  # decompressed offset of the next byte delivered
        self._done = False

    @property
    def consumed(self) -> int:
        """Compressed bytes read from the file so far."""
        return self._cin

    def _produced(self) -> int:
        return self.pos + len(self._pending) - self._at

    def _fill(self) -> bool:
        """Replace the (used up) pending output with the next piece; False at the end."""
        while not self._done:
            if self._d.eof:
                rest = self._d.unused_data.lstrip(b"\0") + self._feed
                self._feed = b""
                while not rest:
                    more = self._take()
                    if not more:
                        break
                    rest = more.lstrip(b"\0")
                if not rest:
                    self._done = True
                    return False
                self._d = zlib.decompressobj(_GZIP_WBITS)
                self._feed = rest
            if not self._feed:
                self._feed = self._take()
                if not self._feed:
                    raise TruncatedError()
            out = self._d.decompress(self._feed, OUT_STEP)
            self._feed = self._d.unconsumed_tail
            if out:
                self._pending, self._at = out, 0
                self._maybe_checkpoint()
                return True
        return False

    def _take(self) -> bytes:
        data = _pread(self._fd, RAW_STEP, self._cin)
        self._cin += len(data)
        return data

    def _maybe_checkpoint(self) -> None:
        start, end = self.pos, self._produced()
        mark = (end // CHECKPOINT_BYTES) * CHECKPOINT_BYTES
        if mark <= start or self._d.eof:
            return  # no boundary crossed, or between members (the next pass starts one anew)
        if self._offsets and self._offsets[-1] >= end:
            return  # recorded on an earlier pass
        self._offsets.append(end)
        # The unconsumed input is not kept: it is read again from the file.
        self._states.append((self._cin - len(self._feed), self._d.copy()))

    def _restore(self, i: int) -> None:
        cin, state = self._states[i]
        self._reset()
        self._cin, self._d = cin, state.copy()
        self.pos = self._offsets[i]
        self.restores += 1

    def seek(self, offset: int) -> None:
        """Stand at decompressed ``offset`` (or at the end of the content, if shorter)."""
        i = bisect_right(self._offsets, offset) - 1
        if offset < self.pos:
            if i >= 0:
                self._restore(i)
            else:
                self._reset()
                self.restores += 1
        elif i >= 0 and self._offsets[i] > self._produced():
            self._restore(i)
        while self.pos < offset:
            if self._at >= len(self._pending) and not self._fill():
                return
            skip = min(len(self._pending) - self._at, offset - self.pos)
            self._at += skip
            self.pos += skip

    def read(self, n: int) -> bytes:
        parts: list[bytes] = []
        while n > 0:
            if self._at >= len(self._pending) and not self._fill():
                break
            take = self._pending[self._at : self._at + n]
            self._at += len(take)
            self.pos += len(take)
            n -= len(take)
            parts.append(take)
        return b"".join(parts)
