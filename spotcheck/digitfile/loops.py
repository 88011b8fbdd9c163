"""The inner loops of the digit-file passes: the compiled ones (``_index.c``) and their Python twins.

Three loops, each with a twin here that returns the same and writes the same
(``tests/test_digitfile_index_twin.py`` compares them with Hypothesis):

* ``first_mismatch(data, units, table)``: the first byte whose character class
  differs from the regular unit (twin :func:`first_mismatch_py`);
* ``extract(data, table, norm, out, out_pos, units)``: validate an unlabelled
  chunk, copy its digits out, count line breaks, check the unit (twin :func:`extract_py`);
* ``extract_labelled(data, ..., layout, ...)``: whole labelled lines in their
  plain form, labels checked against their meaning (twin :func:`extract_labelled_py`).

``engine.backend.digitfile_loops`` chooses which serve (the compiled loops when
built, unless ``SPOTCHECK_PURE`` is set); :data:`LOOPS` says which and
:data:`LOOPS_NOTE` why.  The passes call them through this module
(``loops.extract(...)``), so a test can swap in a twin.

:class:`LoopLayout` is the one description of a labelled layout for the loops:
where the labels are, and for each label column its separator, radix, most
characters and :class:`~spotcheck.digitfile.syntax.LabelMeaning`.  Its
:meth:`~LoopLayout.codes` are the ints ``extract_labelled`` takes, and the twin
reads them back with :meth:`~LoopLayout.from_codes`; :meth:`LoopLayout.for_plan`
is the one place that says whether the loops read a detected layout at all.
The plain form of a line (the lines the loops take) is built from
``syntax.SEPARATORS`` (:func:`plain_split`), and labels are checked with
``LabelMeaning.agrees``, the one label rule.
"""

from __future__ import annotations

import dataclasses
import functools
import re
from typing import TYPE_CHECKING, Any

from spotcheck.digitfile.charsets import WS, digit_set
from spotcheck.digitfile.syntax import (
    KIND_CODES,
    SEP_CODES,
    SEPARATORS,
    WHERE_CODES,
    LabelMeaning,
    LabelSyntax,
    label_chars,
    most_label_chars,
)
from spotcheck.engine import backend

if TYPE_CHECKING:
    from spotcheck.digitfile.detect import Detection

__all__ = [
    "LOOPS",
    "LOOPS_NOTE",
    "LoopColumn",
    "LoopLayout",
    "PLAN_FIELDS",
    "extract",
    "extract_labelled",
    "extract_labelled_py",
    "extract_py",
    "first_mismatch",
    "first_mismatch_py",
    "plain_split",
]


# --- the layout record -------------------------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class LoopColumn:
    """One label column as the loops read it."""

    sep: str
    """A key of ``syntax.SEPARATORS``."""
    radix: int
    most: int
    """The most characters of a label (at most ``syntax.most_label_chars(radix)``)."""
    meaning: LabelMeaning

    def codes(self) -> tuple[int, int, int, int, int]:
        return (SEP_CODES.index(self.sep), self.radix, self.most, self.meaning.code, self.meaning.unit)


@dataclasses.dataclass(frozen=True)
class LoopLayout:
    """A labelled layout for the loops: ``where`` (``start``, ``end``, ``both``) and its columns
    (the one label, or the start and the end label)."""

    where: str
    columns: tuple[LoopColumn, ...]

    def codes(self) -> tuple[int, ...]:
        """The ``layout`` argument of ``extract_labelled``: where (0 start, 1 end, 2 both), then
        sep (0 mark, 1 blank), radix, most, kind (0 before, 1 first, 2 through) and unit of
        each column (the codes of ``syntax.WHERE_CODES``, ``SEP_CODES``, ``KIND_CODES``)."""
        out: tuple[int, ...] = (WHERE_CODES.index(self.where),)
        for column in self.columns:
            out += column.codes()
        return out

    @staticmethod
    @functools.lru_cache(maxsize=64)
    def from_codes(codes: tuple[int, ...]) -> LoopLayout:
        """The record back from :meth:`codes`; ``ValueError`` for codes the loops do not take
        (the compiled loop refuses the same)."""
        where = codes[0] if codes else -1
        if where not in (0, 1, 2) or len(codes) != (11 if where == 2 else 6):
            raise ValueError("extract_labelled: bad layout or buffer sizes")
        columns = []
        for i in range(1, len(codes), 5):
            sep, radix, most, kind, unit = codes[i : i + 5]
            if not (
                sep in (0, 1)
                and radix in (10, 16)
                and 1 <= most <= most_label_chars(radix)
                and kind in (0, 1, 2)
                and unit in (1, 2)
            ):
                raise ValueError("extract_labelled: bad layout or buffer sizes")
            columns.append(LoopColumn(SEP_CODES[sep], radix, most, LabelMeaning(KIND_CODES[kind], unit)))
        return LoopLayout(WHERE_CODES[where], tuple(columns))

    @staticmethod
    def for_plan(plan: Detection) -> LoopLayout | None:
        """The record for a plan's labels; None when the plan has no labels for the loops (a layout
        they do not know, or no labels: see :func:`reads`)."""
        syntax = plan.syntax
        if type(syntax) is not LabelSyntax or syntax.where not in WHERE_CODES:
            return None
        meanings = (plan.meaning, plan.end_meaning) if syntax.where == "both" else (plan.meaning,)
        columns = []
        for end, meaning in zip(syntax.ends, meanings, strict=True):
            if (
                type(end) is not LabelSyntax
                or end.sep not in SEP_CODES
                or type(meaning) is not LabelMeaning
                or meaning.kind not in KIND_CODES
                or meaning.unit not in (1, 2)
                or meaning.origin  # a slice's labels: the loops count from the file's start
            ):
                return None
            columns.append(LoopColumn(end.sep, end.radix, end.most, meaning))
        return LoopLayout(syntax.where, tuple(columns))


