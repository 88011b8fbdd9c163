"""The layout model: which reading of a text digit file explains every byte of its head.

This module is the one owner of the layout rules.  A text digit file is

* optional header lines: blank, ``#`` comments, or free text (a line that is
  not mostly digit characters);
* then digit lines, each ``[start label][separator] body [separator][end label]``:
  the body is digits in groups separated by spaces or tabs, the first digit
  line may begin with an integer part and a radix point (``3.``), and lines end
  in LF, CRLF or CR;
* a label is a number (decimal, or hex for byte offsets, at most
  ``MAX_LABEL_CHARS`` characters: a longer number is digits) that counts digits
  or bytes, 0- or 1-based, at the start or end of the line, or at both (each
  end set off by its own separator, both labels in one radix), set off by one of
  ``SEPARATORS`` (``:`` or ``|`` with optional blanks, or blanks alone).

Detection proposes every reading (:class:`LabelSyntax`, or none) over the first
``EXAMINE_LINES`` digit lines and keeps one only when every byte there is a
digit, a separator, a label or header text under it and, for a labelled
reading, when its labels form the progression its digit counts imply from line
to line (for labels at both ends: both columns, step by step).  A reading whose labels are set off by blanks alone competes with the
unlabelled reading of the same bytes, so its agreeing steps are weighed as
evidence: the chance that digits agree as often by accident (each agreeing
step with a ``k``-character label has chance ``radix**-k``, times the ways to
pick the agreeing steps) must be at most ``10**LABELS_LOG_CHANCE``; between
that and ``10**AMBIGUOUS_LOG_CHANCE`` the file is refused as ambiguous
(:class:`AmbiguousLayoutError`, ``choice="labels"``).  Nothing is decided from
one line's shape.

Binary content (control bytes, or mostly bytes >= 0x80) is *packed hex* (two hex digits per byte, high nibble first) when
the caller says so, when the name ends in ``.bin`` or ``.hexbin`` before any
compression suffix, or when its first bytes are those of a known constant
(:func:`packed_reading`); any other binary content is refused.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field

from spotcheck.digitfile.charsets import DEC, HEX, HEX_LETTERS, class_table
from spotcheck.digitfile.guess import match_constant
from spotcheck.errors import DigitFileError, UsageError

__all__ = [
    "Detection",
    "LabelSyntax",
    "LabelMeaning",
    "AmbiguousLayoutError",
    "detect_text",
    "looks_binary",
    "newline_of",
    "packed_reading",
    "HEAD_BYTES",
    "PACKED_SUFFIXES",
    "SEPARATORS",
    "LABEL_CHOICES",
]

# --- tuning -----------------------------------------------------------------
HEAD_BYTES = 256 * 1024  # bytes of content examined before the pass
MAX_HEADER_LINES = 100  # longest header accepted before the digits
EXAMINE_LINES = 64  # digit lines every reading must explain
MAX_FIRST_LINE = 64 * 1024  # a first line longer than this is read as one long line
HEAD_DIGITS = 64  # leading digits kept for guessing the constant
MIN_HEX_EVIDENCE = 200  # decimal-only digits this many long cannot be hex by chance
MAX_LABEL_CHARS = 18  # a number longer than this is digits, never a label
LABELS_LOG_CHANCE = -7.0  # log10 chance below which blank-separated labels are labels
MIN_STEPS_BOTH = 2  # agreeing steps that let a start reading win over an end reading (or back)
AMBIGUOUS_LOG_CHANCE = -4.0  # log10 chance below which they are too likely to be ignored
DIGIT_LINE_SHARE = 0.8  # a line of 8+ bytes is a digit line when this share of its non-blank bytes are digits
PACKED_SUFFIXES = (".bin", ".hexbin")
LABEL_CHOICES = (None, "start", "end", "both", "none")  # what a caller may say about the labels

SEPARATORS: dict[str, bytes] = {"mark": rb"[ \t]*[:|][ \t]*", "blank": rb"[ \t]+"}
"""The one list of label separators: every label pattern is built from it."""

_LABEL_CHARS = {10: rb"[0-9]{1,%d}" % MAX_LABEL_CHARS, 16: rb"[0-9A-Fa-f]{1,%d}" % (MAX_LABEL_CHARS - 2)}
_HEXD = rb"0-9A-Fa-f"
MAX_INTEGER_PART = 20  # longer runs before a point are digits with a stray '.'
_FIRST_BODY = re.compile(rb"[ \t]*(?:([" + _HEXD + rb"]{1,%d})\.)?[" % MAX_INTEGER_PART + _HEXD + rb" \t]*\Z")
_BODY = re.compile(rb"[" + _HEXD + rb" \t]*\Z")
_DIGITISH = bytes(HEX + b".:|")
_TEXT_BYTES = bytes(range(0x20, 0x7F)) + b"\t\n\r\f\v"


class AmbiguousLayoutError(DigitFileError):
    """Two readings explain the file's head equally well; ``choice`` names what picks one."""

    def __init__(self, message: str, choice: str, readings: tuple[str, ...]) -> None:
        super().__init__(message)
        self.choice = choice
        self.readings = readings


