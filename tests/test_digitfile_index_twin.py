"""The compiled loops (digitfile/_index.c) against their Python twins (digitfile/loops.py)."""

from __future__ import annotations

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import loops
from spotcheck.digitfile.charsets import class_table, norm_table
from spotcheck.digitfile.syntax import LabelSyntax

_index = pytest.importorskip("spotcheck.digitfile._index")


@settings(max_examples=300, deadline=None)
@given(
    st.binary(min_size=1, max_size=40).map(lambda u: u.translate(class_table(16))),
    st.integers(0, 200),
    st.lists(st.tuples(st.integers(0, 10**4), st.integers(0, 255)), max_size=3),
    st.sampled_from((10, 16)),
)
def test_compiled_loop_agrees_with_python(unit: bytes, reps: int, edits, base: int) -> None:
    # Build data that follows the unit's classes, then damage a few bytes.
    table = class_table(base)
    sample = {
        ord("d"): b"7",
        ord(" "): b" ",
        ord("\t"): b"\t",
        ord("\r"): b"\r",
        ord("\n"): b"\n",
        ord("?"): b"x",
    }
    data = bytearray(b"".join(sample[c] for c in unit) * reps)
    for at, byte in edits:
        if data:
            data[at % len(data)] = byte
    units = (unit * (reps + 1)).translate(None)[: len(data) + len(unit)]
    units = bytes(units)
    want = loops.first_mismatch_py(bytes(data), units, table)
    assert _index.first_mismatch(bytes(data), units, table) == want


def test_compiled_loop_finds_the_exact_byte() -> None:
    table = class_table(10)
    units = b"dddd \n" * 1000
    data = bytearray(b"1234 \n" * 1000)
    assert _index.first_mismatch(bytes(data), units, table) == -1
    for at in (0, 7, 5999):
        bad = bytearray(data)
        bad[at] = ord("x")
        assert (
            _index.first_mismatch(bytes(bad), units, table)
            == at
            == loops.first_mismatch_py(bytes(bad), units, table)
        )


def test_short_units_are_refused() -> None:
    with pytest.raises(ValueError):
        _index.first_mismatch(b"123", b"dd", class_table(10))


# --- the stream's loops: _index.extract / extract_labelled against loops.extract_py / extract_labelled_py
# Contract: the same return tuple and the same digits written to ``out`` (bytes past the digits
# written are scratch), on chunks that follow a layout and on chunks with any byte replaced.

_BYTES = b"0123456789abcdefABCDEF \t\r\n:|x.#\x00\xff"


def _both_extract(data: bytes, base: int, units: bytes | None, out_pos: int) -> None:
    table, norm = class_table(base), norm_table(base)
    outs = [bytearray(b"\xee" * (out_pos + len(data))) for _ in range(2)]
    want = loops.extract_py(data, table, norm, outs[0], out_pos, units)
    got = _index.extract(data, table, norm, outs[1], out_pos, units)
    assert got == want
    k = want[0]
    assert outs[1][out_pos : out_pos + k] == outs[0][out_pos : out_pos + k]
    assert outs[1][:out_pos] == outs[0][:out_pos]


@settings(max_examples=400, deadline=None)
@given(
    st.binary(min_size=1, max_size=30).map(lambda u: u.translate(class_table(16)).replace(b"?", b"d")),
    st.integers(0, 300),
    st.lists(st.tuples(st.integers(0, 10**5), st.sampled_from(_BYTES)), max_size=3),
    st.sampled_from((10, 16)),
    st.booleans(),
    st.integers(0, 9),
)
def test_extract_agrees_with_python(
    unit: bytes, reps: int, edits, base: int, with_units: bool, out_pos: int
) -> None:
    sample = {ord("d"): b"7", ord(" "): b" ", ord("\t"): b"\t", ord("\r"): b"\r", ord("\n"): b"\n"}
    data = bytearray(b"".join(sample[c] for c in unit) * reps)
    for at, byte in edits:
        if data:
            data[at % len(data)] = byte
    units = unit * (reps + 1) if with_units else None
    _both_extract(bytes(data), base, units, out_pos)


@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=200), st.sampled_from((10, 16)))
def test_extract_agrees_on_any_bytes(data: bytes, base: int) -> None:
    _both_extract(data, base, None, 3)
    _both_extract(data, base, data.translate(class_table(base)), 0)


