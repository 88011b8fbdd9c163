"""The compiled first-pass loop (digitfile/_index.c) against its Python twin (index.first_mismatch_py)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import index
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
