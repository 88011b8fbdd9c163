"""Round trips: any digit string written in any layout of the model reads back exactly.

The writer (tests/fuzz/writer.py) formats with plain string operations and is
independent of the reader.  Example digits are pi from gmpy2/MPFR
(tests/reference.py); the property draws arbitrary digit strings.
"""

from __future__ import annotations

import re
import tempfile

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from spotcheck.digitfile import open_digit_file
from spotcheck.digitfile.syntax import BOTH_SYNTAXES, SEPARATORS, SYNTAXES
from tests.fuzz.oracle import round_trip
from tests.fuzz.strategies import specs
from tests.fuzz.writer import HEADERS, Label, Spec, suffix, write
from tests.reference import pi_decimal, pi_hex

H = pi_hex(1200)
D = pi_decimal(1200)

EXAMPLES = {
    "one line": Spec(H, 16, "3"),
    "fixed width": Spec(D, 10, "3", width=64),
    "groups of k": Spec(H, 16, None, width=60, group=10),
    "start ':' 1-based digits": Spec(
        D, 10, None, width=50, group=10, label=Label("start", 10, ": ", "first", pad=8)
    ),
    "start '|' 0-based": Spec(H, 16, None, width=64, label=Label("start", 10, " | ", "before")),
    "start space": Spec(D, 10, None, width=50, group=10, label=Label("start", 10, " ", "first", pad=8)),
    "start tab": Spec(D, 10, "3", width=50, label=Label("start", 10, "\t", "before")),
    "start hex byte offsets": Spec(
        H, 16, None, width=32, group=8, label=Label("start", 16, "  ", "before", 2, 8)
    ),
    "start hex byte offsets ':'": Spec(
        H, 16, None, width=32, group=8, label=Label("start", 16, ": ", "before", 2, 8)
    ),
    "start hex byte offsets 1-based": Spec(H, 16, None, width=40, label=Label("start", 16, ": ", "first", 2)),
    "end labels grouped": Spec(D, 10, "3", width=50, group=10, label=Label("end", 10, " : ", "through")),
    "end labels ungrouped": Spec(D, 10, None, width=50, label=Label("end", 10, " : ", "through")),
    "end labels blank": Spec(D, 10, None, width=50, group=5, label=Label("end", 10, "  ", "through")),
    "header with numbers": Spec(H, 16, "3", width=64, header=HEADERS[1:2] + HEADERS[4:5]),
    "comments": Spec(D, 10, "3", width=64, header=(HEADERS[0], "", HEADERS[3])),
    "CRLF": Spec(D, 10, "3", width=50, group=10, newline="\r\n", label=Label("start", 10, ": ", "first")),
    "CR": Spec(H, 16, "3", width=64, group=16, newline="\r"),
    "lower case": Spec(H, 16, "3", width=64, group=8, lower=True),
    "gzip": Spec(H, 16, "3", width=64, compression="gzip"),
    "bzip2": Spec(D, 10, None, width=50, compression="bzip2", label=Label("end", 10, ":", "through")),
    "xz": Spec(H, 16, None, width=32, compression="xz", label=Label("start", 16, " ", "before", 2, 8)),
    "no final newline": Spec(D, 10, "3", width=70, final_newline=False),
    "tabs between groups": Spec(H, 16, "3", width=40, group=10, group_sep="\t"),
}