@dataclass(frozen=True)
class LabelMeaning:
    """What a label counts: ``unit`` digits (1) or bytes of two hex digits (2),
    ``kind`` ``before`` (0-based, count before the line), ``first`` (1-based,
    position of the line's first digit) or ``through`` (count up to the line's end)."""

    kind: str
    unit: int = 1

    @property
    def name(self) -> str:
        return self.kind if self.unit == 1 else f"bytes-{self.kind}"

    def raw(self, before: int, nd: int) -> int:
        """The count (in digits) a label of this meaning reports."""
        return before + nd if self.kind == "through" else before

    def expect(self, before: int, nd: int) -> int | None:
        """The label a line holding ``nd`` digits after ``before`` digits must carry (None: none can)."""
        n = before + nd if self.kind == "through" else before
        if n % self.unit:
            return None
        return n // self.unit + (1 if self.kind == "first" else 0)

    def explain(self) -> str:
        what = "digits" if self.unit == 1 else "bytes (two hex digits each)"
        return {
            "before": f"the count of {what} before this line",
            "first": f"the 1-based position in {what} of this line's start",
            "through": f"the count of {what} up to the end of this line",
        }[self.kind]


MEANINGS = tuple(LabelMeaning(k, u) for u in (1, 2) for k in ("before", "first", "through"))


