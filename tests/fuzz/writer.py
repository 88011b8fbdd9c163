"""Write any digit string in any layout of the model, and know where every digit went.

The writer is independent of the reader: it formats with plain string
operations, and records for every character of ``integer part + "." + digits``
the byte offset it was written at, which the mutation oracle needs.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
from dataclasses import dataclass, field

HEADERS = (
    "# digits of a constant, computed 2026-12-02",
    "Digits of the constant, 10000 of them (seed 42)",
    "",
    "# 3.14159 is not data",
    "source: our own run #7, 2 cores",
)

# The separators labels are set off with (the generators draw from these).
MARK_SEPS = (":", ": ", " : ", "|", " | ", "\t|\t")
LONE_SEPS = (" : ", " | ", "\t|\t")  # a label on a line alone has a blank beside its mark
BLANK_SEPS = (" ", "  ", "\t")
TYPESET_SEPS = ("\u00a0", "\u2009", "\u202f", "\u2007")  # no-break, thin, narrow no-break, figure space
MARKS = ("`50.", "`1001.", "e0", "E+00", "b0", "*^0")  # after the last digit
TABLE_SEPS = (",", ";", ", ", " ; ")  # a table row's one separator after the position
NO_LETTER_MARKS = ("`50.", "`1001.", "*^0")  # letter exponents only after 64 decimal digits (writers.py)
PAIRS = (("[", "]"), ("mpf('", "')"), ('"', '"'), ("'", "'"), ("(", ")"))  # around the number
FOOTERS = ("-- end --", "Total: 20000 digits", "Ridgeview mathematics club, page 1 of 1")


@dataclass(frozen=True)
class Label:
    where: str  # "start", "end" or "both" (a start label and an end label on every line)
    radix: int  # 10 or 16
    sep: str  # written between label and body: ": ", "|", " | ", " ", "\t", "  " ...
    kind: str  # "before", "first", "through" (for "both": the start label's kind)
    unit: int = 1  # 1: counts digits; 2: counts bytes of two hex digits
    pad: int = 0  # right-align the label in this many characters
    end_sep: str = ""  # for "both": written between body and end label (which counts "through")
    end_pad: int = 0  # for "both": right-align the end label in this many characters

    @property
    def blank(self) -> bool:
        """True when a label is set off by blanks alone (at either end, for "both")."""
        seps = (self.sep, self.end_sep) if self.where == "both" else (self.sep,)
        return any(s.strip(" \t") == "" for s in seps)

    @property
    def widest_sep(self) -> int:
        return max(len(self.sep), len(self.end_sep))

    def text(self, before: int, nd: int) -> str:
        """The start label (or the one label) of a line holding ``nd`` digits after ``before``."""
        return self._format(self.kind, self.pad, before, nd)

    def end_text(self, before: int, nd: int) -> str:
        """The end label of a line of a "both" layout: the count through the line's end."""
        return self._format("through", self.end_pad, before, nd)

    def _format(self, kind: str, pad: int, before: int, nd: int) -> str:
        n = before + nd if kind == "through" else before
        v = n // self.unit + (1 if kind == "first" else 0)
        s = format(v, "x") if self.radix == 16 else str(v)
        return s.rjust(pad)


@dataclass(frozen=True)
class Spec:
    digits: str
    base: int
    integer_part: str | None = None
    width: int | None = None  # digits a line (None: one line)
    group: int | None = None  # digits a group
    group_sep: str = " "
    label: Label | None = None
    header: tuple[str, ...] = ()
    newline: str = "\n"
    lower: bool = False
    final_newline: bool = True
    compression: str | None = None
    indent: str = ""
    # What general-purpose software writes around the digits (spotcheck/digitfile/writers.py):
    continuation: bool = False  # a backslash before every line break between digit lines
    opening: str = ""  # before the first digit line's number: "[", "mpf('", '"'
    mark: str = ""  # after the last digit: "`50.", "e0", "b0", "]", "')", '"'
    footer: tuple[str, ...] = ()  # text lines after the digits
    page: int | None = None  # digit lines a page: a form feed and a page header line between pages


