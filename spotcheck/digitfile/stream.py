"""Read a digit file once, front to back: its digits chunk by chunk, every byte checked on the way.

:func:`open_digit_file` runs the index pass before the first read, so a caller
that then streams the whole file (``compare``) reads every byte twice.  A
:class:`DigitStream` does both in one read: it opens the file with detection
only (the head), then yields the digits chunk by chunk while validating every
byte exactly as the index pass does (a stray character is the same
:class:`DigitFileError` naming byte offset, line and column; a label that
disagrees is the same :class:`Finding`, or :class:`LabelError` with
``strict_labels``), and builds the index on the way.  The count and the
findings are known at the end of the stream; :meth:`DigitStream.finish` then
hands over a :class:`DigitFile` with random access, no second pass needed.

>>> import os, tempfile
>>> path = os.path.join(tempfile.mkdtemp(), "pi.txt")
>>> with open(path, "w") as f:
...     _ = f.write("3.243F6A8885 A308D31319\\n8A2E037073 44A4093822\\n")
>>> with open_stream(path) as s:
...     (s.base, s.integer_part, s.take(8), len(s.take(100)), s.done)
...     df = s.finish()
(16, '3', b'243F6A88', 32, True)
>>> with df:
...     (df.count, df.constant, df.read(33, 8))
(40, 'pi', 'A4093822')

The inner loops are ``extract`` and ``extract_labelled`` of the optional C
extension ``_index.c``; their Python twins ``extract_py`` and
``extract_labelled_py`` below serve when it was not built or ``SPOTCHECK_PURE``
is set.  Labelled lines are taken by the loop while each has the plain form of
its layout and a label that agrees; any other line (a label that disagrees, a
line without one, a stray byte) is read by the index pass's own line rule
(``LabelSyntax.split_line`` and ``index._LabelCheck``), so findings and errors
are those of the index pass.  A layout the loops do not know is read by the
index pass first and then streamed (two reads, never a misreading).
"""

from __future__ import annotations

import dataclasses
import os
import re
from array import array
from collections.abc import Iterator
from types import TracebackType

from spotcheck.digitfile import index as _index_module
from spotcheck.digitfile.charsets import WS, allowed_set, class_table, digit_set
from spotcheck.digitfile.detect import Detection, LabelSyntax
from spotcheck.digitfile.index import (
    TAIL_DIGITS,
    IndexResult,
    Progress,
    _LabelCheck,
    build_index,
    first_mismatch,
    read_whole_lines,
    stray_error,
)
from spotcheck.digitfile.reader import DigitFile, _open_packed, detect_source, text_digit_file
from spotcheck.digitfile.source import ByteSource, open_source
from spotcheck.errors import UsageError

__all__ = [
    "DigitStream",
    "open_stream",
    "index_pass",
    "extract",
    "extract_py",
    "extract_labelled",
    "extract_labelled_py",
    "norm_table",
    "STREAM_PASS",
    "KIND",
]

# --- tuning -----------------------------------------------------------------
STREAM_CHUNK_BYTES = 4 << 20  # bytes read and checked per step of the stream
LABELLED_STREAM_CHUNK_BYTES = 2 << 20  # the same for labelled lines (a line must fit in it)
# ---------------------------------------------------------------------------

KIND = {"before": 0, "first": 1, "through": 2}
"""The codes of ``LabelMeaning.kind`` the labelled loop takes."""

# Detection fields this module reads or knows to be irrelevant to the digits.  A
# field added later (a layout this stream does not know) that is set on a file sends
# it through the index pass first (two reads, never a misreading).
_KNOWN_FIELDS = frozenset(
    "base base_how explicit_base integer_part header_lines first_line_no labels syntax meaning "
    "end_meaning first_label first_label_text first_end_label_text digits_offset seg_end seg_cols "
    "seg_digits head_digits sample_digits "
    "template newline letter_case whole_file_in_head notes".split()
)