def test_extract_finds_a_stray_byte_at_every_place() -> None:
    clean = b"0123456789 abcdef\n" * 5
    for base in (10, 16):
        for at in range(len(clean)):
            for byte in b"x:\x00G":
                data = clean[:at] + bytes([byte]) + clean[at + 1 :]
                _both_extract(data, base, None, 0)
                assert (
                    _index.extract(data, class_table(16), norm_table(16), bytearray(len(data)), 0, None)[1]
                    == at
                )


def _line_text(draw, where: str, radix: int, base: int) -> bytes:
    digits = "0123456789ABCDEFabcdef" if base == 16 else "0123456789"
    body = draw(st.text(alphabet=digits + " \t", max_size=30))

    def label() -> str:
        return draw(
            st.text(alphabet="0123456789" + ("ABCDEFabcdef" if radix == 16 else ""), min_size=0, max_size=20)
        )

    def sep() -> str:
        return draw(st.sampled_from((":", " : ", "|", "\t|", " ", "\t", "  ", "")))

    pad = draw(st.sampled_from(("", " ", "\t")))
    if where == "start":
        text = f"{pad}{label()}{sep()}{body}"
    elif where == "end":
        text = f"{body}{sep()}{label()}{pad}"
    else:
        text = f"{pad}{label()}{sep()}{body}{sep()}{label()}{pad}"
    return text.encode() + draw(st.sampled_from((b"\n", b"\r\n", b"\n", b"\r\r\n")))


def _label_text(value: int, radix: int) -> str:
    return str(value) if radix == 10 else format(value, "x")