@dataclass(frozen=True)
class LabelSyntax:
    """One way labels can be written: where, in which radix, set off by which separator.

    ``where="both"`` is a label at each end of every line: ``sep`` sets off the
    start label and ``end_sep`` the end label, both in ``radix``; its :attr:`ends`
    are the two one-sided syntaxes it is made of (start first).  The end label
    is split off first, then the start label from what is left, in the line
    and the bulk patterns alike.
    """

    where: str  # "start", "end" or "both"
    radix: int  # 10 or 16
    sep: str  # a key of SEPARATORS (for "both": the start label's)
    end_sep: str | None = None  # for "both": the end label's separator

    def __post_init__(self) -> None:
        if self.where == "both":
            assert self.end_sep is not None
            ends = (LabelSyntax("start", self.radix, self.sep), LabelSyntax("end", self.radix, self.end_sep))
            object.__setattr__(self, "_ends", ends)
            return
        object.__setattr__(self, "_ends", (self,))
        lab, sep = _LABEL_CHARS[self.radix], SEPARATORS[self.sep]
        if self.where == "start":
            line = rb"[ \t]*(" + lab + rb")" + sep
            bulk = rb"\n[ \t]*(" + lab + rb")" + sep
        else:
            line = sep + rb"(" + lab + rb")[ \t\r]*\Z"
            # Matched on the reversed chunk, where an end label starts its line: the pattern then
            # begins with a line break, which Python's re scans for fast (forwards, a pattern that
            # ends at the line's end is tried at every blank or mark, several times slower).
            # Forwards it reads ``sep (label) [ \t\r]*`` up to the line break, as the line pattern
            # does (blanks and CRs in any order: a blank after a CRLF's CR is no label); the CRs
            # just before the line break stay, the rest goes with the label; every separator
            # pattern reads the same reversed.
            bulk = rb"(\n\r*)[\r \t]*(" + lab + rb")" + sep
        object.__setattr__(self, "_line", re.compile(line))
        object.__setattr__(self, "_bulk", re.compile(bulk))

    @property
    def ends(self) -> tuple[LabelSyntax, ...]:
        """The one-sided syntaxes this one is made of: itself, or (start, end) for ``"both"``."""
        return self._ends  # type: ignore[attr-defined,no-any-return]

    @property
    def name(self) -> str:
        radix = "decimal" if self.radix == 10 else "hex"
        if self.where == "both":
            a, b = (_SEP_NAMES[s] for s in (self.sep, self.end_sep or ""))
            sep = a if a == b else f"{a} at the start and {b} at the end"
            return f"{radix} labels at both line ends set off by {sep}"
        return f"{radix} labels at the line {self.where}s set off by {_SEP_NAMES[self.sep]}"

    def split_line(self, text: bytes) -> tuple[bytes | None, int, int]:
        """``(label text or None, body start, body end)`` of one line (no line break), one-sided syntaxes."""
        assert self.where != "both", "split_labels reads both ends"
        rx: re.Pattern[bytes] = self._line  # type: ignore[attr-defined]
        if self.where == "start":
            m = rx.match(text)
            return (m.group(1), m.end(), len(text)) if m else (None, 0, len(text))
        m = rx.search(text)
        return (m.group(1), 0, m.start()) if m else (None, 0, len(text))

    def split_labels(self, text: bytes) -> tuple[tuple[bytes | None, ...], int, int]:
        """``(labels, body start, body end)`` of one line: a label text or None for each of :attr:`ends`."""
        if self.where != "both":
            label, b0, b1 = self.split_line(text)
            return (label,), b0, b1
        start, end = self.ends
        le, _, b1 = end.split_line(text)
        ls, b0, _ = start.split_line(text[:b1])
        return (ls, le), b0, b1

    def split_first(self, text: bytes) -> tuple[bytes | None, int, int]:
        """Like :meth:`split_line` for the first digit line, whose label may use any separator."""
        assert self.where != "both", "a line labelled at both ends has no first-line variant"
        for sep in SEPARATORS:  # ':' or '|' first: it is the more specific
            got = (self if sep == self.sep else LabelSyntax(self.where, self.radix, sep)).split_line(text)
            if got[0] is not None:
                return got
        return None, 0, len(text)

    def value(self, label: bytes) -> int:
        return int(label, self.radix)  # at most MAX_LABEL_CHARS characters by the pattern

    def strip(self, data: bytes) -> bytes:
        """``data`` (starting at a line start) without its labels."""
        if self.where == "both":
            start, end = self.ends
            return start.strip(end.strip(data))
        if self.where == "end":
            return self.split(data)[0]
        rx: re.Pattern[bytes] = self._bulk  # type: ignore[attr-defined]
        return rx.sub(b"\n", b"\n" + data)[1:]

    def split(self, data: bytes) -> tuple[bytes, list[bytes]]:
        """``(data without labels, the label texts in order)`` in one regex pass (one-sided syntaxes)."""
        assert self.where != "both", "split_all reads both ends"
        rx: re.Pattern[bytes] = self._bulk  # type: ignore[attr-defined]
        if self.where == "start":
            parts = rx.split(b"\n" + data)
            return b"\n".join(parts[0::2])[1:], parts[1::2]
        # The reversed chunk, a line break before its first (the chunk's last) line: the pieces
        # come as [text, line break and CRs, label, text, ...]; the labels are dropped, the
        # rest joined and turned back, and the added line break cut off again.
        parts = rx.split(b"\n" + data[::-1])
        found = [label[::-1] for label in parts[2::3]]
        found.reverse()
        del parts[2::3]
        return b"".join(parts)[::-1][:-1], found

    def split_all(self, data: bytes) -> tuple[bytes, tuple[list[bytes], ...]]:
        """``(data without labels, label texts)``: the texts in order, one list for each of :attr:`ends`."""
        if self.where != "both":
            cleaned, found = self.split(data)
            return cleaned, (found,)
        start, end = self.ends
        rest, at_end = end.split(data)
        cleaned, at_start = start.split(rest)
        return cleaned, (at_start, at_end)