def norm_table(base: int) -> bytes:
    """A 256-byte table: each digit of ``base`` -> its upper-case form (other bytes unchanged)."""
    table = bytearray(range(256))
    if base == 16:
        for c in b"abcdef":
            table[c] = c - 32
    return bytes(table)


_NOT_DIGIT = bytes(0 if c == ord("d") else 0xFF for c in range(256))


def extract_py(
    data: bytes | memoryview,
    table: bytes,
    norm: bytes,
    out: bytearray,
    out_pos: int,
    units: bytes | memoryview | None,
) -> tuple[int, int, int, int]:
    """Python twin of ``_index.extract``: ``(digits written, stray index or -1, LFs, regular)``.

    ``regular`` is 1 when every byte before the stray one that is not a digit has
    its class in ``units`` (0 when one has not, -1 without ``units``).
    """
    data = bytes(data)
    if len(out) - out_pos < len(data) or (units is not None and len(units) < len(data)):
        raise ValueError("out too short for the chunk's digits, or units shorter than data")
    classes = data.translate(table)
    stray = classes.find(b"?")
    end = stray if stray >= 0 else len(data)
    digits = data[:end].translate(norm, WS)
    out[out_pos : out_pos + len(digits)] = digits
    regular = -1
    if units is not None:  # every byte that is not a digit has its class in units
        mask = int.from_bytes(classes[:end].translate(_NOT_DIGIT), "big")
        have = int.from_bytes(classes[:end], "big") & mask
        regular = int(int.from_bytes(bytes(units[:end]), "big") & mask == have)
    return len(digits), stray, data.count(b"\n", 0, end), regular


_PATTERNS: dict[tuple[int, ...], tuple[re.Pattern[bytes], ...]] = {}


def _lab(radix: int, most: int) -> bytes:
    return rb"([0-9]{1,%d})" % most if radix == 10 else rb"([0-9A-Fa-f]{1,%d})" % most


def _patterns(base: int, layout: tuple[int, ...]) -> tuple[re.Pattern[bytes], ...]:
    """The plain form of a labelled line (the lines the loops take; see ``read_line`` in _index.c):
    one end, one pattern with groups (label, body) or (body, label); both ends, the end label's
    pattern (searched), the start label's (matched on what is left) and the body's."""
    key = (base, *layout)
    got = _PATTERNS.get(key)
    if got is None:
        where, digits = layout[0], re.escape(digit_set(base))
        body = rb"([" + digits + rb" \t]*)"
        mark = rb"[ \t]*[:|][ \t]*"
        sep1 = mark if layout[1] == 0 else rb"[ \t]+"
        if where == 0:
            got = (re.compile(rb"[ \t]*" + _lab(*layout[2:4]) + sep1 + body),)
        elif where == 1 and layout[1] == 0:
            got = (re.compile(body + mark + _lab(*layout[2:4]) + rb"[ \t]*"),)
        elif where == 1:
            got = (re.compile(rb"([" + digits + rb" \t]*[ \t])" + _lab(*layout[2:4]) + rb"[ \t]*"),)
        else:
            sep2 = mark if layout[6] == 0 else rb"[ \t]+"
            got = (
                re.compile(sep2 + _lab(*layout[7:9]) + rb"[ \t]*\Z"),
                re.compile(rb"[ \t]*" + _lab(*layout[2:4]) + sep1),
                re.compile(body),
            )
        _PATTERNS[key] = got
    return got