@st.composite
def labelled_chunks(draw):
    """A chunk of lines for ``extract_labelled``: mostly lines whose labels agree (so the loops get
    far), some lines of any shape, maybe one byte changed; labels at the start, the end or both."""
    base = draw(st.sampled_from((10, 16)))
    where = draw(st.sampled_from(("start", "end", "both")))
    radix = draw(st.sampled_from((10, 16)))
    # per label column (one, or the start and the end label): sep, kind, unit
    cols = [
        (
            draw(st.sampled_from(("mark", "blank"))),
            draw(st.sampled_from((0, 1, 2))),
            draw(st.sampled_from((1, 2))),
        )
        for _ in range(2 if where == "both" else 1)
    ]
    unit = max(u for _, _, u in cols)
    before = draw(st.integers(0, 10**6)) * unit
    lines = []
    pos = before
    for _ in range(draw(st.integers(0, 12))):
        if draw(st.integers(0, 3)) == 0:
            lines.append(_line_text(draw, where, radix, base))
            continue
        nd = draw(st.integers(0, 20)) * unit
        body = "".join(draw(st.sampled_from("0123456789")) for _ in range(nd))
        labels = []
        seps = []
        for sep, kind, u in cols:
            c = pos + nd if kind == 2 else pos
            labels.append(_label_text(c // u + (kind == 1), radix))
            seps.append((":", " | ", "\t:\t")[nd % 3] if sep == "mark" else (" ", "\t ")[nd % 2])
        if where == "start":
            text = f"{labels[0]}{seps[0]}{body}"
        elif where == "end":
            if not nd and cols[0][0] == "blank":
                seps[0] = " "
            text = f"{body}{seps[0]}{labels[0]}"
        else:
            if not nd and cols[1][0] == "blank" and draw(st.booleans()):
                seps[1] = "  "  # a blank for each separator: a plain line without digits
            text = f"{labels[0]}{seps[0]}{body}{seps[1]}{labels[1]}"
        lines.append(text.encode() + b"\n")
        pos += nd
    data = b"".join(lines) + draw(st.sampled_from((b"", b"12", b"12:3")))
    if data and draw(st.booleans()):
        at = draw(st.integers(0, len(data) - 1))
        data = data[:at] + bytes([draw(st.sampled_from(_BYTES))]) + data[at + 1 :]
    layout: tuple[int, ...] = (("start", "end", "both").index(where),)
    for sep, kind, u in cols:
        most = draw(st.integers(1, 18 if radix == 10 else 16))
        layout += (0 if sep == "mark" else 1, radix, most, kind, u)
    return data, base, layout, before


@settings(max_examples=600, deadline=None)
@given(labelled_chunks(), st.integers(1, 40), st.integers(-50, 50), st.integers(0, 5))
def test_extract_labelled_agrees_with_python(case, step: int, last_index: int, out_pos: int) -> None:
    data, base, layout, before = case
    table, norm = class_table(base), norm_table(base)
    outs = [bytearray(b"\xee" * (out_pos + len(data))) for _ in range(2)]
    args = (layout, before, 1000, 7, step, last_index)
    want = loops.extract_labelled_py(data, table, norm, outs[0], out_pos, *args)
    got = _index.extract_labelled(data, table, norm, outs[1], out_pos, *args)
    assert got == want
    k = want[1]
    assert outs[1][out_pos : out_pos + k] == outs[0][out_pos : out_pos + k]


def test_extract_labelled_takes_plain_lines_and_stops_at_the_others() -> None:
    table, norm = class_table(10), norm_table(10)
    data = b"0: 1234\n4: 5678\n  \n8 :9\n10: 1\n"  # the last label should be 9
    for fn in (_index.extract_labelled, loops.extract_labelled_py):
        out = bytearray(len(data))
        used, nd, lines, stop, entries, last = fn(
            data, table, norm, out, 0, (0, 0, 10, 18, 0, 1), 0, 0, 1, 1, -1
        )
        assert (used, nd, lines, stop, bytes(out[:nd])) == (data.index(b"10:"), 9, 4, 2, b"123456789")
        assert entries == [(1, 0, 1), (5, 8, 2), (9, 19, 4)] and last == 19


def test_extract_labelled_reads_both_ends() -> None:
    table, norm = class_table(10), norm_table(10)
    # start labels count the digits before, end labels through the line; the fourth end label lies
    data = b"   0: 1234 5678 : 8\n   8: 9012  :  12\r\n \n  12:  : 12\n12: 3456 : 15\n"
    layout = (2, 0, 10, 18, 0, 1, 0, 10, 18, 2, 1)
    for fn in (_index.extract_labelled, loops.extract_labelled_py):
        out = bytearray(len(data))
        used, nd, lines, stop, entries, last = fn(data, table, norm, out, 0, layout, 0, 0, 1, 1, -1)
        assert (used, nd, lines, stop, bytes(out[:nd])) == (
            data.index(b"12: 3456"),
            12,
            4,
            2,
            b"123456789012",
        )
        assert entries == [(1, 0, 1), (9, 20, 2)] and last == 20
        with pytest.raises(ValueError):
            fn(data, table, norm, out, 0, layout[:6] + (0,), 0, 0, 1, 1, -1)  # "both" needs 11 ints
        with pytest.raises(ValueError):
            fn(data, table, norm, out, 0, (0, *layout[1:]), 0, 0, 1, 1, -1)  # one end needs 6


@settings(max_examples=400, deadline=None)
@given(labelled_chunks())
# a blank before an end mark is the end separator's: no blank is left for the start's
@example((b"0 :0\n", 10, (2, 1, 10, 1, 0, 1, 0, 10, 1, 0, 1), 0))
@example((b"1  20\n1 2 20\n", 10, (2, 1, 10, 18, 0, 1, 1, 10, 18, 0, 1), 0))
def test_the_loops_plain_lines_split_as_the_line_rule_splits_them(case) -> None:
    """A line the loops take is read as the index pass's own rule (``LabelSyntax.split_labels``)
    reads it: the same labels, the same body digits."""
    data, base, layout, _before = case
    where = ("start", "end", "both")[layout[0]]
    seps = [("mark", "blank")[layout[i]] for i in range(1, len(layout), 5)]
    radix = layout[2]
    syntax = LabelSyntax(where, radix, *seps)  # "both": the start's separator, then the end's
    for raw in data.split(b"\n")[:-1]:
        text = raw[:-1] if raw.endswith(b"\r") else raw
        split = loops.plain_split(base, layout, text) if text.strip(b" \t") else None
        if split is None:
            continue
        found, b0, b1 = syntax.split_labels(text)
        assert found == split[0], text
        assert text[b0:b1].translate(None, b" \t") == split[1].translate(None, b" \t"), text
