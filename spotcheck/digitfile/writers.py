"""What general-purpose software writes around the digits, seen as blanks one byte for one.

Calculators, computer-algebra systems, word processors and printers put bytes
among the digits that are neither digits nor the model's separators.  Each rule
here names such bytes exactly and :class:`Rewritten` shows them to every later
reader (detection, both passes, the random-access read) as blanks, one byte
for one (the mark after the last digit and footer lines end the content
instead), so byte offsets, lines and columns stay the file's own and every other
byte is still judged by the layout model:

* **continuation lines**: a backslash right before a line break (``...5923\\``),
  as a command-line calculator breaks long numbers; any other backslash stays
  a stray byte;
* **typeset separators**: no-break space, thin space, narrow no-break space and
  figure space in UTF-8 (``C2 A0``, ``E2 80 89``, ``E2 80 AF``, ``E2 80 87``);
* **marks after the digits**: at the end of the last digit line, a precision
  suffix (a backtick and a number, ```50.``), an exponent of zero (``e0``,
  ``E+00``, ``b0``, ``*^0``; another exponent moves the point and is refused as
  a stray byte; a letter exponent only after ``MIN_DECIMAL_EVIDENCE`` decimal
  digits and no hex letter in the head, where it cannot be hex digits by chance), closing brackets and quotes, and with a closing
  mark the matching opening at the start of the first line (``mpf('`` or ``[``);
* **footer lines**: text lines after the last digit line (``-- end --``,
  ``Total: 20000 digits``), each with at least ``MIN_FOOTER_MARKS`` letters that
  are no hex digit or punctuation no digit line holds (``-``, ``=``, ``#``, ...),
  the first of them its first byte, printable ASCII only, so a digit line with a
  stray byte, or run together with the footer, is never taken for text;
* **page breaks**: form feeds at the start of a line, and a text line (the same footer rule, and
  ending as text: ``Page 2 of the club's run``, not ``Page 2``, so a page header
  run together with the next digit line is never one) on the line a form feed
  starts or right after a line holding only form feeds;
* **tables**: rows ``position,digits`` or ``position;digits`` (every row of the
  head, at least ``MIN_ROWS``, a header row such as ``position,digit`` allowed):
  the one ``,`` or ``;`` after the position, read as the label separator ``:``
  (it explains a byte digits cannot, as ``:`` does), so the rows are start labels
  by the layout model's own evidence rule;
* **a dump's text column**: ``|$?j......|`` at the end of each line of a dump of
  bytes as hex pairs, blanked only where it renders exactly that line's bytes
  (printable ASCII as itself, any other byte as ``.``).

:func:`writer_rules` reads the head (and, for an uncompressed file or one whose
content the head holds, the tail) and returns the rules that apply, or None
when none does: a file without any of these bytes is read exactly as before,
at full speed.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from spotcheck.digitfile.source import ByteSource
from spotcheck.digitfile.syntax import SEPARATORS

__all__ = ["Rewritten", "WriterRules", "writer_rules", "TAIL_BYTES", "TYPESET_SEPARATORS"]

# --- tuning -----------------------------------------------------------------
TAIL_BYTES = 64 * 1024  # bytes at the end of the content examined for marks and footer lines
MIN_DECIMAL_EVIDENCE = 64  # decimal digits without a hex letter before 'e0' or 'b0' is read as a mark
MIN_FOOTER_MARKS = 3  # bytes a footer or page header line holds that cannot be digits
CONTEXT = 512  # bytes read on either side of a window so a rule sees its whole line
MAX_PAGE_HEADER = 200  # longest footer or page header line (a line the window may cut is never one)

TYPESET_SEPARATORS = re.compile(rb"\xc2\xa0|\xe2\x80[\x87\x89\xaf]")
_TYPESET = TYPESET_SEPARATORS
_CONTINUATION = re.compile(rb"\\(?=\r?\n)")
_DIGIT_BYTES = b"0123456789ABCDEFabcdef"
_NOT_PRINTABLE = bytes(b for b in range(256) if b != 9 and not 0x20 <= b < 0x7F)
# Bytes that make a line text: letters that are no hex digit, and punctuation no digit line holds.
_TEXT_MARKS = bytes(sorted(set(b"GHIJKLMNOPQRSTUVWXYZghijklmnopqrstuvwxyz-=*#_~/,;!?()[]<>@%&+")))
# A mark after the last digit: precision suffix, exponent zero, closing brackets and quotes.
_MARK = re.compile(
    rb"(?<=[0-9A-Fa-f.])((?:`[0-9]*\.?[0-9]*)?(?:(?:[eEbB]|\*\^)[+-]?0+)?[\])}'\"]*)[ \t\r]*\Z"
)
_MARK_NO_LETTER_EXPONENT = re.compile(
    rb"(?<=[0-9A-Fa-f.])((?:`[0-9]*\.?[0-9]*)?(?:\*\^[+-]?0+)?[\])}'\"]*)[ \t\r]*\Z"
)
_LETTER_EXPONENT = re.compile(rb"[eEbB][+-]?0+")
# An opening mark: a call's name and parenthesis (its quote may be missing: ``mpf(3.14...')``
# still explains every byte), or brackets and quotes alone.
_OPENING = re.compile(rb"\A[ \t]*([A-Za-z_][A-Za-z0-9_.]*\([\[({'\"]*|[\[({'\"]+)(?=[0-9A-Fa-f])")
_HEX_LETTER = re.compile(rb"[A-Fa-f]")
_ENDS_AS_ROW = re.compile(rb"[0-9]{1,18}[ \t]*[,;][ \t]*[0-9A-Fa-f]{1,64}[ \t\r]*\Z")
# The end of a text line run together with a digit line: 8 digits or more, perhaps an end label.
_ENDS_AS_DIGITS = re.compile(rb"[0-9A-Fa-f]{8,}(?:%s[0-9A-Fa-f]+)?[ \t]*\Z" % SEPARATORS["mark"])
MIN_PAGE_LINE = 8  # shortest digit line among which page breaks are read
MIN_ROWS = 3  # rows of a table or dump seen before its rule applies
# A table row: a position, one ',' or ';' (blanks around it), the digits; short enough that a
# window always sees its start.
_TABLE_ROW = re.compile(rb"(?m)^([ \t]*[0-9]{1,18}[ \t]*)[,;]([ \t]*[0-9A-Fa-f]{1,64}[ \t\r]*)$")
# A dump line: offset, bytes as hex pairs, a text column between bars (at most 16 bytes).
_DUMP_ROW = re.compile(
    rb"(?m)^([0-9a-fA-F]{4,16}:?[ \t]+)((?:[0-9a-fA-F]{2}[ \t]{1,2}){1,16})[ \t]*\|([\x20-\x7e]{1,16})\|[ \t\r]*$"
)


def _is_text_line(line: bytes) -> bool:
    """A footer or page header line: not empty, with ``MIN_FOOTER_MARKS`` bytes no digit can be."""
    s = line.lstrip(b"\f").strip(b" \t\r")
    if len(s) > MAX_PAGE_HEADER or s.translate(None, _NOT_PRINTABLE) != s:
        return False  # a long line, or one with line breaks or feeds inside, is no text line
    if s[:1].translate(None, _TEXT_MARKS):
        return False  # text starts as text: a digit line run together with a footer is no footer
    if _ENDS_AS_DIGITS.search(s):
        return False  # a page header that ends in a digit line's worth of digits lost its line break
    return _text_marks(s) >= MIN_FOOTER_MARKS


def _text_marks(line: bytes) -> int:
    """Bytes of ``line`` that only text holds (letters that are no hex digit, punctuation)."""
    return len(line) - len(line.translate(None, _TEXT_MARKS))


@dataclass(frozen=True)
class WriterRules:
    """Which bytes :class:`Rewritten` shows as blanks."""

    continuation: bool
    typeset: bool
    page_breaks: bool
    blank_spans: tuple[tuple[int, int], ...]
    table: bool = False
    """Rows ``position,digits`` or ``position;digits``: the one separator after the position."""
    dump_text: bool = False
    """Dump lines ending in a text column between bars that renders the line's bytes."""
    end: int | None = None
    """The content ends here: the mark after the last digit and the footer lines are cut off."""
    """Byte ranges ``[start, end)`` of the content shown as blanks (line breaks kept):
    the opening mark."""

    def names(self) -> list[str]:
        """Short names of the rules in force (for ``inspect``'s notes)."""
        out = []
        if self.continuation:
            out.append("continuation lines")
        if self.typeset:
            out.append("typeset separators")
        if self.page_breaks:
            out.append("page breaks")
        if self.blank_spans or self.end is not None:
            out.append("marks or footer text around the digits")
        if self.table:
            out.append("a table of positions and digits")
        if self.dump_text:
            out.append("a dump's text column")
        return out


