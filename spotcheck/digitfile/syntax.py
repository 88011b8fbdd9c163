"""The label vocabulary: what a position label counts and how it is written, and nothing else.

Every pass that reads labels asks this module, so each rule lives here once:

* :class:`LabelMeaning` is **the label rule**: what a label of a given meaning
  must say for a line of ``nd`` digits after ``before`` digits (:meth:`~LabelMeaning.expect`,
  :meth:`~LabelMeaning.agrees`), for a whole chunk of lines at once
  (:meth:`~LabelMeaning.expect_all`), and from one line to the next
  (:meth:`~LabelMeaning.step_ok`).  Detection scores readings with it, the index
  pass and the read-and-check stream check labels with it, and the Python twins of
  the compiled loops check labels with it (the C loop ``label_agrees`` in
  ``_index.c`` is its compiled form, held to it by the twin tests);
* :data:`SEPARATORS` is the one list of label separators: every label pattern
  (the line split, the bulk split, the plain form the compiled loops take) is
  built from it;
* :class:`LabelSyntax` is one way labels are written (start, end or both ends,
  decimal or hex, the separator), with its line and bulk splits;
* the integer codes the compiled loops use for these (:data:`WHERE_CODES`,
  :data:`SEP_CODES`, :data:`KIND_CODES`) are defined here, beside the names they
  stand for; ``loops.LoopLayout`` puts them together.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = [
    "LabelMeaning",
    "LabelSyntax",
    "MEANINGS",
    "SYNTAXES",
    "BOTH_SYNTAXES",
    "SEPARATORS",
    "SEP_NAMES",
    "MAX_LABEL_CHARS",
    "WHERE_CODES",
    "SEP_CODES",
    "KIND_CODES",
    "label_chars",
    "most_label_chars",
]

MAX_LABEL_CHARS = 18  # a number longer than this is digits, never a label (hex: two fewer, 64 bits)

SEPARATORS: dict[str, bytes] = {"mark": rb"[ \t]*[:|][ \t]*", "blank": rb"[ \t]+"}
"""The one list of label separators: every label pattern is built from it."""

SEP_NAMES = {"mark": "':' or '|'", "blank": "blanks"}
"""How messages name each separator."""

WHERE_CODES = ("start", "end", "both")
"""``LabelSyntax.where`` by its code in the compiled loops' layout (0, 1, 2)."""
SEP_CODES = tuple(SEPARATORS)
"""Separator names by their code in the compiled loops' layout (0 mark, 1 blank)."""
KIND_CODES = ("before", "first", "through")
"""``LabelMeaning.kind`` by its code in the compiled loops' layout (0, 1, 2)."""


def most_label_chars(radix: int) -> int:
    """The most characters of a label in ``radix`` (its value fits 64 bits)."""
    return MAX_LABEL_CHARS if radix == 10 else MAX_LABEL_CHARS - 2


def label_chars(radix: int, most: int | None = None) -> bytes:
    """The pattern of one label: 1 to ``most`` (default :func:`most_label_chars`) characters of ``radix``."""
    chars = rb"[0-9]" if radix == 10 else rb"[0-9A-Fa-f]"
    return chars + rb"{1,%d}" % (most_label_chars(radix) if most is None else most)


