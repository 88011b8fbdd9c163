"""Open a written file and judge the reading: exact, refused with a place, or a misread."""

from __future__ import annotations

import itertools
import os
import re
import tempfile

from spotcheck.digitfile import open_digit_file
from spotcheck.digitfile.readings import AmbiguousLayoutError
from spotcheck.errors import SpotcheckError
from tests.fuzz.writer import BLANK_SEPS, LONE_SEPS, MARK_SEPS, Label, Spec, Written, suffix, write

_PROOF_TRIES = 20_000


def full_text(df) -> str:
    digits = df.read(1, df.count)
    return (df.integer_part + "." if df.integer_part is not None else "") + digits


def read_back(spec: Spec, data: bytes, directory: str, labels: str | None = None):
    """``(full text, findings)`` as the reader sees ``data`` (stored bytes), base given explicitly."""
    got, findings, _ = read_layout(spec, data, directory, labels)
    return got, findings


def read_layout(spec: Spec, data: bytes, directory: str, labels: str | None = None):
    """``(full text, findings, layout)``: :func:`read_back` and the layout the reader chose."""
    fd, path = tempfile.mkstemp(suffix=suffix(spec), dir=directory)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        with open_digit_file(path, base=spec.base, labels=labels) as df:
            return full_text(df), list(df.findings), df.layout
    finally:
        os.unlink(path)


def truth_labels(spec: Spec) -> str:
    return spec.label.where if spec.label is not None else "none"


def round_trip(spec: Spec, w: Written, directory: str) -> tuple[str, list]:
    """Read a correct file; an ambiguity is honest only if the option then reads it exactly."""
    try:
        return read_back(spec, w.stored, directory)
    except AmbiguousLayoutError:
        return read_back(spec, w.stored, directory, labels=truth_labels(spec))


def widen(w, lo: int, hi: int, a: int, b: int, inserted: int, sep: int) -> tuple[int, int, int]:
    """Widen a mutation's window for what it may rightly merge with.

    A mutation at or beside a label (or its separator) may turn the label into
    digits; one at the integer part may change how it is written (leading zeros).
    """
    for s, e in w.label_spans:
        if a <= e + sep + 1 and b >= s - sep - 1:
            inserted += (e - s) + sep + 1
    ip_end = w.full.find(".")
    if ip_end >= 0 and lo <= ip_end + 1:
        lo = 0
        inserted += ip_end + 1
    return lo, hi, inserted


def acceptable_mutation(orig: str, got: str, findings: list, lo: int, hi: int, inserted: int) -> bool:
    """True when ``got`` differs from ``orig`` only inside the mutated span, or a finding says so.

    ``orig[lo:hi]`` are the characters whose bytes the mutation touched (``lo == hi``
    for a mutation between characters) and ``inserted`` how many bytes it put there.
    """
    if findings:
        return True
    if got == orig:
        return True
    if "." in got and "." not in orig:
        # The mutation made a radix point: the digits after it must be the original ones after it.
        ip, _, rest = got.partition(".")
        return len(ip) <= 20 and orig.endswith(rest) and lo <= len(orig) - len(rest) <= hi + 1
    orig, got = _norm(orig), _norm(got)
    if got == orig:
        return True
    head, tail = orig[:lo], orig[hi:]
    if not (got.startswith(head) and got.endswith(tail) and len(got) >= len(head) + len(tail)):
        return False
    return len(got) - len(head) - len(tail) <= inserted


def place_named(exc: SpotcheckError) -> bool:
    msg = str(exc)
    return any(w in msg for w in ("byte", "line", "position", "empty", "only whitespace", "no digits"))


def _norm(full: str) -> str:
    """Leading zeros of an integer part are not data."""
    ip, dot, rest = full.partition(".")
    if not dot:
        return full
    return (ip.lstrip("0") or "0") + "." + rest