def writer_rules(src: ByteSource, head: bytes, eof: bool) -> WriterRules | None:
    """The rules the file needs, from its head and (when it can be read cheaply) its tail."""
    continuation = bool(_CONTINUATION.search(head))
    typeset = bool(_TYPESET.search(head))
    page_breaks = b"\f" in head and _long_lines(head)
    table = _all_rows(head, eof, _TABLE_ROW)
    dump_text = _all_rows(head, eof, _DUMP_ROW) and _DUMP_ROW.sub(_blank_text_column, head) != head
    spans: list[tuple[int, int]] = []
    end: int | None = None
    if eof:
        tail, tail_at = head, 0
    elif src.compression is None:
        tail_at = max(0, src.size_bytes - TAIL_BYTES)
        tail = src.read_at(tail_at, TAIL_BYTES)
    else:
        tail, tail_at = b"", 0
    if tail:
        seen = WriterRules(continuation, typeset, False, ())  # the tail as the passes will see it
        end, closing = _tail_end(Rewritten._apply(seen, tail, tail_at), tail_at, head)
        if closing:
            m = _OPENING.match(head[: head.find(b"\n") if b"\n" in head else len(head)])
            if m:
                spans.append((m.start(1), m.end(1)))
    if not (continuation or typeset or page_breaks or spans or table or dump_text or end is not None):
        return None
    return WriterRules(continuation, typeset, page_breaks, tuple(sorted(spans)), table, dump_text, end)