# Labels at both ends of every line: each column must follow its own progression.
BOTH_EXAMPLES = {
    "both ':' decimal 1-based, grouped": Spec(
        D, 10, None, width=30, group=10, label=Label("both", 10, ": ", "first", end_sep=" : ")
    ),
    "both ':' decimal 1-based, integer part": Spec(
        D, 10, "3", width=50, label=Label("both", 10, ": ", "first", end_sep=" : ")
    ),
    "both hex byte offsets, blanks (hex dump)": Spec(
        H, 16, None, width=16, group=8, label=Label("both", 16, "  ", "before", 2, 8, "  ", 8)
    ),
    "both hex byte offsets ':' 1-based": Spec(
        H, 16, None, width=40, label=Label("both", 16, ": ", "first", 2, end_sep=": ")
    ),
    "both blanks decimal, right-aligned": Spec(
        D, 10, None, width=20, label=Label("both", 10, "  ", "first", pad=6, end_sep="  ")
    ),
    "both '|' 0-based, decimal labels on hex digits": Spec(
        H, 16, None, width=24, label=Label("both", 10, " | ", "before", pad=4, end_sep=" | ")
    ),
    "both tabs": Spec(D, 10, None, width=50, group=10, label=Label("both", 10, "\t", "before", end_sep="\t")),
    "both ':' at the start, blanks at the end": Spec(
        D, 10, None, width=50, group=10, label=Label("both", 10, ": ", "first", pad=5, end_sep="  ")
    ),
    "both blanks at the start, '|' at the end": Spec(
        H, 16, None, width=32, group=8, label=Label("both", 16, " ", "before", 2, 8, "|")
    ),
    "both CRLF": Spec(
        D, 10, "3", width=50, group=10, newline="\r\n", label=Label("both", 10, ": ", "first", end_sep=" : ")
    ),
    "both CR, lower case": Spec(
        H,
        16,
        None,
        width=32,
        newline="\r",
        lower=True,
        label=Label("both", 16, ": ", "before", 2, end_sep=" : "),
    ),
    "both gzip": Spec(
        H,
        16,
        "3",
        width=64,
        group=16,
        compression="gzip",
        label=Label("both", 10, " | ", "first", end_sep=" | "),
    ),
    "both xz, header": Spec(
        D,
        10,
        None,
        width=60,
        compression="xz",
        header=HEADERS[:2],
        label=Label("both", 10, ":", "before", end_sep=":"),
    ),
    "both one line": Spec(D[:100], 10, "3", label=Label("both", 10, " : ", "before", end_sep=" : ")),
    "both no final newline": Spec(
        D, 10, None, width=70, final_newline=False, label=Label("both", 10, " ", "first", end_sep=" ")
    ),
}
EXAMPLES.update(BOTH_EXAMPLES)

# What general-purpose software writes around the digits (spotcheck/digitfile/writers.py).
WRITER_EXAMPLES = {
    "continuation lines, decimal": Spec(D, 10, "3", width=69, continuation=True),
    "continuation lines, hex, CRLF": Spec(H, 16, "3", width=69, continuation=True, newline="\r\n"),
    "continuation lines, no point": Spec(D, 10, None, width=70, continuation=True),
    "precision suffix": Spec(D, 10, "3", mark="`1201."),
    "exponent zero": Spec(D, 10, "3", width=64, mark="e0"),
    "binary exponent zero": Spec(D, 10, "3", mark="b0"),
    "quoted number": Spec(D, 10, "3", opening="mpf('", mark="')"),
    "bracketed hex": Spec(H, 16, "3", width=60, opening="[", mark="]"),
    "footer lines": Spec(D, 10, "3", width=50, footer=("-- end --", "Total: 1200 digits")),
    "page breaks": Spec(D, 10, "3", width=50, group=10, page=6),
    "page breaks, start labels": Spec(
        H, 16, None, width=32, page=4, label=Label("start", 10, ": ", "first", pad=6)
    ),
    "no-break spaces": Spec(D, 10, "3", width=50, group=10, group_sep="\u00a0"),
    "thin spaces, hex": Spec(H, 16, "3", width=60, group=5, group_sep="\u2009"),
    "narrow no-break spaces, end labels": Spec(
        D, 10, None, width=40, group=4, group_sep="\u202f", label=Label("end", 10, " : ", "through")
    ),
    "table, comma, header row": Spec(
        D[:400], 10, None, width=1, header=("position,digit",), label=Label("start", 10, ",", "first")
    ),
    "table, semicolon, groups of 10": Spec(D, 10, None, width=10, label=Label("start", 10, ";", "before")),
    "figure spaces, gzip": Spec(D, 10, "3", width=60, group=3, group_sep="\u2007", compression="gzip"),
}
EXAMPLES.update(WRITER_EXAMPLES)


def check(spec: Spec) -> None:
    w = write(spec)
    with tempfile.TemporaryDirectory() as d:
        got, findings = round_trip(spec, w, d)
    assert findings == [], findings
    assert got == w.full, (w.content[:300], got[:80], w.full[:80])


def _apply_examples(f):
    for spec in EXAMPLES.values():
        f = example(spec)(f)
    return f


@_apply_examples
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(specs())
def test_round_trip(spec: Spec) -> None:
    check(spec)


