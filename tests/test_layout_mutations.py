"""Mutated digit files: refused with the place named, or read with digits that differ only at the mutation.

The oracle (tests/fuzz/oracle.py) knows from the writer where every character
went; a reading that shifts or re-labels digits without a finding fails.
"""

from __future__ import annotations

import random
import tempfile

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from spotcheck.errors import SpotcheckError
from tests.fuzz.mutate import Tally, compress, mutation, one_input
from tests.fuzz.oracle import (
    acceptable_mutation,
    another_valid_file,
    place_named,
    read_back,
    read_layout,
    widen,
)
from tests.fuzz.strategies import specs
from tests.fuzz.writer import Label, Spec, write
from tests.reference import pi_decimal, pi_hex


def judge(spec: Spec, seed: int) -> None:
    w = write(spec)
    rng = random.Random(seed)
    content, a, b, inserted, kind = mutation(rng, spec, w.content, w.label_spans)
    lo = sum(1 for o in w.offsets if o < a)
    hi = sum(1 for o in w.offsets if o < b)
    lo, hi, inserted = widen(w, lo, hi, a, b, inserted, spec.label.widest_sep if spec.label else 0)
    with tempfile.TemporaryDirectory() as d:
        try:
            got, findings = read_back(spec, compress(spec, content), d)
        except SpotcheckError as exc:
            assert place_named(exc), str(exc)
            return
    assert acceptable_mutation(w.full, got, findings, lo, hi, inserted), (kind, a, content[:200], got[:80])


@settings(max_examples=200, deadline=None)
# At least 8 digits: in a file of one or two digits, a mutated label can make another valid file
# (``0:     1`` -> ``0:8    1``) that no reader could tell from a written one.
@given(specs(max_digits=400, min_digits=8), st.integers(0, 2**32))
def test_mutated_file_is_refused_or_read_where_it_was_hit(spec: Spec, seed: int) -> None:
    # Digits like 00000000 are a valid label themselves: a damaged label beside them makes another
    # valid file.  Real digit strings have more than two distinct digits.
    assume(len(set(spec.digits)) > 2)
    judge(spec, seed)


def test_label_change_is_a_finding() -> None:
    d = pi_decimal(1000)
    spec = Spec(d, 10, None, width=50, group=10, label=Label("start", 10, " ", "first", pad=8))
    w = write(spec)
    s, e = w.label_spans[5]
    content = w.content[: e - 1] + b"7" + w.content[e:]  # line 6's label 251 -> 257
    with tempfile.TemporaryDirectory() as tmp:
        got, findings = read_back(spec, content, tmp)
    assert got == w.full  # the digits are read as written
    assert [(f.kind, f.line, f.expected, f.found) for f in findings] == [("label-mismatch", 6, 251, "257")]


def test_dropped_line_is_a_finding_at_the_next_line() -> None:
    h = pi_hex(640)
    spec = Spec(h, 16, None, width=32, group=8, label=Label("start", 16, "  ", "before", 2, 8))
    w = write(spec)
    rows = w.content.split(b"\n")
    content = b"\n".join(rows[:3] + rows[4:])
    with tempfile.TemporaryDirectory() as tmp:
        got, findings = read_back(spec, content, tmp)
    assert got == h[:96] + h[128:]
    assert findings[0].kind == "label-mismatch" and findings[0].line == 4
    assert (findings[0].expected, findings[0].found) == (0x30, "40")  # bytes before line 4 (hex label)


@settings(max_examples=100, deadline=None)
@given(specs(max_digits=400, min_digits=8, where="both"), st.integers(0, 2**32))
def test_mutated_file_labelled_at_both_ends(spec: Spec, seed: int) -> None:
    """A label changed at either end, a line dropped or doubled, a byte hit: never a silent shift."""
    assume(len(set(spec.digits)) > 2)
    judge(spec, seed)


BOTH = Spec(
    pi_decimal(1500), 10, None, width=30, group=10, label=Label("both", 10, ": ", "first", end_sep=" : ")
)
HEX_BOTH = Spec(
    pi_hex(640), 16, None, width=16, group=8, label=Label("both", 16, "  ", "before", 2, 8, "  ", 8)
)


def _read(spec: Spec, content: bytes):
    with tempfile.TemporaryDirectory() as tmp:
        return read_back(spec, content, tmp)


def _label_findings(findings) -> list[tuple]:
    return [(f.kind, f.line, f.end, f.expected, f.found) for f in findings]


@pytest.mark.parametrize(("span", "end"), [(10, "start"), (11, "end")])
def test_label_changed_at_either_end_is_a_finding_naming_the_end(span: int, end: str) -> None:
    w = write(BOTH)
    s, e = w.label_spans[span]  # line 6: spans 10 (start label 151) and 11 (end label 180)
    content = w.content[: e - 1] + b"7" + w.content[e:]
    got, findings = _read(BOTH, content)
    assert got == w.full  # the digits are read as written
    expected = 151 if end == "start" else 180
    found = str(expected)[:-1] + "7"
    assert _label_findings(findings) == [("label-mismatch", 6, end, expected, found)]
    assert findings[0].message.startswith(f"{end} label {found} disagrees")