def _long_lines(head: bytes) -> bool:
    """True when every digit line of the head but the last holds ``MIN_PAGE_LINE`` bytes or more:
    page breaks are read only between such lines (among lines of a digit or two, a damaged
    first line beside a blanked page header was once taken for header text)."""
    lines = [ln.strip(b" \t\r") for ln in head.split(b"\n")[:-1]]
    digit_lines = [
        ln for ln in lines if ln and not ln.startswith(b"\f") and _text_marks(ln) < MIN_FOOTER_MARKS
    ]
    return all(len(ln) >= MIN_PAGE_LINE for ln in digit_lines[:-1])


def _all_rows(head: bytes, eof: bool, row: re.Pattern[bytes]) -> bool:
    """True when every line of the head's body (after any text lines, the last line perhaps cut)
    is a row of this form, and there are at least ``MIN_ROWS``."""
    lines = [ln for ln in head.split(b"\n")[: None if eof else -1] if ln.strip(b" \t\r")]
    while (
        lines
        and not row.fullmatch(lines[0])
        and _text_marks(lines[0]) >= MIN_FOOTER_MARKS
        and not _ENDS_AS_ROW.search(lines[0])  # a header row that swallowed row 1 (lost line break)
    ):
        lines.pop(0)  # header lines, a header row "position,digit"
    while lines and not row.fullmatch(lines[-1]) and _text_marks(lines[-1]) >= MIN_FOOTER_MARKS:
        lines.pop()  # footer lines
    if lines and not row.fullmatch(lines[-1]):
        lines.pop()  # the last line may differ: a dump's final offset, a row cut by the head
    return len(lines) >= MIN_ROWS and all(row.fullmatch(ln) for ln in lines)


def _blank_text_column(m: re.Match[bytes]) -> bytes:
    """A dump line with its text column as blanks when the column renders the line's bytes."""
    line, hexes, text = m.group(0), m.group(2), m.group(3)
    data = bytes.fromhex(hexes.decode("ascii").replace(" ", ""))
    shown = bytes(b if 0x20 <= b < 0x7F else 0x2E for b in data)
    if shown != text:
        return line
    a, b = m.span(3)
    a, b = a - m.start() - 1, b - m.start() + 1  # the bars too
    return line[:a] + b" " * (b - a) + line[b:]


