"""Detection: which reading of a text digit file explains every byte of its head.

A text digit file is

* optional header lines: blank, ``#`` comments, or free text (a line that is
  not mostly digit characters; :func:`_is_header`);
* then digit lines, each ``[start label][separator] body [separator][end label]``:
  the body is digits in groups separated by spaces or tabs, the first digit
  line may begin with an integer part and a radix point (``3.``), and lines end
  in LF, CRLF or CR;
* a label is a number that counts digits or bytes at the start or end of the
  line, or at both; what labels count and how they are written is
  ``syntax.py``'s (:class:`~spotcheck.digitfile.syntax.LabelMeaning`,
  :class:`~spotcheck.digitfile.syntax.LabelSyntax`), how the readings compete is
  ``readings.py``'s, and what kind of content a file holds (text, packed hex,
  UTF-16) is ``content.py``'s.

:func:`detect_text` finds the header, applies every reading to the first
``EXAMINE_LINES`` digit lines (``readings.choose_reading``), then settles the
base (hex letters, or enough decimal digits), the integer part, the first line's
digits and labels, and the repeating unit of a regular layout, and returns them
as a :class:`Detection`, the plan every pass follows.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

from spotcheck.digitfile.charsets import DEC, HEX, HEX_LETTERS, class_table
from spotcheck.digitfile.content import newline_of
from spotcheck.digitfile.readings import Reading, choose_reading
from spotcheck.digitfile.slices import place
from spotcheck.digitfile.syntax import BOTH_SYNTAXES, SYNTAXES, LabelMeaning, LabelSyntax
from spotcheck.errors import DigitFileError, UsageError

__all__ = [
    "Detection",
    "detect_text",
    "HEAD_BYTES",
    "LABEL_CHOICES",
    "check_labels",
]

# --- tuning -----------------------------------------------------------------
HEAD_BYTES = 256 * 1024  # bytes of content examined before the pass
MAX_HEADER_LINES = 100  # longest header accepted before the digits
EXAMINE_LINES = 64  # digit lines every reading must explain
MAX_FIRST_LINE = 64 * 1024  # a first line longer than this is read as one long line
HEAD_DIGITS = 64  # leading digits kept for guessing the constant
MIN_HEX_EVIDENCE = 200  # decimal-only digits this many long cannot be hex by chance
DIGIT_LINE_SHARE = 0.8  # a line of 8+ bytes is a digit line when this share of its non-blank bytes are digits
LABEL_CHOICES = (None, "start", "end", "both", "none")  # what a caller may say about the labels

_DIGITISH = bytes(HEX + b".:|\\")  # a backslash: a continuation mark a damaged line may keep (writers.py)


def check_labels(labels: object) -> None:
    """Refuse a ``labels`` argument that is not one of ``LABEL_CHOICES`` (every opener asks this)."""
    if labels not in LABEL_CHOICES:
        raise UsageError(f"labels must be start, end, both or none, got {labels!r}")


@dataclass
class Detection:
    """The reading detection kept; the index pass and the reader follow it."""

    base: int | None
    """10 or 16, or None when only the constant can tell (short file, no letters)."""
    base_how: str
    explicit_base: bool
    integer_part: str | None
    header_lines: int
    first_line_no: int
    labels: str | None
    """``"start"``/``"end"``/``"both"`` for labels on every line (``"both"``: at
    each end), ``"first-line"`` for a label on the first digit line only, None
    for no labels."""
    syntax: LabelSyntax | None
    """How the labels of the pass are written (None when the pass sees no labels)."""
    meaning: LabelMeaning | None
    """What the labels count (for ``"both"``: the start labels)."""
    first_label: int | None
    first_label_text: str | None
    digits_offset: int
    seg_end: int
    """The pass starts here: after the first digit line, or at ``digits_offset``
    for a file that is one long line."""
    seg_cols: list[int]
    """Byte offsets of the digits between ``digits_offset`` and ``seg_end``."""
    seg_digits: bytes
    head_digits: bytes
    """Up to ``HEAD_DIGITS`` leading digits after the point, as in the file."""
    sample_digits: int
    template: bytes | None
    """Character classes of one repeating unit (a line, or a group when the file
    has no line breaks) for the regular-layout check; None for labelled files."""
    newline: str | None
    """``"\\n"``, ``"\\r\\n"`` or ``"\\r"``; None without line breaks.  For
    ``"\\r"`` the reader translates CR to LF (one byte for one, offsets kept)."""
    letter_case: str | None
    whole_file_in_head: bool
    end_meaning: LabelMeaning | None = None
    """For ``"both"``: what the end labels count (always a ``through`` meaning)."""
    first_end_label_text: str | None = None
    """For ``"both"``: the first digit line's end label as written."""
    notes: list[str] = field(default_factory=list)
    first_positions: tuple[int, ...] = (1,)
    """Where the file's first digit may lie in the expansion: one position, or the two a start
    label leaves open (0- or 1-based); see ``slices.py``."""
    first_how: str = "start"
    """How: ``start`` (the file's start is digit 1), ``given`` (the caller said) or ``labels``."""