def test_dropped_line_is_a_finding_at_both_ends_of_the_next_line() -> None:
    w = write(HEX_BOTH)
    rows = w.content.split(b"\n")
    content = b"\n".join(rows[:3] + rows[4:])
    got, findings = _read(HEX_BOTH, content)
    h = HEX_BOTH.digits
    assert got == h[:48] + h[64:]
    # Line 4 now holds the digits of old line 5: 24 bytes before it and 32 through it, labelled 0x20 and 0x28.
    assert _label_findings(findings)[:2] == [
        ("label-mismatch", 4, "start", 0x18, "20"),
        ("label-mismatch", 4, "end", 0x20, "28"),
    ]


def test_doubled_line_is_a_finding_at_both_ends_of_the_copy() -> None:
    w = write(BOTH)
    rows = w.content.split(b"\n")
    content = b"\n".join(rows[:3] + rows[2:])
    got, findings = _read(BOTH, content)
    d = BOTH.digits
    assert got == d[:90] + d[60:]
    assert _label_findings(findings)[:2] == [
        ("label-mismatch", 4, "start", 91, "61"),
        ("label-mismatch", 4, "end", 120, "90"),
    ]


def test_inserted_digit_is_not_made_good_by_reading_the_first_digit_as_a_label() -> None:
    """One line ``0 0 f f ... | 231`` with a digit inserted: the end label now disagrees by one.

    Reading the first digit ``0`` (set off by a blank) as a start label would make both labels
    agree again and shift every digit; a blank-separated column needs evidence to be labels,
    and one line has none (the fuzz found this).
    """
    digits = "0" + pi_hex(230)
    spec = Spec(digits, 16, None, group=1, label=Label("end", 10, "\t|\t", "through", pad=6))
    w = write(spec)
    at = w.offsets[200]
    content = w.content[:at] + b"C" + w.content[at:]
    lo = hi = 200
    try:
        got, findings = _read(spec, content)
    except SpotcheckError as exc:
        assert place_named(exc), str(exc)
        return
    assert acceptable_mutation(w.full, got, findings, lo, hi, 1), got[:40]


def test_fuzz_sample() -> None:
    """A few thousand fuzz inputs (benchmarks/fuzz_digitfile.py runs 10^5)."""
    tally = Tally()
    rng = random.Random(20261202)
    with tempfile.TemporaryDirectory() as d:
        for i in range(3000):
            one_input(rng, tally, d, mutate=i % 2 == 1)
    assert (tally.crashes, tally.hangs, tally.misreads, tally.unplaced) == (0, 0, 0, 0), tally.examples


def test_a_lost_line_break_after_a_header_is_proven_another_valid_file() -> None:
    """The fuzz's one kind of honest surprise: the mutated bytes are another correct file.

    A lost CR merges the free-text header line with the first digit line; the
    reader rightly takes the merged line as header text, so the first two digits
    are gone from the reading, outside the mutated span.  The oracle's proof
    finds the writer spec that makes these exact bytes from the digits read; the
    same proof fails for a reading that drops one more digit.
    """
    h = pi_hex(64)
    spec = Spec(h, 16, None, width=2, header=("source: our own run #7, 2 cores",), newline="\r")
    w = write(spec)
    cut = len(spec.header[0])
    content = w.content[:cut] + w.content[cut + 1 :]  # the header's CR deleted
    with tempfile.TemporaryDirectory() as tmp:
        got, findings, layout = read_layout(spec, content, tmp)
    assert got == h[2:] and not findings
    lo, hi, inserted = widen(w, cut, cut, cut, cut + 1, 0, 0)
    assert not acceptable_mutation(w.full, got, findings, lo, hi, inserted)
    proof = another_valid_file(spec, content, got, layout)
    assert proof is not None
    assert write(proof).content == content and proof.digits == got
    assert proof.header == ("source: our own run #7, 2 cores" + h[:2],)
    assert another_valid_file(spec, content, got[1:], layout) is None


def test_the_proof_finds_a_label_made_by_the_mutation() -> None:
    """An inserted ``|`` can make a one-line file's first digit a start label that counts right."""
    h = pi_hex(40)
    spec = Spec("1" + h, 16, None)
    content = write(spec).content
    mutated = content[:1] + b" | " + content[1:]  # ``1 | 243F...``: a label 1 (first position 1)
    with tempfile.TemporaryDirectory() as tmp:
        got, findings, layout = read_layout(spec, mutated, tmp)
    assert got == h and layout.labels == "start" and not findings
    proof = another_valid_file(spec, mutated, got, layout)
    assert proof is not None and proof.label is not None and write(proof).content == mutated
    assert (proof.label.where, proof.label.kind, proof.label.sep) == ("start", "first", " | ")