def plain_split(base: int, layout: tuple[int, ...], text: bytes) -> tuple[tuple[bytes, ...], bytes] | None:
    """``(labels, body)`` of a line that is not blanks only, when it has the plain form the loops
    take (labels: the one label, or the start and the end label); None otherwise.  Labels at both
    ends split as ``LabelSyntax.split_labels`` splits them: the end label off first, then the
    start label from what is left."""
    pats = _patterns(base, layout)
    if layout[0] != 2:
        m = pats[0].fullmatch(text)
        if m is None:
            return None
        return ((m.group(1),), m.group(2)) if layout[0] == 0 else ((m.group(2),), m.group(1))
    me = pats[0].search(text)
    if me is None:
        return None
    b1 = me.start()
    ms = pats[1].match(text, 0, b1)
    if ms is None or pats[2].fullmatch(text, ms.end(), b1) is None:
        return None
    return (ms.group(1), me.group(1)), text[ms.end() : b1]


def _end_ok(sep: int, radix: int, most: int, kind: int, unit: int) -> bool:
    return (
        sep in (0, 1)
        and radix in (10, 16)
        and 1 <= most <= (18 if radix == 10 else 16)
        and kind in (0, 1, 2)
        and unit in (1, 2)
    )


def _agrees(label: bytes, radix: int, kind: int, unit: int, pos: int, nd: int) -> bool:
    c = pos + nd if kind == 2 else pos
    return not c % unit and int(label, radix) == c // unit + (kind == 1)


def extract_labelled_py(
    data: bytes | memoryview,
    table: bytes,
    norm: bytes,
    out: bytearray,
    out_pos: int,
    layout: tuple[int, ...],
    before: int,
    offset: int,
    line: int,
    step: int,
    last_index: int,
) -> tuple[int, int, int, int, list[tuple[int, int, int]], int]:
    """Python twin of ``_index.extract_labelled``:
    ``(bytes consumed, digits written, lines, stop, index entries, last index offset)``.

    ``layout`` is ``(where, sep, radix, most, kind, unit)`` for a label at one end
    (where 0 start, 1 end), or for labels at both ends (where 2) those five of the
    start label's followed by the end label's."""
    data = bytes(data)
    where = layout[0] if layout else -1
    if (
        len(out) - out_pos < len(data)
        or where not in (0, 1, 2)
        or len(layout) != (11 if where == 2 else 6)
        or not all(_end_ok(*layout[i : i + 5]) for i in range(1, len(layout), 5))
        or step < 1
        or before < 0
    ):
        raise ValueError("extract_labelled: bad layout or buffer sizes")
    base = 16 if table[ord("A")] == ord("d") else 10
    # (radix, kind, unit) of each label column
    columns = [(layout[i + 1], layout[i + 3], layout[i + 4]) for i in range(1, len(layout), 5)]
    lo, k, lines, pos, stop = 0, 0, 0, before, 0
    entries: list[tuple[int, int, int]] = []
    while lo < len(data):
        nl = data.find(b"\n", lo)
        if nl < 0:
            stop = 0
            break
        text = data[lo:nl]
        if text.endswith(b"\r"):
            text = text[:-1]
        split = None
        if text.strip(b" \t"):
            split = plain_split(base, layout, text)
            if split is None:
                stop = 1
                break
        digits = split[1].translate(norm, b" \t") if split else b""
        nd = len(digits)
        if split is not None and not all(
            _agrees(label, r, kd, u, pos, nd) for label, (r, kd, u) in zip(split[0], columns, strict=True)
        ):
            stop = 2
            break
        if nd:
            if offset + lo - last_index >= step:
                entries.append((pos + 1, offset + lo, line + lines))
                last_index = offset + lo
            out[out_pos + k : out_pos + k + nd] = digits
            k += nd
            pos += nd
        lines += 1
        lo = nl + 1
    return lo, k, lines, stop, entries, last_index


extract = extract_py
extract_labelled = extract_labelled_py
STREAM_PASS = "python"
if os.environ.get("SPOTCHECK_PURE", "").strip().lower() not in ("1", "true", "yes", "on"):
    try:
        from spotcheck.digitfile._index import (  # type: ignore[import-not-found]
            extract as _extract_c,
        )
        from spotcheck.digitfile._index import (
            extract_labelled as _extract_labelled_c,
        )
    except ImportError:  # the optional extension was not built (or is older): the twins serve
        pass
    else:
        extract, extract_labelled = _extract_c, _extract_labelled_c
        STREAM_PASS = "c"