def _is_header(text: bytes) -> bool:
    s = text.strip()
    if not s or s.startswith(b"#"):
        return True
    s = s.translate(None, b" \t")
    share = (len(s) - len(s.translate(None, _DIGITISH))) / len(s)
    # One foreign byte in a line of 8 or more leaves it above DIGIT_LINE_SHARE: a digit line with a
    # stray character.  A shorter line must be mostly foreign to be text.
    return share < (DIGIT_LINE_SHARE if len(s) >= 8 else 0.5)


def detect_text(
    head: bytes,
    eof: bool,
    path: str,
    base: int | None,
    labels: str | None = None,
    *,
    first_position: int | None = None,
) -> Detection:
    """Decide the layout of a text digit file from its first bytes.

    ``head`` is the start of the (decompressed) content, ``eof`` says whether
    it is the whole content.  ``base`` is the caller's explicit base or None;
    ``labels`` (``"start"``, ``"end"``, ``"both"``, ``"none"`` or None)
    restricts the readings tried.  A CR-only file must be given with CR already turned into LF.
    ``first_position`` is the caller's word on where the file begins (``slices.place``).
    """
    name = os.path.basename(path)
    check_labels(labels)
    if not head.strip():
        raise DigitFileError(
            f"{name}: the file is empty" if not head else f"{name}: the file holds only whitespace"
        )
    start = 3 if head.startswith(b"\xef\xbb\xbf") else 0  # UTF-8 byte-order mark
    newline = newline_of(head)
    lines: list[tuple[int, bytes]] = []
    pos = start
    while pos < len(head) and len(lines) < MAX_HEADER_LINES + EXAMINE_LINES + 2:
        nl = head.find(b"\n", pos)
        if nl < 0:
            if eof or not lines:
                lines.append((pos, head[pos:]))
            break
        lines.append((pos, head[pos:nl]))
        pos = nl + 1
    first = 0
    while first < len(lines) and _is_header(lines[first][1]):
        first += 1
    if first >= len(lines) or first > MAX_HEADER_LINES:
        raise DigitFileError(
            f"{name}: no digits found: none of the first {min(len(lines), MAX_HEADER_LINES + 1)} lines "
            "is a digit line (expected hex or decimal digits after an optional header)"
        )
    line_off, line = lines[first]
    if first:
        _check_merged_header(lines, first, name)
    ends_in_newline = line_off + len(line) < len(head)
    long_line = len(line) > MAX_FIRST_LINE or not ends_in_newline and not eof
    examined = lines[: first + 1] if long_line else lines[: first + EXAMINE_LINES]
    if long_line:
        syntaxes: list[LabelSyntax | None] = [None]
    else:
        syntaxes = [None] + [s for s in SYNTAXES + BOTH_SYNTAXES if labels in (None, s.where)]
        if labels == "none":
            syntaxes = [None]
        elif labels in ("start", "end", "both"):
            syntaxes = syntaxes[1:]
    if long_line:
        # Only the head of a very long line is here; the pass validates the rest.
        cut = len(line)
        examined = [(line_off, line[:cut])]
    if base == 10:  # hex labels are byte offsets of hex digits
        syntaxes = [s for s in syntaxes if s is None or s.radix == 10]
    chosen = choose_reading(syntaxes, examined, first, labels, name)
    syntax = chosen.syntax
    first_label = first_label_text = first_end_label_text = None
    first_text = line[:-1] if line.endswith(b"\r") else line
    if syntax is not None:
        if syntax.where == "both":
            (lab, end_lab), _, _ = syntax.split_labels(first_text)
            first_end_label_text = end_lab.decode("ascii") if end_lab is not None else None
        else:
            lab, _, _ = syntax.split_first(first_text)
        if lab is not None:
            first_label, first_label_text = syntax.value(lab), lab.decode("ascii")
    body_off, body_end = chosen.body
    integer_part = None
    m = re.compile(rb"[ \t]*").match(head, body_off)
    digits_offset = m.end() if m else body_off
    if chosen.integer_part is not None:
        integer_part = chosen.integer_part.decode().upper().lstrip("0") or "0"
        digits_offset = head.index(b".", body_off) + 1
    if long_line:
        seg_end, seg = digits_offset, b""
        newline = None if b"\n" not in head else newline
    else:
        seg_end = line_off + len(line) + (1 if ends_in_newline else 0)
        seg = head[digits_offset:body_end]
        if not ends_in_newline:
            newline = None
    # Digits sample for the base decision and the constant guess.
    if long_line:
        sample = head[digits_offset:].translate(None, b" \t\r\n")
        mm = re.compile(rb"[0-9A-Fa-f]*").match(sample)
        sample = mm.group() if mm else b""
    else:
        pieces = [seg]
        for i, (_off, text) in enumerate(examined):
            if i <= first:
                continue
            text = text[:-1] if text.endswith(b"\r") else text
            _, b0, b1 = syntax.split_labels(text) if syntax else ((), 0, len(text))
            pieces.append(text[b0:b1])
        sample = b"".join(pieces).translate(None, b" \t")
    if not sample:
        raise DigitFileError(f"{name}: no digits after the radix point")
    has_letters = bool(sample.translate(None, DEC))
    seg_all = head[digits_offset:]
    if has_letters and base != 10:
        plain_run = len(sample) - len(sample.lstrip(DEC))
        if plain_run >= MIN_HEX_EVIDENCE:
            at = digits_offset + _first_of(seg_all, HEX_LETTERS)
            raise DigitFileError(
                f"{name}: mixed bases: hex digit {chr(head[at])!r} at byte {at} (line {_line_no(head, at)}), "
                f"but the {plain_run} digits before it are all decimal"
            )
    base_how: str
    if base is not None:
        if base not in (10, 16):
            raise UsageError(f"base must be 10 or 16, got {base}")
        base_how = f"given explicitly ({base})"
        if base == 10 and has_letters:
            at = digits_offset + _first_of(seg_all, HEX_LETTERS)
            raise DigitFileError(
                f"{name}: {chr(head[at])!r} at byte {at} (line {_line_no(head, at)}) is not a decimal digit: "
                "the file looks hexadecimal, but base 10 was requested"
            )
        if base == 16 and not has_letters and len(sample) >= MIN_HEX_EVIDENCE:
            raise DigitFileError(
                f"{name}: none of the first {len(sample)} digits is a letter A-F: the file looks decimal, "
                "but base 16 was requested"
            )
    elif has_letters:
        base, base_how = 16, "detected: hex letters among the digits"
    elif len(sample) >= MIN_HEX_EVIDENCE:
        base, base_how = 10, f"detected: no letter A-F among the first {len(sample)} digits"
    else:
        base, base_how = None, ""
    letter_case = None
    if has_letters:
        up, low = any(c in b"ABCDEF" for c in sample), any(c in b"abcdef" for c in sample)
        letter_case = "mixed" if up and low else ("lower" if low else "upper")
    digits = HEX if (base or 16) == 16 else DEC
    seg_cols = [digits_offset + i for i, c in enumerate(seg) if c in digits]
    seg_digits = bytes(seg[i - digits_offset] for i in seg_cols)
    label_where: str | None = None
    pass_syntax: LabelSyntax | None = None
    if syntax is not None:
        label_where = "first-line" if chosen.first_only else syntax.where
        pass_syntax = None if chosen.first_only else syntax
    rows = _label_rows(chosen) if pass_syntax is not None else []
    placed = place(
        None if pass_syntax is None else pass_syntax.where,
        chosen.meaning if syntax is not None else None,
        chosen.end_meaning if pass_syntax is not None else None,
        rows,
        chosen.steps_ok,
        first_position,
    )
    template = None
    if pass_syntax is None:
        template = _template(head, seg_end, digits_offset, eof, base or 16, newline)
    return Detection(
        base=base,
        base_how=base_how,
        explicit_base=base_how.startswith("given"),
        integer_part=integer_part,
        header_lines=first,
        first_line_no=first + 1,
        labels=label_where,
        syntax=pass_syntax,
        meaning=placed.meaning,
        first_label=first_label,
        first_label_text=first_label_text,
        digits_offset=digits_offset,
        seg_end=seg_end,
        seg_cols=seg_cols,
        seg_digits=seg_digits,
        head_digits=sample[:HEAD_DIGITS],
        sample_digits=len(sample),
        template=template,
        newline=newline,
        letter_case=letter_case,
        whole_file_in_head=eof,
        end_meaning=placed.end_meaning,
        first_positions=placed.positions,
        first_how=placed.how,
        first_end_label_text=first_end_label_text,
    )