def another_valid_file(spec: Spec, content: bytes, got: str, layout) -> Spec | None:
    """A writer spec whose file is exactly ``content`` and whose digits are ``got``, or None.

    A mutation can turn a file into another correct file of the model: a lost
    line break merges a free-text header line with the first digit line (the
    reader then rightly takes that line as header text), or an inserted ``|``
    makes a label out of the digits before it.  The reading then differs from
    the original digits outside the mutated span, yet it is no misread: the
    bytes are, exactly, a file the writer makes from the digits read.  This
    searches the writer's parameters the reader's layout allows (the header
    lines it took, its line width and group size, where its labels sit and what
    they count, separators, padding and letter case seen in the first digit
    line) and returns the spec that writes ``content`` byte for byte.  The
    search is bounded; None means no proof was found (the reading stays a misread).
    """
    try:
        text = content.decode("ascii")
    except UnicodeDecodeError:
        return None
    ip, dot, digits = got.partition(".")
    integer_part, digits = (ip, digits) if dot else (None, got)
    tries = 0
    for nl in _unique((spec.newline, layout.newline or spec.newline)):
        rows = text.split(nl)
        header = tuple(rows[: layout.header_lines])
        first = next((r for r in rows[layout.header_lines :] if r), "")
        body = nl.join(rows[layout.header_lines :])
        cases = _letter_cases(spec, body)
        plain = _product(
            _unique((spec.width, layout.line_width, None, len(digits) or None)),
            _unique((spec.group, layout.group_size, None)),
            [g for g in _unique((spec.group_sep, " ", "\t", "  ")) if g in first] or [spec.group_sep],
            _unique((spec.indent, "")) + ((" ",) if first.startswith(" ") else ()),
            cases,
        )
        plain = list(plain)
        for lab in _label_candidates(spec, layout, first):
            for width, group, sep, indent, lower in plain:
                tries += 1
                if tries > _PROOF_TRIES:
                    return None
                cand = Spec(
                    digits=digits,
                    base=spec.base,
                    integer_part=integer_part,
                    width=width,
                    group=group,
                    group_sep=sep,
                    label=lab,
                    header=header,
                    newline=nl,
                    lower=lower,
                    final_newline=text.endswith(nl),
                    indent=indent,
                )
                if write(cand).content == content:
                    return cand
    return None


def _letter_cases(spec: Spec, body: str) -> tuple[bool, ...]:
    """The writer's ``lower`` values that can have written ``body`` (none for mixed case)."""
    if spec.base == 10:
        return (False,)
    lower, upper = re.search("[a-f]", body) is not None, re.search("[A-F]", body) is not None
    if lower and upper:
        return ()
    if lower or upper:
        return (lower,)
    return _unique((spec.lower, not spec.lower))


def _label_candidates(spec: Spec, layout, first: str):
    """Labels the reader's layout allows, with separators and padding taken from ``first``."""
    if layout.labels is None:
        yield None
        return
    if layout.labels not in ("start", "end", "both") or layout.label_meaning is None:
        return  # a first-line label: the writer puts labels on every line or none
    unit = 2 if layout.label_meaning.startswith("bytes-") else 1
    kind = layout.label_meaning.removeprefix("bytes-")
    seps: list[str] = []
    pads: list[int] = []
    m = re.match(r"( *)([0-9a-fA-F]+)([ \t:|]+)", first)
    if m:
        seps.append(m.group(3))
        pads += [len(m.group(1)) + len(m.group(2)), len(m.group(1)) + len(m.group(2)) - 1]
    m = re.search(r"([ \t:|]+?)( *)([0-9a-fA-F]+)$", first)
    if m:
        seps.append(m.group(1))
        pads.append(len(m.group(2)) + len(m.group(3)))
    if spec.label is not None:
        seps += [spec.label.sep, spec.label.end_sep]
        pads += [spec.label.pad, spec.label.end_pad]
    seps = [s for s in _unique(seps + list(MARK_SEPS + LONE_SEPS + BLANK_SEPS)) if s and s in first]
    pads = [p for p in _unique(pads + [0, 6, 8]) if p >= 0]
    radices = (16,) if unit == 2 else _unique((spec.label.radix if spec.label else 10, 10, 16))
    if layout.labels != "both":
        for radix, sep, pad in _product(radices, seps, pads):
            yield Label(layout.labels, radix, sep, kind, unit, pad)
        return
    if (layout.end_label_meaning or "through").removeprefix("bytes-") != "through":
        return
    for radix, sep, pad, end_sep, end_pad in _product(radices, seps, pads, seps, pads):
        yield Label("both", radix, sep, kind, unit, pad, end_sep, end_pad)


def _unique(values):
    return tuple(dict.fromkeys(values))


def _product(*pools):
    return itertools.product(*pools)