def as_table(spec: Spec, sep: str, kind: str, width: int) -> Spec:
    """``spec`` written as a table: one row per ``width`` digits, its position before ``sep``
    (at least 3 rows: fewer are never read as a table, writers.MIN_ROWS)."""
    from dataclasses import replace

    width = max(1, min(width, len(spec.digits) // 3))
    label = Label("start", 10, sep, kind, pad=spec.label.pad if spec.label else 0)
    return replace(
        spec,
        width=width,
        group=None,
        label=label,
        integer_part=None,
        continuation=False,
        opening="",
        mark="",
        page=None,
        header=("position,digits",) if kind == "first" else spec.header,
    )


@dataclass
class Written:
    content: bytes  # decompressed bytes
    stored: bytes  # as on disk (compressed when asked)
    offsets: list[int] = field(default_factory=list)
    """Byte offset of each character of ``full`` (integer part, point, digits)."""
    full: str = ""
    label_spans: list[tuple[int, int]] = field(default_factory=list)


def _b(s: str) -> int:
    """Bytes of ``s`` in UTF-8 (typeset separators are several bytes)."""
    return len(s.encode("utf-8"))


def write(spec: Spec) -> Written:
    digits = spec.digits.lower() if spec.lower else spec.digits
    width = spec.width or max(1, len(digits))
    lines = [digits[i : i + width] for i in range(0, len(digits), width)] or [""]
    out: list[str] = []
    offsets: list[int] = []
    spans: list[tuple[int, int]] = []
    pos = 0
    for h in spec.header:
        out.append(h + spec.newline)
        pos += _b(out[-1])
    before = 0
    full = ""
    for n, line in enumerate(lines):
        row = spec.indent
        if spec.page and n and n % spec.page == 0:
            page = f"\fPage {n // spec.page + 1} of the Ridgeview club's run{spec.newline}"
            out.append(page)
            pos += _b(page)
        lab = spec.label.text(before, len(line)) if spec.label else ""
        if spec.label and spec.label.where in ("start", "both"):
            spans.append((pos + _b(row), pos + _b(row) + len(lab)))
            row += lab + spec.label.sep
        if n == 0:
            row += spec.opening
        if n == 0 and spec.integer_part is not None:
            for c in spec.integer_part + ".":
                offsets.append(pos + _b(row))
                full += c
                row += c
        g = spec.group or len(line) or 1
        for k in range(0, len(line), g):
            if k:
                row += spec.group_sep
            for c in line[k : k + g]:
                offsets.append(pos + _b(row))
                full += c.upper()
                row += c
        if spec.label and spec.label.where == "end":
            row += spec.label.sep
            spans.append((pos + _b(row), pos + _b(row) + len(lab)))
            row += lab
        elif spec.label and spec.label.where == "both":
            row += spec.label.end_sep
            end = spec.label.end_text(before, len(line))
            spans.append((pos + _b(row), pos + _b(row) + len(end)))
            row += end
        if n == len(lines) - 1:
            row += spec.mark
        if spec.continuation and n < len(lines) - 1:
            row += "\\"
        if n < len(lines) - 1 or spec.final_newline or spec.footer:
            row += spec.newline
        out.append(row)
        pos += _b(row)
        before += len(line)
    out.extend(f + spec.newline for f in spec.footer)
    content = "".join(out).encode("utf-8")
    stored = content
    if spec.compression == "gzip":
        stored = gzip.compress(content, mtime=0)
    elif spec.compression == "bzip2":
        stored = bz2.compress(content)
    elif spec.compression == "xz":
        stored = lzma.compress(content)
    return Written(content, stored, offsets, full, spans)


def suffix(spec: Spec) -> str:
    return {None: ".txt", "gzip": ".txt.gz", "bzip2": ".txt.bz2", "xz": ".txt.xz"}[spec.compression]
