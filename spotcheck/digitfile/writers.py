"""What general-purpose software writes around the digits, seen as blanks one byte for one.

Calculators, computer-algebra systems, word processors and printers put bytes
among the digits that are neither digits nor the model's separators.  Each rule
here names such bytes exactly and :class:`Rewritten` shows them to every later
reader (detection, both passes, the random-access read) as blanks, one byte
for one, so byte offsets, lines and columns stay the file's own and every other
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
  the first of them its first byte, so a digit line with a stray byte, or run
  together with the footer, is never taken for text;
* **page breaks**: a form feed, and a text line (the same footer rule) on the
  line a form feed starts or right after a line holding only form feeds.

:func:`writer_rules` reads the head (and, for an uncompressed file or one whose
content the head holds, the tail) and returns the rules that apply, or None
when none does: a file without any of these bytes is read exactly as before,
at full speed.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from spotcheck.digitfile.source import ByteSource

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
_CONTROLS = bytes(b for b in range(32) if b != 9)
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
_OPENING = re.compile(rb"\A[ \t]*((?:[A-Za-z_][A-Za-z0-9_.]*\()?[\[({'\"]+)(?=[0-9A-Fa-f])")
_HEX_LETTER = re.compile(rb"[A-Fa-f]")


def _is_text_line(line: bytes) -> bool:
    """A footer or page header line: not empty, with ``MIN_FOOTER_MARKS`` bytes no digit can be."""
    s = line.lstrip(b"\f").strip(b" \t\r")
    if len(s) > MAX_PAGE_HEADER or s.translate(None, _CONTROLS) != s:
        return False  # a long line, or one with line breaks or feeds inside, is no text line
    if s[:1].translate(None, _TEXT_MARKS):
        return False  # text starts as text: a digit line run together with a footer is no footer
    return len(s) - len(s.translate(None, _TEXT_MARKS)) >= MIN_FOOTER_MARKS


@dataclass(frozen=True)
class WriterRules:
    """Which bytes :class:`Rewritten` shows as blanks."""

    continuation: bool
    typeset: bool
    page_breaks: bool
    blank_spans: tuple[tuple[int, int], ...]
    """Byte ranges ``[start, end)`` of the content shown as blanks (line breaks kept):
    the opening and closing marks and the footer lines."""

    def names(self) -> list[str]:
        """Short names of the rules in force (for ``inspect``'s notes)."""
        out = []
        if self.continuation:
            out.append("continuation lines")
        if self.typeset:
            out.append("typeset separators")
        if self.page_breaks:
            out.append("page breaks")
        if self.blank_spans:
            out.append("marks or footer text around the digits")
        return out


def writer_rules(src: ByteSource, head: bytes, eof: bool) -> WriterRules | None:
    """The rules the file needs, from its head and (when it can be read cheaply) its tail."""
    continuation = bool(_CONTINUATION.search(head))
    typeset = bool(_TYPESET.search(head))
    page_breaks = b"\f" in head
    spans: list[tuple[int, int]] = []
    if eof:
        tail, tail_at = head, 0
    elif src.compression is None:
        tail_at = max(0, src.size_bytes - TAIL_BYTES)
        tail = src.read_at(tail_at, TAIL_BYTES)
    else:
        tail, tail_at = b"", 0
    if tail:
        seen = WriterRules(continuation, typeset, False, ())  # the tail as the passes will see it
        closing = _tail_spans(Rewritten._apply(seen, tail, tail_at), tail_at, head, spans)
        if closing:
            m = _OPENING.match(head[: head.find(b"\n") if b"\n" in head else len(head)])
            if m:
                spans.append((m.start(1), m.end(1)))
    if not (continuation or typeset or page_breaks or spans):
        return None
    return WriterRules(continuation, typeset, page_breaks, tuple(sorted(spans)))


def _tail_spans(tail: bytes, tail_at: int, head: bytes, spans: list[tuple[int, int]]) -> bool:
    """Add the footer lines' and the closing mark's spans; True when the mark closes a bracket or quote."""
    lines = tail.split(b"\n")
    starts = [0]
    for ln in lines[:-1]:
        starts.append(starts[-1] + len(ln) + 1)
    i = len(lines) - 1
    while i > 0 and (not lines[i].strip(b" \t\r") or _is_text_line(lines[i])):
        i -= 1  # footer text and blank lines, from the end
    if i == 0 and tail_at > 0:
        return False  # the tail is all text: not a footer this rule can vouch for
    if i < len(lines) - 1:
        first_footer = tail_at + starts[i + 1]
        end = tail_at + len(tail)
        if any(_is_text_line(ln) for ln in lines[i + 1 :]):
            spans.append((first_footer, end))
    last = lines[i]
    m = _MARK.search(last)
    if not m or not m.group(1):
        return False
    mark = m.group(1)
    if _LETTER_EXPONENT.search(mark):
        lines = [ln for ln in head.split(b"\n") if not _is_text_line(ln)]
        digit_lines = [ln[: ln.rfind(mark)] if mark in ln else ln for ln in lines]
        decimal_digits = sum(len(ln) - len(ln.translate(None, b"0123456789")) for ln in digit_lines)
        if any(_HEX_LETTER.search(ln) for ln in digit_lines) or decimal_digits < MIN_DECIMAL_EVIDENCE:
            # A hex file, or too few digits to tell: 'e0' or 'b0' there may be digits.
            m = _MARK_NO_LETTER_EXPONENT.search(last)
            if not m or not m.group(1):
                return False
            mark = m.group(1)
    start = tail_at + starts[i] + m.start(1)
    spans.append((start, start + len(mark)))
    return any(c in mark for c in b"])}'\"")


class Rewritten:
    """A text source whose writer marks (:class:`WriterRules`) read as blanks, one byte for one."""

    def __init__(self, src: ByteSource, rules: WriterRules) -> None:
        self._inner = src
        self.rules = rules
        self.path, self.size_bytes, self.compression = src.path, src.size_bytes, src.compression

    def read_at(self, offset: int, n: int) -> bytes:
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
        has_feed = b"\f" in ln
        only_feeds = has_feed and not ln.replace(b"\f", b"").strip(b" \t\r")
        whole = not (k == 0 and cut_first) and k != last and len(ln) <= MAX_PAGE_HEADER
        if (has_feed or after_feed) and whole and _is_text_line(ln):
            lines[k] = re.sub(rb"[^\r]", b" ", ln)
        elif has_feed:
            lines[k] = ln.replace(b"\f", b" ")
        after_feed = only_feeds
    return b"\n".join(lines)