PLAN_FIELDS = frozenset(
    "base base_how explicit_base integer_part header_lines first_line_no labels syntax meaning "
    "end_meaning first_label first_label_text first_end_label_text digits_offset seg_end seg_cols "
    "seg_digits head_digits sample_digits template newline letter_case whole_file_in_head notes "
    "first_positions first_how".split()
)
"""The ``Detection`` fields the loops and the passes around them are written against (read, or
known not to bear on where the digits are).  A field added later for a new layout is not here:
a plan that sets it is not read by these loops (:func:`reads`) until they learn it."""


def reads(plan: Detection) -> bool:
    """True when the loops read this plan exactly as the index pass's own loops do."""
    for f in dataclasses.fields(plan):
        if f.name not in PLAN_FIELDS and getattr(plan, f.name) not in (None, False, 0, "", [], ()):
            return False
    both = plan.syntax is not None and plan.syntax.where == "both"
    if not both and (plan.end_meaning is not None or plan.first_end_label_text is not None):
        return False  # an end column's facts on a plan without one: not a layout known here
    return plan.syntax is None or LoopLayout.for_plan(plan) is not None


# --- the twins ---------------------------------------------------------------------------------------


def first_mismatch_py(data: bytes, units: bytes, table: bytes) -> int:
    """Index of the first byte of ``data`` whose class (``table``) differs from ``units``, or -1."""
    classes = data.translate(table)
    if classes == units[: len(data)]:
        return -1
    for i, (a, b) in enumerate(zip(classes, units, strict=False)):
        if a != b:
            return i
    return len(data)  # units shorter than data: not reached by the pass


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


@functools.lru_cache(maxsize=64)
def _plain_patterns(base: int, layout: LoopLayout) -> tuple[re.Pattern[bytes], ...]:
    """The plain form of a labelled line (the lines the loops take; see ``read_line`` in _index.c),
    built from ``SEPARATORS``: one end, one pattern with groups (label, body) or (body, label);
    both ends, the end label's pattern (searched), the start label's (matched on what is left)
    and the body's."""
    body = rb"([" + re.escape(digit_set(base)) + rb" \t]*)"

    def start(c: LoopColumn) -> bytes:
        return rb"[ \t]*(" + label_chars(c.radix, c.most) + rb")" + SEPARATORS[c.sep]

    def end(c: LoopColumn) -> bytes:
        return SEPARATORS[c.sep] + rb"(" + label_chars(c.radix, c.most) + rb")[ \t]*"

    if layout.where == "start":
        return (re.compile(start(layout.columns[0]) + body),)
    if layout.where == "end":
        return (re.compile(body + end(layout.columns[0])),)
    return (
        re.compile(end(layout.columns[1]) + rb"\Z"),
        re.compile(start(layout.columns[0])),
        re.compile(body),
    )


def plain_split(base: int, layout: tuple[int, ...], text: bytes) -> tuple[tuple[bytes, ...], bytes] | None:
    """``(labels, body)`` of a line that is not blanks only, when it has the plain form the loops
    take (labels: the one label, or the start and the end label); None otherwise.  Labels at both
    ends split as ``LabelSyntax.split_labels`` splits them: the end label off first, then the
    start label from what is left."""
    record = LoopLayout.from_codes(layout)
    pats = _plain_patterns(base, record)
    if record.where != "both":
        m = pats[0].fullmatch(text)
        if m is None:
            return None
        return ((m.group(1),), m.group(2)) if record.where == "start" else ((m.group(2),), m.group(1))
    me = pats[0].search(text)
    if me is None:
        return None
    b1 = me.start()
    ms = pats[1].match(text, 0, b1)
    if ms is None or pats[2].fullmatch(text, ms.end(), b1) is None:
        return None
    return (ms.group(1), me.group(1)), text[ms.end() : b1]


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

    ``layout`` is :meth:`LoopLayout.codes`."""
    data = bytes(data)
    record = LoopLayout.from_codes(tuple(layout))  # ValueError for codes the loops do not take
    if len(out) - out_pos < len(data) or step < 1 or before < 0:
        raise ValueError("extract_labelled: bad layout or buffer sizes")
    base = 16 if table[ord("A")] == ord("d") else 10
    columns = [(c.radix, c.meaning) for c in record.columns]
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
            meaning.agrees(int(label, radix), pos, nd)
            for label, (radix, meaning) in zip(split[0], columns, strict=True)
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


# --- the choice ----------------------------------------------------------------------------------------

_CHOICE = backend.digitfile_loops()
LOOPS: str = _CHOICE.backend
"""``"c"`` when the compiled loops serve, ``"python"`` when the twins do."""
LOOPS_NOTE: str = _CHOICE.note
"""Why (``engine.backend.digitfile_loops``)."""

_compiled: Any = _CHOICE.module
first_mismatch = _compiled.first_mismatch if _compiled is not None else first_mismatch_py
extract = _compiled.extract if _compiled is not None else extract_py
extract_labelled = _compiled.extract_labelled if _compiled is not None else extract_labelled_py
