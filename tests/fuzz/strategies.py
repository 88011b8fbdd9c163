"""Hypothesis strategies over the layout model (every family the reader promises to read)."""

from __future__ import annotations

from hypothesis import assume
from hypothesis import strategies as st

from tests.fuzz.writer import (
    BLANK_SEPS,
    FOOTERS,
    HEADERS,
    LONE_SEPS,
    MARK_SEPS,
    MARKS,
    NO_LETTER_MARKS,
    PAIRS,
    TABLE_SEPS,
    TYPESET_SEPS,
    Label,
    Spec,
    as_table,
)


@st.composite
def labels(draw, base: int, width: int | None, lines: int, n: int, where: str | None = None) -> Label | None:
    """A label family; ``where`` (``"start"``, ``"end"``, ``"both"``) fixes where, else drawn."""
    blank_ok = lines >= 8  # blank-separated labels are told from digits by their progression
    if where is None:
        where = draw(st.sampled_from(("start", "end", "both")))
    seps = MARK_SEPS + (BLANK_SEPS if blank_ok else ())
    if lines == 1:
        seps = LONE_SEPS
    sep = draw(st.sampled_from(seps))
    unit = 1
    if base == 16 and width is not None and width % 2 == 0 and n % 2 == 0 and draw(st.booleans()):
        unit = 2
    return Label(
        where=where,
        radix=16 if unit == 2 else 10,
        sep=sep,
        kind=draw(st.sampled_from(("before", "first"))) if where != "end" else "through",
        unit=unit,
        pad=draw(st.sampled_from((0, 0, 6, 8))),
        end_sep=draw(st.sampled_from(seps)) if where == "both" else "",
        end_pad=draw(st.sampled_from((0, 0, 6, 8))) if where == "both" else 0,
    )


@st.composite
def specs(draw, max_digits: int = 700, min_digits: int = 1, where: str | None = None) -> Spec:
    """Any digit string in any layout of the model; ``where`` given: always labelled there."""
    base = draw(st.sampled_from((10, 16)))
    alphabet = "0123456789" if base == 10 else "0123456789ABCDEF"
    n = draw(st.integers(min_digits, max_digits))
    digits = draw(st.text(alphabet, min_size=n, max_size=n))
    if base == 16 and not any(c in "ABCDEF" for c in digits[:200]):
        at = draw(st.integers(0, min(n, 200) - 1))
        digits = digits[:at] + draw(st.sampled_from("ABCDEF")) + digits[at + 1 :]
    width = draw(st.one_of(st.none(), st.integers(1, 120)))
    lines = 1 if width is None else -(-n // width)
    group = draw(st.one_of(st.none(), st.integers(1, 12)))
    label = draw(
        labels(base, width, lines, n, where) if where else st.one_of(st.none(), labels(base, width, lines, n))
    )
    if label is not None and label.blank:
        assume(width is None or width >= 2)
    header = tuple(draw(st.lists(st.sampled_from(HEADERS), max_size=3)))
    # What general-purpose software writes around the digits (writers.py), each now and then.
    plain_end = label is None or label.where == "start"  # nothing after an end label
    typeset = group is not None and draw(st.integers(0, 5)) == 0
    mark, opening = "", ""
    if plain_end and draw(st.integers(0, 4)) == 0:
        if draw(st.booleans()) and not header and label is None:
            opening, mark = draw(st.sampled_from(PAIRS))
        else:
            mark = draw(st.sampled_from(MARKS if base == 10 and n >= 64 else NO_LETTER_MARKS))
    spec = Spec(
        digits=digits,
        base=base,
        integer_part=draw(st.sampled_from((None, None, "3", "0", "12"))),
        width=width,
        group=group,
        group_sep=draw(st.sampled_from(TYPESET_SEPS))
        if typeset
        else draw(st.sampled_from((" ", " ", "\t", "  "))),
        label=label,
        header=header,
        newline=draw(st.sampled_from(("\n", "\r\n", "\r"))),
        lower=base == 16 and draw(st.booleans()),
        final_newline=draw(st.booleans()),
        compression=draw(st.sampled_from((None, None, None, "gzip", "bzip2", "xz"))),
        indent=draw(st.sampled_from(("", "", " "))),
        continuation=plain_end and lines > 1 and draw(st.integers(0, 4)) == 0,
        opening=opening,
        mark=mark,
        footer=tuple(draw(st.lists(st.sampled_from(FOOTERS), max_size=2)))
        if draw(st.integers(0, 4)) == 0
        else (),
        page=draw(st.integers(1, 6))
        if lines > 2 and (width or 0) >= 8 and draw(st.integers(0, 5)) == 0
        else None,
    )
    if where is None and n >= 8 and draw(st.integers(0, 9)) == 0:  # a table (writers.py)
        spec = as_table(
            spec,
            draw(st.sampled_from(TABLE_SEPS)),
            draw(st.sampled_from(("before", "first"))),
            draw(st.sampled_from((1, 1, 10, 64))),
        )
    return spec