def test_examples_cover_the_families() -> None:
    assert len(EXAMPLES) >= 12
    kinds = {(s.label.radix, s.label.unit, s.label.kind) for s in BOTH_EXAMPLES.values() if s.label}
    assert kinds >= {(10, 1, "first"), (10, 1, "before"), (16, 2, "first"), (16, 2, "before")}


@given(specs(where="both"))
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_round_trip_both_ends(spec: Spec) -> None:
    check(spec)


@pytest.mark.parametrize("name", list(BOTH_EXAMPLES))
def test_layout_says_both_ends(name: str, tmp_path) -> None:
    """The layout read is the one written: labels at both ends, each with its own meaning."""
    spec = BOTH_EXAMPLES[name]
    assert spec.label is not None
    w = write(spec)
    path = tmp_path / ("x" + suffix(spec))
    path.write_bytes(w.stored)
    with open_digit_file(path, base=spec.base) as df:
        lay = df.layout
    start = spec.label.kind if spec.label.unit == 1 else f"bytes-{spec.label.kind}"
    through = "through" if spec.label.unit == 1 else "bytes-through"
    assert (lay.labels, lay.label_meaning, lay.end_label_meaning) == ("both", start, through)


# --- the bulk patterns (whole chunks) and the line patterns read the same labels ---------------
_LINE = st.lists(
    # "\r " and " \r": a CR inside a line (a blank between a CRLF's CR and its LF, say)
    st.sampled_from(
        ["1", "2", "9", "0", "10", "123", "a", "F", "0000000f", ":", "|", " ", "  ", "\t", "x", "\r "]
    ),
    max_size=8,
).map("".join)
_CHUNK = st.tuples(
    st.lists(_LINE, min_size=1, max_size=6), st.sampled_from(["\n", "\r\n"]), st.booleans()
).map(lambda t: t[1].join(t[0]) + (t[1] if t[2] else ""))
ALL_SYNTAXES = SYNTAXES + BOTH_SYNTAXES


@given(_CHUNK)
@settings(max_examples=300, deadline=None)
def test_end_labels_reversed_split_agrees_with_the_forward_pattern(text: str) -> None:
    """The end-label split runs on the reversed chunk; forwards it is ``sep (label) [ \t\r]*`` before ``CR* $``.

    Blanks and CRs after the label may come in any order (the line pattern's rule); the
    CRs just before the line break stay.
    """
    data = text.encode()
    for syntax in (s for s in SYNTAXES if s.where == "end"):
        lab = rb"[0-9]{1,18}" if syntax.radix == 10 else rb"[0-9A-Fa-f]{1,16}"
        forward = re.compile(SEPARATORS[syntax.sep] + rb"(" + lab + rb")[ \t\r]*?(?=\r*$)", re.M)
        parts = forward.split(data)
        assert syntax.split(data) == (b"".join(parts[0::2]), parts[1::2]), syntax
        assert syntax.strip(data) == b"".join(parts[0::2])


@given(_CHUNK)
@settings(max_examples=300, deadline=None)
def test_bulk_and_line_patterns_read_the_same_labels(text: str) -> None:
    """What the pass's list-level check sees (``split_all``) is what its line loop sees (``split_labels``)."""
    data = text.encode()
    for syntax in ALL_SYNTAXES:
        cleaned, found = syntax.split_all(data)
        lines = data.split(b"\n")
        if data.endswith(b"\n"):
            lines.pop()
        per_line = [syntax.split_labels(t[:-1] if t.endswith(b"\r") else t) for t in lines]
        for k in range(len(syntax.ends)):
            assert found[k] == [labels[k] for labels, _, _ in per_line if labels[k] is not None], syntax
        bodies = [t[b0:b1] for t, (_, b0, b1) in zip(lines, per_line, strict=True)]
        blanks = b" \t\r"
        assert cleaned.translate(None, blanks).split(b"\n")[: len(lines)] == [
            b.translate(None, blanks) for b in bodies
        ]


def test_examples_cover_the_writer_families() -> None:
    """Every family writers.py reads has an example (issue 25)."""
    specs_ = list(WRITER_EXAMPLES.values())
    assert any(s.continuation and s.base == 16 for s in specs_) and any(s.continuation for s in specs_)
    assert {s.mark for s in specs_} >= {"`1201.", "e0", "b0", "')", "]"}
    assert any(s.footer for s in specs_) and any(s.page for s in specs_)
    assert {s.group_sep for s in specs_} >= {"\u00a0", "\u2009", "\u202f", "\u2007"}