def _tail_end(tail: bytes, tail_at: int, head: bytes) -> tuple[int | None, bool]:
    """``(where the content ends, or None, whether a closing bracket or quote ends it)``: before
    the mark after the last digit, else before the footer lines."""
    lines = tail.split(b"\n")
    starts = [0]
    for ln in lines[:-1]:
        starts.append(starts[-1] + len(ln) + 1)
    i = len(lines) - 1
    while i > 0 and (not lines[i].strip(b" \t\r") or _is_text_line(lines[i])):
        i -= 1  # footer text and blank lines, from the end
    if i == 0 and tail_at > 0:
        return None, False  # the tail is all text: not a footer this rule can vouch for
    end = None
    if i < len(lines) - 1 and any(_is_text_line(ln) for ln in lines[i + 1 :]):
        end = tail_at + starts[i + 1]
    last = lines[i]
    m = _MARK.search(last)
    if not m or not m.group(1):
        return end, False
    mark = m.group(1)
    if _LETTER_EXPONENT.search(mark):
        lines = [ln for ln in head.split(b"\n") if _text_marks(ln) < MIN_FOOTER_MARKS]
        digit_lines = [ln[: ln.rfind(mark)] if mark in ln else ln for ln in lines]
        decimal_digits = sum(len(ln) - len(ln.translate(None, b"0123456789")) for ln in digit_lines)
        if any(_HEX_LETTER.search(ln) for ln in digit_lines) or decimal_digits < MIN_DECIMAL_EVIDENCE:
            # A hex file, or too few digits to tell: 'e0' or 'b0' there may be digits.
            m = _MARK_NO_LETTER_EXPONENT.search(last)
            if not m or not m.group(1):
                return end, False
            mark = m.group(1)
    return tail_at + starts[i] + m.start(1), any(c in mark for c in b"])}'\"")


class Rewritten:
    """A text source whose writer marks (:class:`WriterRules`) read as blanks, one byte for one."""

    def __init__(self, src: ByteSource, rules: WriterRules) -> None:
        self._inner = src
        self.rules = rules
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression

    def read_at(self, offset: int, n: int) -> bytes:
        if self.rules.end is not None:
            n = max(0, min(n, self.rules.end - offset))
            if n == 0:
                return b""
        lo = max(0, offset - CONTEXT)
        data = self._inner.read_at(lo, offset - lo + n + CONTEXT)
        out = self._rewrite(data, lo)
        return out[offset - lo : offset - lo + n]

    def _rewrite(self, data: bytes, at: int) -> bytes:
        return self._apply(self.rules, data, at)

    @staticmethod
    def _apply(r: WriterRules, data: bytes, at: int) -> bytes:
        if r.continuation:
            data = _CONTINUATION.sub(b" ", data)
        if r.typeset:
            data = _TYPESET.sub(lambda m: b" " * len(m.group()), data)
        if r.page_breaks and b"\f" in data:
            data = _blank_page_headers(data, at > 0)
        if r.table:
            data = _TABLE_ROW.sub(lambda m: m.group(1) + b":" + m.group(2), data)
        if r.dump_text:
            data = _DUMP_ROW.sub(_blank_text_column, data)
        for a, b in r.blank_spans:
            if a < at + len(data) and b > at:
                i, j = max(a, at) - at, min(b, at + len(data)) - at
                piece = data[i:j]
                data = data[:i] + re.sub(rb"[^\n]", b" ", piece) + data[j:]
        return data

    def stored_bytes_done(self, offset: int) -> int:
        return self._inner.stored_bytes_done(offset)

    def check_unchanged(self) -> None:
        self._inner.check_unchanged()

    def close(self) -> None:
        self._inner.close()


def _blank_page_headers(data: bytes, cut_first: bool) -> bytes:
    """Form feeds as blanks, and the page header line a form feed starts or comes before.

    A header line is at most ``MAX_PAGE_HEADER`` bytes and never the window's first line
    when the window may have cut it (``cut_first``), nor its last: every read of the file
    sees the lines around a requested byte whole, so every read decides alike."""
    lines = data.split(b"\n")
    after_feed = False
    last = len(lines) - 1
    for k, ln in enumerate(lines):
        has_feed = ln.startswith(b"\f")  # a form feed starts its line; anywhere else it is a stray byte
        only_feeds = has_feed and not ln.lstrip(b"\f").strip(b" \t\r")
        whole = not (k == 0 and cut_first) and k != last and len(ln) <= MAX_PAGE_HEADER
        ends_as_text = not ln.rstrip(b" \t\r")[-1:].translate(None, _TEXT_MARKS)
        if (has_feed or after_feed) and whole and ends_as_text and _is_text_line(ln):
            lines[k] = re.sub(rb"[^\r]", b" ", ln)
        elif has_feed:
            rest = ln.lstrip(b"\f")
            lines[k] = b" " * (len(ln) - len(rest)) + rest
        after_feed = only_feeds
    return b"\n".join(lines)