_SEP_NAMES = {"mark": "':' or '|'", "blank": "blanks"}


SYNTAXES = tuple(LabelSyntax(w, r, s) for w in ("start", "end") for s in ("mark", "blank") for r in (10, 16))
"""The one-sided readings."""
BOTH_SYNTAXES = tuple(
    LabelSyntax("both", r, a, b) for a in ("mark", "blank") for b in ("mark", "blank") for r in (10, 16)
)
"""Labels at both ends of every line, each end set off by either separator, one radix for both."""


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


def looks_binary(head: bytes) -> bool:
    """True for content that is not text: control bytes or mostly non-ASCII."""
    sample = head[:4096]
    if not sample:
        return False
    odd = sample.translate(None, _TEXT_BYTES)
    if not odd:
        return False
    controls = odd.translate(None, bytes(range(0x80, 0x100)))
    return bool(controls) or len(odd) > 0.3 * len(sample)


def first_control(head: bytes) -> int:
    """Index of the first byte of ``head`` that is not text (0 when there is none in its first 4096)."""
    return next((i for i, c in enumerate(head[:4096]) if c not in _TEXT_BYTES), 0)


_COMPRESSION_SUFFIXES = (".gz", ".gzip", ".bz2", ".xz")


_UTF16_MARKS = ((b"\xff\xfe", "utf-16le"), (b"\xfe\xff", "utf-16be"))


def utf16_encoding(head: bytes) -> str | None:
    """``"utf-16le"`` or ``"utf-16be"`` when the content starts with that byte order mark, else None."""
    for prefix, encoding in _UTF16_MARKS:
        if head.startswith(prefix):
            return encoding
    return None


def packed_reading(head: bytes, path: str, packed: bool | None) -> bool:
    """The packed-binary rule: True to read the content as packed hex, False for text.

    ``packed`` (the caller's choice) wins; otherwise text content is text, and
    binary content is packed hex when the name ends in one of ``PACKED_SUFFIXES``
    (before any compression suffix) or its first 32 bytes are the leading hex
    digits of a known constant; else text when it starts with a UTF-16 byte
    order mark.  Any other binary content is an error.
    """
    if packed is not None:
        return packed
    if not looks_binary(head):
        return False
    bare = os.path.basename(path).lower()
    for suffix in _COMPRESSION_SUFFIXES:
        if bare.endswith(suffix):
            bare = bare[: -len(suffix)]
            break
    if bare.endswith(PACKED_SUFFIXES):
        return True
    digits = head[:32].hex().upper()
    if match_constant(digits, None, 16, len(digits)).name is not None:
        return True
    if utf16_encoding(head) is not None:
        return False  # text stored as UTF-16 (the reader decodes it)
    at = first_control(head)
    raise DigitFileError(
        f"{os.path.basename(path)}: binary content (byte 0x{head[at]:02X} at byte {at}): not digit text, "
        "not gzip/bzip2/xz, and not packed hex digits of a known constant "
        "(name it *.bin to read it as packed hex digits)"
    )


def newline_of(head: bytes) -> str | None:
    """The line ending of the first line break: ``"\\n"``, ``"\\r\\n"``, ``"\\r"`` or None."""
    cr, lf = head.find(b"\r"), head.find(b"\n")
    if cr < 0 and lf < 0:
        return None
    if cr < 0 or (0 <= lf < cr):
        return "\n"
    return "\r\n" if head[cr + 1 : cr + 2] == b"\n" else "\r"


def _is_header(text: bytes) -> bool:
    s = text.strip()
    if not s or s.startswith(b"#"):
        return True
    s = s.translate(None, b" \t")
    share = (len(s) - len(s.translate(None, _DIGITISH))) / len(s)
    # One foreign byte in a line of 8 or more leaves it above DIGIT_LINE_SHARE: a digit line with a
    # stray character.  A shorter line must be mostly foreign to be text.
    return share < (DIGIT_LINE_SHARE if len(s) >= 8 else 0.5)


