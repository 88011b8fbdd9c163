"""The compiled first-pass loop (digitfile/_index.c) against its Python twin (index.first_mismatch_py)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import index, stream
from spotcheck.digitfile.charsets import class_table

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
    want = index.first_mismatch_py(bytes(data), units, table)
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
            == index.first_mismatch_py(bytes(bad), units, table)
        )


def test_short_units_are_refused() -> None:
    with pytest.raises(ValueError):
        _index.first_mismatch(b"123", b"dd", class_table(10))


# --- the stream's loops: _index.extract / extract_labelled against stream.extract_py / extract_labelled_py
# Contract: the same return tuple and the same digits written to ``out`` (bytes past the digits
# written are scratch), on chunks that follow a layout and on chunks with any byte replaced.

_BYTES = b"0123456789abcdefABCDEF \t\r\n:|x.#\x00\xff"


def _both_extract(data: bytes, base: int, units: bytes | None, out_pos: int) -> None:
    table, norm = class_table(base), stream.norm_table(base)
    outs = [bytearray(b"\xee" * (out_pos + len(data))) for _ in range(2)]
    want = stream.extract_py(data, table, norm, outs[0], out_pos, units)
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
                    _index.extract(
                        data, class_table(16), stream.norm_table(16), bytearray(len(data)), 0, None
                    )[1]
                    == at
                )


def _line_text(draw, where: str, sep: str, radix: int, base: int) -> bytes:
    digits = "0123456789ABCDEFabcdef" if base == 16 else "0123456789"
    body = draw(st.text(alphabet=digits + " \t", max_size=30))
    label = draw(
        st.text(alphabet="0123456789" + ("ABCDEFabcdef" if radix == 16 else ""), min_size=0, max_size=20)
    )
    s = draw(st.sampled_from((":", " : ", "|", "\t|", " ", "\t", "  ", "")))
    pad = draw(st.sampled_from(("", " ", "\t")))
    text = f"{pad}{label}{s}{body}" if where == "start" else f"{body}{s}{label}{pad}"
    return text.encode() + draw(st.sampled_from((b"\n", b"\r\n", b"\n", b"\r\r\n")))


@st.composite
def labelled_chunks(draw):
    base = draw(st.sampled_from((10, 16)))
    where = draw(st.sampled_from(("start", "end")))
    sep = draw(st.sampled_from(("mark", "blank")))
    radix = draw(st.sampled_from((10, 16)))
    kind = draw(st.sampled_from((0, 1, 2)))
    unit = draw(st.sampled_from((1, 2)))
    before = draw(st.integers(0, 10**6))
    # Mostly lines whose labels agree, so the loops get far; some lines of any shape.
    lines = []
    pos = before
    for _ in range(draw(st.integers(0, 12))):
        if draw(st.integers(0, 3)) == 0:
            lines.append(_line_text(draw, where, sep, radix, base))
            continue
        nd = draw(st.integers(0, 20)) * unit
        body = "".join(draw(st.sampled_from("0123456789")) for _ in range(nd))
        c = pos + nd if kind == 2 else pos
        value = c // unit + (kind == 1)
        label = str(value) if radix == 10 else format(value, "x")
        s = (":", " | ", "\t:\t")[nd % 3] if sep == "mark" else (" ", "\t ")[nd % 2]
        if not nd and sep == "blank" and where == "end":
            s = " "
        text = f"{label}{s}{body}" if where == "start" else f"{body}{s}{label}"
        lines.append(text.encode() + b"\n")
        pos += nd
    data = b"".join(lines) + draw(st.sampled_from((b"", b"12", b"12:3")))
    if data and draw(st.booleans()):
        at = draw(st.integers(0, len(data) - 1))
        data = data[:at] + bytes([draw(st.sampled_from(_BYTES))]) + data[at + 1 :]
    most = draw(st.integers(1, 18 if radix == 10 else 16))
    layout = (0 if where == "start" else 1, 0 if sep == "mark" else 1, radix, most, kind, unit)
    return data, base, layout, before


@settings(max_examples=600, deadline=None)
@given(labelled_chunks(), st.integers(1, 40), st.integers(-50, 50), st.integers(0, 5))
def test_extract_labelled_agrees_with_python(case, step: int, last_index: int, out_pos: int) -> None:
    data, base, layout, before = case
    table, norm = class_table(base), stream.norm_table(base)
    outs = [bytearray(b"\xee" * (out_pos + len(data))) for _ in range(2)]
    args = (layout, before, 1000, 7, step, last_index)
    want = stream.extract_labelled_py(data, table, norm, outs[0], out_pos, *args)
    got = _index.extract_labelled(data, table, norm, outs[1], out_pos, *args)
    assert got == want
    k = want[1]
    assert outs[1][out_pos : out_pos + k] == outs[0][out_pos : out_pos + k]


def test_extract_labelled_takes_plain_lines_and_stops_at_the_others() -> None:
    table, norm = class_table(10), stream.norm_table(10)
    data = b"0: 1234\n4: 5678\n  \n8 :9\n10: 1\n"  # the last label should be 9
    for fn in (_index.extract_labelled, stream.extract_labelled_py):
        out = bytearray(len(data))
        used, nd, lines, stop, entries, last = fn(
            data, table, norm, out, 0, (0, 0, 10, 18, 0, 1), 0, 0, 1, 1, -1
        )
        assert (used, nd, lines, stop, bytes(out[:nd])) == (data.index(b"10:"), 9, 4, 2, b"123456789")
        assert entries == [(1, 0, 1), (5, 8, 2), (9, 19, 4)] and last == 19