@dataclass(frozen=True)
class LabelMeaning:
    """What a label counts: ``unit`` digits (1) or bytes of two hex digits (2),
    ``kind`` ``before`` (0-based, count before the line), ``first`` (1-based,
    position of the line's first digit) or ``through`` (count up to the line's end).

    This is the one label rule: every pass asks :meth:`expect` (one line),
    :meth:`expect_all` (a chunk of lines) or :meth:`step_ok` (two neighbouring lines).

    ``origin`` is the count of digits of the expansion before the file's first
    digit: 0 for a file that starts at digit 1, ``P - 1`` for a slice whose first
    digit is digit ``P``; labels count from the expansion's start, not the file's.

    >>> LabelMeaning("first", 1, origin=999_999).expect(100, 64)  # the second line of a slice from 10^6
    1000100
    """

    kind: str
    unit: int = 1
    origin: int = 0

    @property
    def name(self) -> str:
        return self.kind if self.unit == 1 else f"bytes-{self.kind}"

    @property
    def code(self) -> int:
        """The kind's code in the compiled loops' layout (:data:`KIND_CODES`)."""
        return KIND_CODES.index(self.kind)

    def raw(self, before: int, nd: int) -> int:
        """The count (in digits) a label of this meaning reports."""
        return self.origin + (before + nd if self.kind == "through" else before)

    def expect(self, before: int, nd: int) -> int | None:
        """The label a line holding ``nd`` digits after ``before`` digits must carry (None: none can)."""
        n = self.origin + (before + nd if self.kind == "through" else before)
        if n % self.unit:
            return None
        return n // self.unit + (1 if self.kind == "first" else 0)

    def agrees(self, value: int, before: int, nd: int) -> bool:
        """True when a label of value ``value`` says what this meaning implies for its line."""
        want = self.expect(before, nd)
        return want is not None and value == want

    def expect_all(self, ends: list[int]) -> list[int] | None:
        """The labels of consecutive lines at once: ``ends`` is the digit count before the first
        line followed by the count after each line (so line i holds ``ends[i+1] - ends[i]``
        digits).  None when a count a label would report is not a whole number of units."""
        counts = ends[1:] if self.kind == "through" else ends[:-1]
        if self.origin:
            counts = [c + self.origin for c in counts]
        unit = self.unit
        if unit == 1:
            return [c + 1 for c in counts] if self.kind == "first" else list(counts)
        if any(c % unit for c in counts):
            return None
        add = 1 if self.kind == "first" else 0
        return [c // unit + add for c in counts]

    def step_ok(self, va: int, ba: int, na: int, vc: int, bc: int, nc: int) -> bool:
        """True when labels ``va`` (a line of ``na`` digits after ``ba``) then ``vc`` (``nc`` after
        ``bc``) differ by what the digit counts between them imply, and grow."""
        ra, rc = self.raw(ba, na), self.raw(bc, nc)
        return (rc - ra) % self.unit == 0 and vc - va == (rc - ra) // self.unit and vc > va

    def origin_from(self, value: int, before: int, nd: int) -> int | None:
        """The ``origin`` under which a label ``value`` on a line of ``nd`` digits after ``before``
        agrees with this meaning (None: under none, or before the expansion's start).

        >>> LabelMeaning("first").origin_from(1_000_001, 0, 64), LabelMeaning("before").origin_from(1_000_001, 0, 64)
        (1000000, 1000001)
        """
        n = (value - (1 if self.kind == "first" else 0)) * self.unit
        origin = n - (before + nd if self.kind == "through" else before)
        return origin if origin >= 0 else None

    def explain(self) -> str:
        what = "digits" if self.unit == 1 else "bytes (two hex digits each)"
        return {
            "before": f"the count of {what} before this line",
            "first": f"the 1-based position in {what} of this line's start",
            "through": f"the count of {what} up to the end of this line",
        }[self.kind]


MEANINGS = tuple(LabelMeaning(k, u) for u in (1, 2) for k in ("before", "first", "through"))
"""Every meaning, in the order detection prefers them on a tie."""


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
        lab, sep = label_chars(self.radix), SEPARATORS[self.sep]
        if self.where == "start":
            line = rb"[ \t]*(" + lab + rb")" + sep
            bulk = rb"\n[ \t]*(" + lab + rb")" + sep
            token = rb"[ \t]*(" + lab + rb")(?=[ \t]|\Z)[ \t]*"
        else:
            token = rb"(?:\A|[ \t]+)(" + lab + rb")[ \t]*\Z"
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
        object.__setattr__(self, "_token", re.compile(token))

    @property
    def ends(self) -> tuple[LabelSyntax, ...]:
        """The one-sided syntaxes this one is made of: itself, or (start, end) for ``"both"``."""
        return self._ends  # type: ignore[attr-defined,no-any-return]

    @property
    def line_pattern(self) -> re.Pattern[bytes]:
        """The pattern :meth:`split_line` uses (one-sided syntaxes): ``match`` at the line start,
        ``search`` for an end label; group 1 is the label."""
        assert self.where != "both", "a syntax for both ends has one pattern per end (see ends)"
        return self._line  # type: ignore[attr-defined,no-any-return]

    @property
    def most(self) -> int:
        """The most characters of one of its labels."""
        return most_label_chars(self.radix)

    @property
    def name(self) -> str:
        radix = "decimal" if self.radix == 10 else "hex"
        if self.where == "both":
            a, b = (SEP_NAMES[s] for s in (self.sep, self.end_sep or ""))
            sep = a if a == b else f"{a} at the start and {b} at the end"
            return f"{radix} labels at both line ends set off by {sep}"
        return f"{radix} labels at the line {self.where}s set off by {SEP_NAMES[self.sep]}"

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

    def outer_token(self, text: bytes) -> tuple[bytes, int, int] | None:
        """``(token, body start, body end)`` for a line :meth:`split_line` finds no label on: its
        outermost blank-separated number at the label's side (first for start labels, last for end
        labels), short enough to be a label, and the rest of the line as the body; None when there
        is none.  Whether the token *is* the label (its separator lost, or a line holding only a
        label) is for the label's meaning to say (``passrules.recover_label``)."""
        assert self.where != "both", "a line labelled at both ends has no outer token"
        rx: re.Pattern[bytes] = self._token  # type: ignore[attr-defined]
        if self.where == "start":
            m = rx.match(text)
            return (m.group(1), m.end(), len(text)) if m else None
        m = rx.search(text)
        return (m.group(1), 0, m.start()) if m else None

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


SYNTAXES = tuple(LabelSyntax(w, r, s) for w in ("start", "end") for s in ("mark", "blank") for r in (10, 16))
"""The one-sided readings."""
BOTH_SYNTAXES = tuple(
    LabelSyntax("both", r, a, b) for a in ("mark", "blank") for b in ("mark", "blank") for r in (10, 16)
)
"""Labels at both ends of every line, each end set off by either separator, one radix for both."""