def _most_label_chars(syntax: LabelSyntax) -> int | None:
    """The most characters of a label, read off a one-sided syntax's own pattern (None: not the known shape)."""
    rx: re.Pattern[bytes] = syntax._line  # type: ignore[attr-defined]
    found = re.findall(rb"\]\{1,(\d+)\}\)", rx.pattern)
    if len(found) != 1:
        return None
    most = int(found[0])
    return most if 1 <= most <= (18 if syntax.radix == 10 else 16) else None


def _loop_layout(plan: Detection) -> tuple[int, ...] | None:
    """The ``layout`` argument of ``extract_labelled`` for the plan's labels (None: a layout the
    loops do not know): where, then sep, radix, most, kind and unit of each label column."""
    syntax = plan.syntax
    if type(syntax) is not LabelSyntax or syntax.where not in ("start", "end", "both"):
        return None
    meanings = (plan.meaning, plan.end_meaning) if syntax.where == "both" else (plan.meaning,)
    layout: tuple[int, ...] = (("start", "end", "both").index(syntax.where),)
    for end, meaning in zip(syntax.ends, meanings, strict=True):
        most = _most_label_chars(end)
        if (
            type(end) is not LabelSyntax
            or end.sep not in ("mark", "blank")
            or meaning is None
            or meaning.kind not in KIND
            or meaning.unit not in (1, 2)
            or most is None
        ):
            return None
        layout += (0 if end.sep == "mark" else 1, end.radix, most, KIND[meaning.kind], meaning.unit)
    return layout


def _streamable(plan: Detection) -> bool:
    """True when the loops here read this layout exactly as the index pass does."""
    for f in dataclasses.fields(plan):
        if f.name not in _KNOWN_FIELDS and getattr(plan, f.name) not in (None, False, 0, "", [], ()):
            return False
    both = plan.syntax is not None and plan.syntax.where == "both"
    if not both and (plan.end_meaning is not None or plan.first_end_label_text is not None):
        return False  # an end column's facts on a plan without one: not a layout known here
    return plan.syntax is None or _loop_layout(plan) is not None