def _line_col(lines: list[tuple[int, bytes]], offset: int) -> tuple[int, int]:
    for i, (off, text) in enumerate(lines):
        if off <= offset <= off + len(text):
            return i + 1, offset - off + 1
    return len(lines), 1


def _show(byte: int) -> str:
    return repr(chr(byte)) if 0x20 <= byte < 0x7F else f"byte 0x{byte:02X}"


@dataclass
class _Parse:
    """One reading applied to the examined lines."""

    syntax: LabelSyntax | None
    ok: bool = True
    bad_at: int = -1  # byte offset of the first byte this reading cannot explain
    labels: list[tuple[int, bytes | None, int, int]] = field(default_factory=list)
    """(line index, label text, digits before the line, digits on the line) per digit line."""
    integer_part: bytes | None = None
    body: tuple[int, int] = (0, 0)  # first line's body span (absolute offsets)
    first_only: bool = False
    first_own_sep: bool = False
    first_blank_sep: bool = False  # a blank between the first line's ':'/'|' and its digits
    meaning: LabelMeaning | None = None
    steps: int = 0
    steps_ok: int = 0
    log_chance: float = 0.0
    labelled: bool = False  # labels on most digit lines (or the first only), whatever the evidence
    agree: int = 0
    end_labels: list[bytes | None] = field(default_factory=list)
    """For a ``"both"`` reading: each digit line's end label (``labels`` hold the start labels)."""
    end_meaning: LabelMeaning | None = None


def _parse(syntax: LabelSyntax | None, lines: list[tuple[int, bytes]], first: int) -> _Parse:
    out = _Parse(syntax)
    before = 0
    for i in range(first, len(lines)):
        off, text = lines[i]
        text = text[:-1] if text.endswith(b"\r") else text
        if not text.strip(b" \t"):
            continue
        if syntax is None:
            label, b0, b1 = None, 0, len(text)
        elif syntax.where == "both":
            # Both ends on every line, the first included (no first-line variant of its own).
            (label, end_label), b0, b1 = syntax.split_labels(text)
            out.end_labels.append(end_label)
        else:
            label, b0, b1 = syntax.split_first(text) if i == first else syntax.split_line(text)
            if i == first:
                out.first_own_sep = syntax.split_line(text)[0] is not None
                out.first_blank_sep = _blank_beside_mark(syntax, text)
        body = text[b0:b1]
        if i == first:
            m = _FIRST_BODY.match(body)
            if m and m.group(1) is not None:
                out.integer_part = m.group(1)
            out.body = (off + b0, off + b1)
        else:
            m = _BODY.match(body)
        if not m:
            bad = re.compile(
                rb"[ \t]*(?:[" + _HEXD + rb"]{1,%d}\.)?" % MAX_INTEGER_PART if i == first else rb""
            ).match(body)
            skip = bad.end() if bad else 0
            rest = body[skip:].translate(None, HEX + b" \t")
            at = skip + body[skip:].find(rest[:1])
            out.ok, out.bad_at = False, off + b0 + at
            return out
        nd = len(body) - len(body.translate(None, HEX))
        if out.integer_part is not None and i == first:
            nd -= len(out.integer_part)
        out.labels.append((i, label, before, nd))
        before += nd
    return out


def _has_label(p: _Parse) -> bool:
    return p.bad_at < 0 and any(lab is not None for _, lab, _, _ in p.labels)


def _blank_beside_mark(syntax: LabelSyntax, text: bytes) -> bool:
    """True when the first line's label separator has a blank on the digits' side of its mark."""
    rx: re.Pattern[bytes] = LabelSyntax(syntax.where, syntax.radix, "mark")._line  # type: ignore[attr-defined]
    if syntax.where == "start":
        m = rx.match(text)
        return bool(m) and text[m.end() - 1 : m.end()] in (b" ", b"\t")  # type: ignore[union-attr]
    m = rx.search(text)
    return bool(m) and text[m.start() : m.start() + 1] in (b" ", b"\t")  # type: ignore[union-attr]


