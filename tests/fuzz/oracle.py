"""Open a written file and judge the reading: exact, refused with a place, or a misread."""

from __future__ import annotations

import os
import tempfile

from spotcheck.digitfile import open_digit_file
from spotcheck.digitfile.detect import AmbiguousLayoutError
from spotcheck.errors import SpotcheckError
from tests.fuzz.writer import Spec, Written, suffix


def full_text(df) -> str:
    digits = df.read(1, df.count)
    return (df.integer_part + "." if df.integer_part is not None else "") + digits


def read_back(spec: Spec, data: bytes, directory: str, labels: str | None = None):
    """``(full text, findings)`` as the reader sees ``data`` (stored bytes), base given explicitly."""
    fd, path = tempfile.mkstemp(suffix=suffix(spec), dir=directory)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        with open_digit_file(path, base=spec.base, labels=labels) as df:
            return full_text(df), list(df.findings)
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