class _Pass:
    """One read-and-check pass over a text file: the digits (when ``emit``) and, at the end, ``scan``."""

    def __init__(
        self,
        src: ByteSource,
        plan: Detection,
        strict: bool,
        *,
        emit: bool = True,
        progress: Progress | None = None,
    ) -> None:
        self.src, self.plan, self.strict, self.emit, self.progress = src, plan, strict, emit, progress
        self.stored = 0
        """Bytes of the file as stored consumed so far."""
        self.scan: IndexResult | None = None
        """What the index pass returns, once the pass is at the end."""
        self.reuse = False
        """Hand out the pass's own buffer (valid until the next chunk is asked for) instead of copies."""
        self._pad = b""

    def run(self) -> Iterator[bytes]:
        return self.plain() if self.plan.syntax is None else self.labelled()

    def _hand_out(self, out: bytearray, k: int) -> Iterator[bytes]:
        """The first ``k`` bytes of ``out``: a copy, or with ``reuse`` the buffer itself, cut to ``k``
        bytes until the consumer asks for more (no new buffer each chunk: fresh pages cost as
        much as the copy loop)."""
        if not self.reuse:
            yield bytes(memoryview(out)[:k])
            return
        full = len(out)
        if len(self._pad) < full:
            self._pad = bytes(full)
        del out[k:]
        yield out  # type: ignore[misc]  # a bytearray, which the caller may not keep
        out.extend(memoryview(self._pad)[: full - k])  # back to its size, in place

    def plain(self) -> Iterator[bytes]:
        """Unlabelled text: every byte a digit or whitespace; regular while it follows the unit."""
        src, plan = self.src, self.plan
        base = plan.base
        assert base is not None
        table, norm = class_table(base), norm_table(base)
        step = _index_module.INDEX_STEP  # bytes between index entries: the index pass's own setting
        d1 = len(plan.seg_digits)
        tail = plan.seg_digits[-TAIL_DIGITS:].upper()
        res = IndexResult(
            count=d1, regular=False, unit=None, unit_digits=0, unit_cols=[], region_start=plan.seg_end
        )
        if d1 and self.emit:
            yield plan.seg_digits.upper()
        off, pos = plan.seg_end, d1
        line = plan.first_line_no + (1 if plan.seg_end > plan.digits_offset else 0)
        unit = plan.template
        regular = bool(unit) and b"d" in unit and b"?" not in unit  # type: ignore[operator]
        size = STREAM_CHUNK_BYTES
        units = b""
        if regular:
            assert unit is not None
            size = max(1, STREAM_CHUNK_BYTES // len(unit)) * len(unit)
            units = unit * (size // len(unit))
        out = bytearray(size)
        uview = memoryview(units)
        if regular:
            assert unit is not None
            width = unit.count(b"d")
            cum = [unit[:r].count(b"d") for r in range(len(unit) + 1)]

            def digits_before(m: int) -> int:  # digits in units[:m]
                q, r = divmod(m, len(unit))
                return q * width + cum[r]

            per_unit = unit.count(b"\n")
            cum_lf = [unit[:r].count(b"\n") for r in range(len(unit) + 1)]
            keep = (TAIL_DIGITS // max(1, width) + 2) * len(unit)  # bytes that hold the last digits

            def breaks_before(m: int) -> int:  # line breaks in units[:m]
                q, r = divmod(m, len(unit))
                return q * per_unit + cum_lf[r]

        while True:
            data = src.read_at(off, size)
            if not data:
                break
            view = memoryview(data)
            last = len(data) < size
            was_regular = regular
            k = 0
            if regular and not last and not self.emit and first_mismatch(data, units, table) < 0:
                # The index pass on a chunk that follows the unit: nothing to copy, counts by arithmetic.
                for i in range(0, len(data), step):
                    end = min(len(data), i + step)
                    if digits_before(end) > digits_before(i):
                        res.index_pos.append(pos + digits_before(i) + 1)
                        res.index_off.append(off + i)
                        res.index_line.append(line + breaks_before(i))
                pos += digits_before(len(data))
                line += breaks_before(len(data))
                off += len(data)
                tail = (tail + data[-keep:].translate(None, WS).upper())[-TAIL_DIGITS:]
                self.stored = src.stored_bytes_done(off)
                if self.progress:
                    self.progress(self.stored, src.size_bytes)
                continue
            for i in range(0, len(data), step):
                blk = view[i : i + step]
                ask = uview[i : i + step] if regular and not last else None
                nd, stray, nl, ok = extract(blk, table, norm, out, k, ask)
                if stray >= 0:
                    at = off + i + stray
                    raise stray_error(src, plan, base, at, data[i + stray])
                if ask is not None and (ok == 0 or nd != digits_before(i + len(blk)) - digits_before(i)):
                    regular = False
                if nd:
                    res.index_pos.append(pos + k + 1)
                    res.index_off.append(off + i)
                    res.index_line.append(line)
                k += nd
                line += nl
            if was_regular and not regular and not last and not src.read_at(off + len(data), 1):
                last = True  # a full chunk that ends the file: trailing blank lines are allowed there too
                regular = True
            if regular and last:
                body = data.translate(table).rstrip(WS)
                regular = body == units[: len(body)]
            pos += k
            off += len(data)
            self.stored = src.stored_bytes_done(off)
            if self.progress:
                self.progress(self.stored, src.size_bytes)
            if k:
                tail = (tail + bytes(out[max(0, k - TAIL_DIGITS) : k]))[-TAIL_DIGITS:]
                if self.emit:
                    yield from self._hand_out(out, k)
            if last:
                break
        src.check_unchanged()
        res.count, res.last_digits, res.content_bytes = pos, tail, off
        if regular:
            assert unit is not None
            res.regular, res.unit, res.unit_digits = True, unit, unit.count(b"d")
            res.unit_cols = [i for i, c in enumerate(unit) if c == ord("d")]
            res.index_pos, res.index_off, res.index_line = array("q"), array("q"), array("q")
        self.scan = res

    def labelled(self) -> Iterator[bytes]:
        """Lines with position labels: the loop takes plain lines, the index pass's line rule the rest."""
        src, plan = self.src, self.plan
        step = _index_module.INDEX_STEP  # bytes between index entries: the index pass's own setting
        base, syntax, meaning = plan.base, plan.syntax, plan.meaning
        assert base is not None and syntax is not None and meaning is not None
        name = os.path.basename(src.path)
        both = syntax.where == "both"
        # One check per label column, as the index pass keeps them: the start and the end label for
        # "both", else the one column.
        meanings = (meaning, plan.end_meaning) if both else (meaning,)
        checks = [
            _LabelCheck(m, s, self.strict, name, both)
            for m, s in zip(meanings, syntax.ends, strict=True)
            if m is not None
        ]
        first_texts = (plan.first_label_text, plan.first_end_label_text) if both else (plan.first_label_text,)
        d1 = len(plan.seg_digits)
        for check, first_text in zip(checks, first_texts, strict=True):
            if first_text is not None:
                check.feed(first_text.encode(), 0, d1, plan.first_line_no, plan.digits_offset)
            elif d1:
                check.no_label(plan.first_line_no, plan.digits_offset, 0)
        res = IndexResult(
            count=d1, regular=False, unit=None, unit_digits=0, unit_cols=[], region_start=plan.seg_end
        )
        tail = plan.seg_digits[-TAIL_DIGITS:].upper()
        if d1 and self.emit:
            yield plan.seg_digits.upper()
        layout = _loop_layout(plan)
        assert layout is not None and len(checks) == len(syntax.ends)
        table, norm, allowed = class_table(base), norm_table(base), allowed_set(base)
        off, pos, line = plan.seg_end, d1, plan.first_line_no + 1
        last_index = -step
        size = LABELLED_STREAM_CHUNK_BYTES
        out = bytearray(size)
        while True:
            data = read_whole_lines(src, off, size, name)
            if not data:
                break
            view = memoryview(data)
            lo = k = 0
            while lo < len(data):
                used, nd, lines, _stop, entries, last_index = extract_labelled(
                    view[lo:], table, norm, out, k, layout, pos, off + lo, line, step, last_index
                )
                for p, o, ln in entries:
                    res.index_pos.append(p)
                    res.index_off.append(o)
                    res.index_line.append(ln)
                pos, k, line, lo = pos + nd, k + nd, line + lines, lo + used
                if lo >= len(data):
                    break
                # One line the loop did not take: the index pass's own line rule reads it.
                nl = data.find(b"\n", lo)
                end = nl if nl >= 0 else len(data)
                raw = data[lo:end]
                found, b0, b1 = syntax.split_labels(raw[:-1] if raw.endswith(b"\r") else raw)
                body = raw[b0:b1]
                bad = body.translate(None, allowed)
                if bad:
                    at = lo + b0 + body.find(bad[:1])
                    raise stray_error(src, plan, base, off + at, data[at])
                digits = body.translate(norm, WS)
                for check, label in zip(checks, found, strict=True):
                    if label is not None:
                        check.feed(label, pos, len(digits), line, off + lo)
                    elif digits:
                        check.no_label(line, off + lo, pos)
                if digits:
                    if off + lo - last_index >= step:
                        res.index_pos.append(pos + 1)
                        res.index_off.append(off + lo)
                        res.index_line.append(line)
                        last_index = off + lo
                    out[k : k + len(digits)] = digits
                    k += len(digits)
                    pos += len(digits)
                if nl >= 0:
                    line += 1
                lo = end + 1
            off += len(data)
            self.stored = src.stored_bytes_done(off)
            if self.progress:
                self.progress(self.stored, src.size_bytes)
            if k:
                tail = (tail + bytes(out[max(0, k - TAIL_DIGITS) : k]))[-TAIL_DIGITS:]
                if self.emit:
                    yield from self._hand_out(out, k)
        src.check_unchanged()
        res.findings = sorted(
            (f for check in checks for f in check.finish()), key=lambda f: (f.line is None, f.line or 0)
        )
        res.label_meaning = meaning.name
        res.end_label_meaning = plan.end_meaning.name if both and plan.end_meaning else None
        res.count, res.last_digits, res.content_bytes = pos, tail, off
        self.scan = res


def index_pass(
    src: ByteSource,
    plan: Detection,
    *,
    strict_labels: bool = False,
    progress: Progress | None = None,
) -> IndexResult | None:
    """The index pass through the compiled loops (``build_index`` calls it), or None when they do not
    serve: not built, or a layout they do not know."""
    if STREAM_PASS != "c" or not _streamable(plan):
        return None
    one = _Pass(src, plan, strict_labels, emit=False, progress=progress)
    for _ in one.run():
        pass
    return one.scan


class DigitStream:
    """A digit file opened for one sequential read.  Use :func:`open_stream`.

    Known at once: ``path``, ``size_bytes``, ``compression``, ``base``,
    ``base_how``, ``integer_part``, ``head_digits``, and ``how`` the digits are
    read (in one pass; or, for packed hex and layouts the loops do not know,
    from a :class:`DigitFile` opened by the index pass).  ``digits_read`` and
    ``bytes_done`` grow as the stream is read; after the end, :meth:`finish`
    gives the :class:`DigitFile` (count, findings, constant, random access).
    """

    def __init__(
        self,
        src: ByteSource,
        *,
        base: int | None = None,
        constant: str | None = None,
        packed: bool | None = None,
        strict_labels: bool = False,
        labels: str | None = None,
    ) -> None:
        self._src: ByteSource | None = src
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression
        self._constant = constant
        self._df: DigitFile | None = None
        self._pass: _Pass | None = None
        self._buf, self._at = b"", 0
        self.digits_read = 0
        self._stored = 0
        src, plan, head = detect_source(src, base, packed, labels)
        self._src, self._plan = src, plan
        if plan is None:  # packed hex: two digits per byte, nothing to validate
            self._df = _open_packed(src, head, base, constant, None)
            self.base, self.base_how, self.integer_part = 16, self._df.base_how, None
            self.head_digits = head[:32].hex().upper()
            self.how = "packed"
            self._gen: Iterator[bytes] | None = self._from_file()
            return
        assert plan.base is not None
        self.base, self.base_how, self.integer_part = plan.base, plan.base_how, plan.integer_part
        self.head_digits = plan.head_digits.decode("ascii").upper()
        if not _streamable(plan):
            scan = build_index(src, plan, plan.base, strict_labels=strict_labels)
            self._df = text_digit_file(src, plan, scan, constant)
            self.how = "index pass, then read"
            self._gen = self._from_file()
        else:
            self._pass = _Pass(src, plan, strict_labels)
            self.how = "read and checked in one pass"
            self._gen = self._pass.run()

    # -- reading -------------------------------------------------------------
    @property
    def bytes_done(self) -> int:
        """Bytes of the file as stored consumed so far (compressed bytes for a compressed file)."""
        return self._pass.stored if self._pass is not None else self._stored

    @property
    def done(self) -> bool:
        """True once every digit has been handed out."""
        return self._gen is None and self._at >= len(self._buf)

    def chunks(self, copy: bool = True) -> Iterator[bytes]:
        """The remaining digits (upper-case ASCII bytes), chunk by chunk, in order.

        With ``copy=False`` a chunk may be the stream's own buffer (a ``bytearray``),
        valid only until the next chunk is asked for: for callers done with each
        chunk before they take the next, it saves a copy and fresh memory per chunk.
        """
        if self._pass is not None:
            self._pass.reuse = not copy
        if self._at < len(self._buf):
            rest, self._buf, self._at = self._buf[self._at :], b"", 0
            self.digits_read += len(rest)
            yield rest
        while self._gen is not None:
            try:
                piece = next(self._gen)
            except StopIteration:
                self._gen = None
                break
            self.digits_read += len(piece)
            yield piece

    def take(self, n: int) -> bytes:
        """The next ``n`` digits (fewer only at the end of the file)."""
        have = len(self._buf) - self._at
        if self._pass is not None:
            self._pass.reuse = False  # the pieces are joined after the next ones are read
        if have < n:
            parts = [self._buf[self._at :]]
            while have < n and self._gen is not None:
                try:
                    piece = next(self._gen)
                except StopIteration:
                    self._gen = None
                    break
                parts.append(piece)
                have += len(piece)
            self._buf, self._at = b"".join(parts), 0
        out = self._buf[self._at : self._at + n]
        self._at += len(out)
        self.digits_read += len(out)
        return out

    def drain(self) -> None:
        """Read to the end without keeping the digits (the count, findings and index are then known)."""
        for _ in self.chunks():
            pass

    def finish(self) -> DigitFile:
        """The :class:`DigitFile` once every digit was read; it takes over the open file."""
        if not self.done:
            raise UsageError(f"{self.path}: finish() before the end of the stream")
        if self._df is None:
            assert self._plan is not None and self._pass is not None and self._src is not None
            assert self._pass.scan is not None
            self._df = text_digit_file(self._src, self._plan, self._pass.scan, self._constant)
        df, self._df, self._src = self._df, None, None
        if df is None:
            raise UsageError(f"{self.path}: finish() was already called")
        return df

    # -- the passes ----------------------------------------------------------
    def _from_file(self) -> Iterator[bytes]:
        df = self._df
        assert df is not None
        for p, digits in df.iter_chunks(STREAM_CHUNK_BYTES):
            self._stored = df.size_bytes * (p + len(digits) - 1) // df.count
            yield digits.encode("ascii")

    # -- life cycle ----------------------------------------------------------
    def close(self) -> None:
        """Close the file (a :class:`DigitFile` from :meth:`finish` keeps it open until its own close)."""
        self._gen = None
        if self._df is not None:
            self._df.close()
            self._df = None
            self._src = None
        if self._src is not None:
            self._src.close()
            self._src = None

    def __enter__(self) -> DigitStream:
        return self

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None
    ) -> None:
        self.close()  # after finish() the DigitFile owns the file: nothing left to close here

    def __repr__(self) -> str:
        return f"DigitStream({self.path!r}, base={self.base}, digits_read={self.digits_read})"


def open_stream(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    strict_labels: bool = False,
    labels: str | None = None,
) -> DigitStream:
    """Open a digit file read-only for one sequential read (detection only; no pass yet).

    The arguments are those of :func:`open_digit_file`; the digits come from
    :meth:`DigitStream.take` or :meth:`DigitStream.chunks`, checked as they are
    read, and :meth:`DigitStream.finish` gives the :class:`DigitFile` at the end.
    """
    if base is not None and base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base!r}")
    if labels not in (None, "start", "end", "none"):
        raise UsageError(f"labels must be start, end or none, got {labels!r}")
    src = open_source(path)
    try:
        return DigitStream(
            src, base=base, constant=constant, packed=packed, strict_labels=strict_labels, labels=labels
        )
    except BaseException:
        src.close()
        raise