def _score(p: _Parse, forced: bool = False) -> None:
    """Pick the meaning whose progression the labels follow best."""
    assert p.syntax is not None
    rows = [(lab, b, n) for _, lab, b, n in p.labels]
    labelled = [r for r in rows if r[0] is not None]
    if rows and rows[0][0] is not None and not p.first_own_sep and len(labelled) == 1:
        labelled = []  # the first line's other separator counts only beside labelled lines
    if not labelled:
        p.ok = False
        return
    if len(labelled) == 1 and rows[0][0] is not None and len(rows) > 1:
        p.first_only = True
        if p.syntax.sep != "mark" or not p.first_own_sep:  # a bare number before the digits is digits
            p.ok = False
            return
    elif 2 * len(labelled) <= len(rows):
        p.ok = False
        return
    best: tuple[int, int, int] | None = None
    for mean in MEANINGS:
        if (mean.kind == "through") != (p.syntax.where == "end"):
            continue  # a start label says where its line starts, an end label where it ends
        if (mean.unit == 2) != (p.syntax.radix == 16):
            continue  # hex labels are byte offsets; decimal labels count digits
        vals = [(p.syntax.value(lab), b, n) if lab is not None else None for lab, b, n in rows]
        agree = sum(1 for v in vals if v is not None and v[0] == mean.expect(v[1], v[2]))
        steps = steps_ok = 0
        evidence = 0.0
        for j in range(len(vals) - 1):
            a, c = vals[j], vals[j + 1]
            if a is None or c is None:
                continue
            steps += 1
            # A step compares neighbours only, so one damaged line breaks one or two steps.
            ra, rc = mean.raw(a[1], a[2]), mean.raw(c[1], c[2])
            if (rc - ra) % mean.unit == 0 and c[0] - a[0] == (rc - ra) // mean.unit and c[0] > a[0]:
                steps_ok += 1
                evidence -= len(rows[j + 1][0] or b"") * math.log10(p.syntax.radix)
        key = (steps_ok, agree, -MEANINGS.index(mean))
        if best is None or key > best:
            best = key
            p.meaning, p.steps, p.steps_ok, p.agree = mean, steps, steps_ok, agree
            p.log_chance = evidence + math.log10(math.comb(steps, steps_ok)) if steps else 0.0
    if p.first_only or p.steps == 0:
        # A label on a line alone must say what such a label says (0, 1 or the line's count) and
        # be set off from the digits by a blank as well: one damaged byte cannot make both.
        p.ok = p.agree >= 1 and (p.syntax.sep == "blank" or p.first_blank_sep)
        if not p.ok:
            return
    p.labelled = p.ok
    if p.first_only:
        return
    if p.syntax.sep == "blank" and not forced:
        p.ok = p.log_chance <= LABELS_LOG_CHANCE
    else:
        p.ok = True  # no unlabelled reading explains ':' or '|': labels that disagree are damage