def _label_rows(chosen: Reading) -> list[tuple[int | None, int | None, int, int]]:
    """``(label, end label, digits before, digits on the line)`` per examined digit line of a labelled
    reading, the labels' values (the start label of labels at both ends first)."""
    syntax = chosen.syntax
    assert syntax is not None
    first, end = syntax.ends if syntax.where == "both" else (syntax, None)
    ends = chosen.end_labels or [None] * len(chosen.labels)
    return [
        (
            None if lab is None else first.value(lab),
            None if end is None or end_lab is None else end.value(end_lab),
            before,
            nd,
        )
        for (_, lab, before, nd), end_lab in zip(chosen.labels, ends, strict=True)
    ]


_TRAILING_DIGITS = re.compile(rb"[0-9A-Fa-f \t.]*\Z")
_LEADING_DIGITS = re.compile(rb"[0-9A-Fa-f]+")


def _check_merged_header(lines: list[tuple[int, bytes]], first: int, name: str) -> None:
    """Refuse a last header line that ends in digits enough for a digit line.

    A lost line break (or a ``#`` typed over the first digit) makes the first
    digit line part of the header, and every position after it would shift.
    """
    last = lines[first - 1][1].rstrip(b" \t\r")
    body = last.lstrip(b" \t")
    rest = body[1:]
    if (
        body.startswith(b"#")
        and not rest.translate(None, HEX + b". \t")
        and rest.translate(None, DEC) != rest
    ):
        raise DigitFileError(
            f"{name}: line {first} is a comment that holds only digits, just before the digits: "
            "a '#' may have been typed over a digit line"
        )
    shape = _row_shape(lines[first][1])
    if shape is not None and shape.search(last):
        raise DigitFileError(
            f"{name}: line {first} is header text that ends like the digit line after it "
            "(digits and a position label): a line break may be missing, or a digit line damaged there"
        )
    m = _TRAILING_DIGITS.search(last)
    run = len(m.group().translate(None, b" \t.")) if m else 0
    width = len(lines[first][1].translate(None, b" \t\r."))
    lead = _LEADING_DIGITS.match(body)
    if lead and len(lead.group()) >= max(8, width // 2):
        raise DigitFileError(
            f"{name}: line {first} is header text that starts with {len(lead.group())} digits, enough for "
            "a digit line: a line break may be missing after them"
        )
    if run >= max(4, width // 2):
        raise DigitFileError(
            f"{name}: line {first} is header text that ends in {run} digits, enough for a digit line: "
            "a line break may be missing, or a digit line damaged there"
        )


_ROW_TOKEN = re.compile(rb"[0-9A-Fa-f]+|[ \t]+|.")
_ROW_MARKS = b",;:|"


def _row_shape(line: bytes) -> re.Pattern[bytes] | None:
    """The shape of a digit line that carries a label or table separator (``1, 3``, ``...6B90:  40``),
    as a pattern for the end of the header line before it; None for a line of digits alone.

    A header line that ends in that shape is a digit line run into the header by a lost line
    break.  Each run of digits must be at least as long as the line's own, up to 4 (so a time of
    day ``10:00:07`` does not look like a row ``1415926535:10``).
    """
    body = line.strip(b" \t\r")
    if not body or body.translate(None, _ROW_MARKS) == body:
        return None
    digits = rb"[0-9A-Fa-f]" if body.translate(None, HEX_LETTERS) != body else rb"[0-9]"
    parts = []
    for tok in _ROW_TOKEN.findall(body):
        if tok[:1] in b" \t":
            parts.append(rb"[ \t]*")
        elif tok[:1].translate(None, HEX) == b"":
            parts.append(digits + rb"{%d,}" % min(len(tok), 4))
        else:
            parts.append(re.escape(tok))
    return re.compile(b"".join(parts) + rb"[ \t]*\Z")


def _line_no(head: bytes, offset: int) -> int:
    return head.count(b"\n", 0, offset) + 1


def _first_of(data: bytes, chars: bytes) -> int:
    return min((i for i in (data.find(bytes([c])) for c in chars) if i >= 0), default=0)


def _template(
    head: bytes, seg_end: int, digits_offset: int, eof: bool, base: int, newline: str | None
) -> bytes:
    """Classes of the repeating unit that the rest of the file should follow."""
    table = class_table(base)
    if seg_end > digits_offset:
        nl = head.find(b"\n", seg_end)
        if nl >= 0:
            return head[seg_end : nl + 1].translate(table)
        rest = head[seg_end:].rstrip(b" \t\r\n")
        if rest:
            return rest.translate(table) + (b"\r\n" if newline == "\r\n" else b"\n")
        return b"d"
    # One long line: the unit is a group and its separator, or a single digit.
    m = re.compile(rb"[0-9A-Fa-f]+[ \t]+").match(head, seg_end)
    if m and b"\n" not in m.group():
        return m.group().translate(table)
    return b"d"
