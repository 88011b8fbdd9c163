"""The read-and-check pass: every byte of a text file read once, validated, its digits handed out.

:class:`ReadPass` runs the compiled loops (``loops.py``: ``extract`` for
unlabelled chunks, ``extract_labelled`` for plain labelled lines, and
``first_mismatch`` for a chunk that follows the regular unit when no digits are
wanted) and builds the same :class:`~spotcheck.digitfile.passrules.IndexResult`
as the index pass's own loops, with the same findings and errors
(``passrules.py``).  Labelled lines are taken by the loop while each has the
plain form of its layout and a label that agrees; any other line (a label that
disagrees, a line without one, a stray byte) is read by the line rule
(``LabelSyntax.split_labels`` and ``passrules.LabelCheck``).

Two callers: ``DigitStream`` (``stream.py``), which hands the digits out, and
the index pass (``index.build_index``), which runs it without handing digits out
(:func:`index_pass`) for every layout the loops read (``loops.reads``).
"""

from __future__ import annotations

import os
from array import array
from collections.abc import Iterator

from spotcheck.digitfile import loops
from spotcheck.digitfile import passrules as rules
from spotcheck.digitfile.charsets import WS, allowed_set, class_table, digit_set, norm_table
from spotcheck.digitfile.detect import Detection
from spotcheck.digitfile.loops import LoopLayout
from spotcheck.digitfile.passrules import (
    TAIL_DIGITS,
    IndexResult,
    Progress,
    check_line,
    finish_labels,
    label_checks,
    new_result,
    read_whole_lines,
    split_for_pass,
    stray_error,
)
from spotcheck.digitfile.source import ByteSource

__all__ = ["ReadPass", "index_pass", "STREAM_CHUNK_BYTES"]

# --- tuning -----------------------------------------------------------------
STREAM_CHUNK_BYTES = 4 << 20  # bytes read and checked per step of the pass (labelled lines: passrules')
# ---------------------------------------------------------------------------


class ReadPass:
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
        step = rules.INDEX_STEP  # bytes between index entries: the index pass's own setting
        d1 = len(plan.seg_digits)
        tail = plan.seg_digits[-TAIL_DIGITS:].upper()
        res = new_result(plan)
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
            if regular and not last and not self.emit and loops.first_mismatch(data, units, table) < 0:
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
                nd, stray, nl, ok = loops.extract(blk, table, norm, out, k, ask)
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
        step = rules.INDEX_STEP  # bytes between index entries: the index pass's own setting
        base, syntax, meaning = plan.base, plan.syntax, plan.meaning
        assert base is not None and syntax is not None and meaning is not None
        name = os.path.basename(src.path)
        checks = label_checks(plan, self.strict, name)  # one per label column, as the index pass keeps them
        d1 = len(plan.seg_digits)
        res = new_result(plan)
        tail = plan.seg_digits[-TAIL_DIGITS:].upper()
        if d1 and self.emit:
            yield plan.seg_digits.upper()
        record = LoopLayout.for_plan(plan)
        assert record is not None and len(checks) == len(syntax.ends)
        layout = record.codes()
        table, norm, allowed = class_table(base), norm_table(base), allowed_set(base)
        digit_bytes = digit_set(base)
        off, pos, line = plan.seg_end, d1, plan.first_line_no + 1
        last_index = -step
        size = rules.LABELLED_CHUNK_BYTES  # the index pass's own limit on a line, too
        out = bytearray(size)
        while True:
            data = read_whole_lines(src, off, size, name)
            if not data:
                break
            view = memoryview(data)
            lo = k = 0
            while lo < len(data):
                used, nd, lines, _stop, entries, last_index = loops.extract_labelled(
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
                found, b0, b1, how = split_for_pass(
                    syntax, meaning, raw[:-1] if raw.endswith(b"\r") else raw, pos, digit_bytes
                )
                body = raw[b0:b1]
                bad = body.translate(None, allowed)
                if bad:
                    at = lo + b0 + body.find(bad[:1])
                    raise stray_error(src, plan, base, off + at, data[at])
                digits = body.translate(norm, WS)
                check_line(checks, found, pos, len(digits), line, off + lo, how)
                if how is not None:
                    res.recovered.append(off + lo)
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
        finish_labels(res, checks, plan)
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
    if loops.LOOPS != "c" or not loops.reads(plan):
        return None
    one = ReadPass(src, plan, strict_labels, emit=False, progress=progress)
    for _ in one.run():
        pass
    return one.scan