def _score_both(p: _Parse, forced: bool = False) -> None:
    """Pick the meanings whose progressions both label columns follow best.

    A step (from one line to the next) counts only when the start labels and
    the end labels both follow it: a one-sided reading of the same lines counts
    the other column as digits, so its own steps fail, and a column of digits
    read as labels follows no progression.  Labels set off by blanks compete
    with digits, so a reading with a blank-separated end needs the evidence of
    its agreeing steps (both columns' characters count: the column set off by
    ``:`` or ``|`` agrees only because the other column is not digits).
    """
    assert p.syntax is not None and p.syntax.where == "both"
    rows = [(ls, le, b, n) for (_, ls, b, n), le in zip(p.labels, p.end_labels, strict=True)]
    full = [r for r in rows if r[0] is not None and r[1] is not None]
    if not full or 2 * len(full) <= len(rows):
        p.ok = False
        return
    start, end = p.syntax.ends
    unit = 2 if p.syntax.radix == 16 else 1  # hex labels are byte offsets; decimal labels count digits
    through = LabelMeaning("through", unit)
    vals = [
        (start.value(ls), end.value(le), b, n) if ls is not None and le is not None else None
        for ls, le, b, n in rows
    ]
    per_char = math.log10(p.syntax.radix)
    best: tuple[int, int, int] | None = None
    for mean in (m for m in MEANINGS if m.unit == unit and m.kind != "through"):
        agree = sum(
            1
            for v in vals
            if v is not None and v[0] == mean.expect(v[2], v[3]) and v[1] == through.expect(v[2], v[3])
        )
        steps = steps_ok = 0
        evidence = 0.0
        for j in range(len(vals) - 1):
            a, c = vals[j], vals[j + 1]
            if a is None or c is None:
                continue
            steps += 1
            if _step_ok(mean, a[0], a[2], a[3], c[0], c[2], c[3]) and _step_ok(
                through, a[1], a[2], a[3], c[1], c[2], c[3]
            ):
                steps_ok += 1
                evidence -= (len(rows[j + 1][0] or b"") + len(rows[j + 1][1] or b"")) * per_char
        key = (steps_ok, agree, -MEANINGS.index(mean))
        if best is None or key > best:
            best = key
            p.meaning, p.end_meaning, p.steps, p.steps_ok, p.agree = mean, through, steps, steps_ok, agree
            p.log_chance = evidence + math.log10(math.comb(steps, steps_ok)) if steps else 0.0
    if p.steps == 0:
        # One labelled line: both labels must say what such labels say (0 or 1, and the line's count).
        p.ok = p.agree >= 1
        if not p.ok:
            return
    if "blank" in (p.syntax.sep, p.syntax.end_sep) and not forced:
        # Without that evidence the blank-separated column may be digits: this reading is then not
        # even a fallback (a one-sided reading, or a refusal, is what the bytes support).
        p.ok = p.log_chance <= LABELS_LOG_CHANCE
    else:
        p.ok = True  # no other reading explains ':' or '|' at both ends: labels that disagree are damage
    p.labelled = p.ok


def _step_ok(mean: LabelMeaning, va: int, ba: int, na: int, vc: int, bc: int, nc: int) -> bool:
    """True when labels ``va`` then ``vc`` differ by what the digit counts between them imply."""
    ra, rc = mean.raw(ba, na), mean.raw(bc, nc)
    return (rc - ra) % mean.unit == 0 and vc - va == (rc - ra) // mean.unit and vc > va


def _choose(parses: list[_Parse], labels: str | None, name: str, lines: list[tuple[int, bytes]]) -> _Parse:
    plain = next((p for p in parses if p.syntax is None and p.ok), None)
    labelled = [p for p in parses if p.syntax is not None and p.ok]
    if labelled:
        # Same place and separator: decimal unless hex labels follow the progression better.
        labelled.sort(key=lambda p: (p.steps_ok, p.agree, p.syntax.radix == 10), reverse=True)  # type: ignore[union-attr]
        top = labelled[0]
        rivals = [
            p
            for p in labelled[1:]
            if p.syntax.where != top.syntax.where  # type: ignore[union-attr]
            and (
                (p.steps_ok, p.agree) == (top.steps_ok, top.agree)
                # ':' both before and after a short number: which side is the label is a guess
                or (
                    p.syntax.sep == top.syntax.sep == "mark"  # type: ignore[union-attr]
                    and "both" not in (p.syntax.where, top.syntax.where)  # type: ignore[union-attr]
                    and p.steps_ok < MIN_STEPS_BOTH
                )
            )
        ]
        if rivals:
            a, b = top.syntax.name, rivals[0].syntax.name  # type: ignore[union-attr]
            raise AmbiguousLayoutError(
                f"{name}: the layout is ambiguous: {a} and {b} both explain the first lines; "
                "say where the labels are",
                "labels",
                (top.syntax.where, rivals[0].syntax.where),  # type: ignore[union-attr]
            )
        return top
    if plain is None:
        # Only labels explain the bytes: take the best-labelled reading, its disagreements are damage.
        rest = [p for p in parses if p.syntax is not None and p.labelled]
        if rest:
            return max(rest, key=lambda p: (p.steps_ok, p.agree, p.syntax.radix == 10))  # type: ignore[union-attr]
    if plain is not None:
        # A blank-separated reading with some evidence but not enough is a rival, not a loser.
        for p in parses:
            if (
                p.syntax is not None
                and p.syntax.sep == "blank"
                and p.syntax.end_sep in (None, "blank")
                and p.steps_ok >= 1
                and p.log_chance <= AMBIGUOUS_LOG_CHANCE
                and not p.first_only
            ):
                column = {"start": "the first column", "end": "the last column"}.get(
                    p.syntax.where, "the first and last columns"
                )
                raise AmbiguousLayoutError(
                    f"{name}: the layout is ambiguous: {column} could be {p.syntax.name} "
                    f"({p.steps_ok} of {p.steps} steps agree) or digits; say whether the lines carry labels",
                    "labels",
                    (p.syntax.where, "none"),
                )
        return plain
    # Nothing explains every byte: name the first byte the furthest-reaching reading cannot explain.
    worst = max(parses, key=lambda p: p.bad_at)
    if worst.bad_at < 0:
        raise DigitFileError(
            f"{name}: no digit line among the first {len(lines)} lines carries a position label at "
            + ("both line ends" if labels == "both" else f"the line {labels}s")
        )
    line, col = _line_col(lines, worst.bad_at)
    off, text = lines[line - 1]
    byte = text[col - 1] if col - 1 < len(text) else 0x0A
    raise DigitFileError(
        f"{name}: stray character {_show(byte)} at byte {worst.bad_at} (line {line}, column {col}): "
        "not a digit, a blank, a line break or a position label"
    )


def detect_text(head: bytes, eof: bool, path: str, base: int | None, labels: str | None = None) -> Detection:
    """Decide the layout of a text digit file from its first bytes.

    ``head`` is the start of the (decompressed) content, ``eof`` says whether
    it is the whole content.  ``base`` is the caller's explicit base or None;
    ``labels`` (``"start"``, ``"end"``, ``"both"``, ``"none"`` or None)
    restricts the readings tried.  A CR-only file must be given with CR already turned into LF.
    """
    name = os.path.basename(path)
    if labels not in LABEL_CHOICES:
        raise UsageError(f"labels must be start, end, both or none, got {labels!r}")
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
    parses = [_parse(s, examined, first) for s in syntaxes]
    for p in parses:
        if p.ok and p.syntax is not None:
            (_score_both if p.syntax.where == "both" else _score)(
                p, forced=labels in ("start", "end", "both")
            )
    for p in parses:
        if p.ok and p.first_only:
            # Not when the other lines carry labels set off by blanks: the first line is damaged.
            for other in SYNTAXES:
                if other.sep == "blank":
                    q = _parse(other, examined, first + 1)
                    if q.ok:
                        _score(q)
                        if q.steps_ok and q.log_chance <= AMBIGUOUS_LOG_CHANCE:
                            p.ok = p.labelled = False
    sides = {
        p.syntax.where
        for p in parses
        if p.syntax and p.syntax.where != "both" and p.syntax.sep == "mark" and _has_label(p)
    }
    if len(sides) == 2 and max(len(p.labels) for p in parses if p.bad_at < 0) <= 1:
        # One line with ':' or '|' beside a short number at both ends: which is the label is a guess.
        raise AmbiguousLayoutError(
            f"{name}: the layout is ambiguous: the one digit line could carry its label at the start or "
            "at the end; say where the labels are",
            "labels",
            ("start", "end"),
        )
    chosen = _choose(parses, labels, name, examined)
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
        meaning=chosen.meaning if syntax is not None else None,
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
        end_meaning=chosen.end_meaning if pass_syntax is not None else None,
        first_end_label_text=first_end_label_text,
    )


_TRAILING_DIGITS = re.compile(rb"[0-9A-Fa-f \t.]*\Z")


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
    m = _TRAILING_DIGITS.search(last)
    run = len(m.group().translate(None, b" \t.")) if m else 0
    width = len(lines[first][1].translate(None, b" \t\r."))
    if run >= max(4, width // 2):
        raise DigitFileError(
            f"{name}: line {first} is header text that ends in {run} digits, enough for a digit line: "
            "a line break may be missing, or a digit line damaged there"
        )


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
