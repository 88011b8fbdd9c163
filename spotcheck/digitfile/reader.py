"""Open a digit file, run the index pass once, then read digits at any position.

:func:`open_digit_file` checks its arguments and detects the layout
(``opening.py``), runs the index pass (``index.build_index``) or, for packed
hex, counts the bytes, and returns the :class:`~spotcheck.digitfile.file.DigitFile`
with its layout summary (:class:`~spotcheck.digitfile.model.Layout`) and its
constant, given or guessed (``guess.py``).  :func:`text_digit_file` makes the
``DigitFile`` of a text file once a pass is done (``DigitStream.finish`` uses it too).

>>> import gzip, os, tempfile
>>> d = tempfile.mkdtemp()
>>> path = os.path.join(d, "pi.txt")
>>> with open(path, "w") as f:
...     _ = f.write("3.243F6A8885 A308D31319\\n8A2E037073 44A4093822\\n")
>>> with open_digit_file(path) as df:
...     (df.base, df.integer_part, df.count, df.constant, df.read(1, 8))
(16, '3', 40, 'pi', '243F6A88')
"""

from __future__ import annotations

import os
import re

from spotcheck.digitfile.charsets import WS, class_table
from spotcheck.digitfile.detect import Detection
from spotcheck.digitfile.file import EDGE_DIGITS, DigitFile
from spotcheck.digitfile.guess import explicit_constant, match_constant, shifted_reading
from spotcheck.digitfile.index import build_index
from spotcheck.digitfile.model import Finding, InspectResult, Layout
from spotcheck.digitfile.opening import check_open_arguments, detect_source
from spotcheck.digitfile.passrules import CHUNK_BYTES, IndexResult, Progress
from spotcheck.digitfile.readings import AmbiguousLayoutError
from spotcheck.digitfile.source import ByteSource, open_source
from spotcheck.errors import DigitFileError
from spotcheck.formulas import all_constants

__all__ = ["open_digit_file", "inspect_file", "text_digit_file", "open_packed"]


def open_digit_file(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    strict_labels: bool = False,
    progress: Progress | None = None,
    labels: str | None = None,
    first_position: int | None = None,
) -> DigitFile:
    """Open a digit file read-only, detect its layout and run the one pass over it.

    ``base`` (10 or 16) overrides detection; ``constant`` overrides the guess.
    ``packed`` forces (True) or forbids (False) reading the file as packed hex;
    by default binary content is packed hex when its name ends in ``.bin`` or
    ``.hexbin`` or its first bytes are those of a known constant.
    ``strict_labels`` turns the first disagreeing position label into a
    :class:`DigitFileError` instead of a finding.  ``labels`` (``"start"``,
    ``"end"``, ``"both"`` or ``"none"``) says where position labels are when
    the layout alone cannot tell.  ``progress(done, total)`` is called after each chunk of
    the pass.  ``first_position`` states the position in the expansion of the file's first
    digit (default: its labels say, else 1; ``DigitFile.first_positions``, ``slices.py``).
    """
    check_open_arguments(base, labels)
    src = open_source(path)
    try:
        return _open(src, base, constant, packed, strict_labels, progress, labels, first_position)
    except BaseException:
        src.close()
        raise


def _open(
    src: ByteSource,
    base: int | None,
    constant: str | None,
    packed: bool | None,
    strict_labels: bool,
    progress: Progress | None,
    labels: str | None = None,
    first_position: int | None = None,
) -> DigitFile:
    src, plan, head = detect_source(src, base, packed, labels, first_position)
    if plan is None:
        return open_packed(src, head, base, constant, progress, first_position)
    assert plan.base is not None
    scan = build_index(src, plan, plan.base, strict_labels=strict_labels, progress=progress)
    return text_digit_file(src, plan, scan, constant, labels)


def text_digit_file(
    src: ByteSource, plan: Detection, scan: IndexResult, constant: str | None, labels: str | None = None
) -> DigitFile:
    """The :class:`DigitFile` of a text file once its pass (``scan``) is done (``labels``: the
    caller's word on the labels, which settles a label column read as digits)."""
    assert plan.base is not None
    name = os.path.basename(src.path)
    src.check_unchanged()
    if scan.count == 0:
        raise DigitFileError(f"{name}: no digits after the radix point")
    df = DigitFile(
        src,
        base=plan.base,
        base_how=plan.base_how,
        count=scan.count,
        integer_part=plan.integer_part,
        layout=_text_layout(src, plan, scan),
        findings=scan.findings,
        detection=plan,
        index=scan,
        first=plan.head_digits.decode("ascii").upper(),
        last=scan.last_digits.decode("ascii").upper(),
    )
    _decide_constant(df, plan.head_digits.decode("ascii"), constant)
    _refuse_shifted_reading(df, plan, name, labels)
    return df


def _refuse_shifted_reading(df: DigitFile, plan: Detection, name: str, labels: str | None) -> None:
    """Refuse a file whose digits differ from the constant's from position 1 when dropping a few
    leading digits (an integer part without a point, a label column) makes them agree."""
    if df.constant_match is not None and df.constant_match.name is not None:
        return  # named from its digits as read: they agree beyond chance
    if df.constant is None:
        names = [c.name for c in all_constants()]
    else:
        names = [df.constant]
    assert df.base is not None
    shift = shifted_reading(plan.head_digits.decode("ascii"), df.integer_part, df.base, names)
    if shift is None or (labels is not None and not shift.integer_part and not shift.word):
        return  # the caller said where the labels are
    if shift.word:
        raise AmbiguousLayoutError(
            f"{name}: the reading is ambiguous: the digits could be {shift.name}'s printed in "
            f"{shift.word}-byte words in machine order (read so, {shift.agreed} of the first {shift.examined} "
            f"agree with {shift.name}) or digits in the order written (which differ from position 1); "
            "a dump of single bytes says which",
            "word-order",
            ("machine order", "as written"),
        )
    k = len(shift.dropped)
    first = f"the first digit {shift.dropped}" if k == 1 else f"the first {k} digits {shift.dropped}"
    then = f"the next {shift.agreed} of {shift.examined} digits agree with {shift.name}"
    if shift.integer_part:
        raise AmbiguousLayoutError(
            f"{name}: the reading is ambiguous: {first} could be {shift.name}'s integer part written "
            f"without a point ({then}) or digits after the point (which differ from {shift.name}'s from "
            f"position 1); a point after the integer part ({shift.dropped}.) says which",
            "integer-part",
            ("integer part", "digits"),
        )
    raise AmbiguousLayoutError(
        f"{name}: the reading is ambiguous: {first} could be a label or other text before the digits "
        f"({then}) or digits (which differ from {shift.name}'s from position 1); say where the labels are",
        "labels",
        ("label", "digits"),
    )


def _decide_constant(df: DigitFile, head: str, constant: str | None) -> None:
    if df.first_positions != (1,):
        # A stretch from deeper in the expansion: its leading digits are not the constant's first
        # ones, so neither the guess nor the comparison applies here (the checks make both at P).
        if constant is not None:
            df.constant, df.constant_how = explicit_constant(constant, "", None, df.base, df.count)[:2]
        else:
            df.constant_how = "not guessed from the leading digits: the file begins deeper in the expansion"
        return
    if constant is not None:
        name, how, matched, agrees = explicit_constant(constant, head, df.integer_part, df.base, df.count)
        df.constant, df.constant_how = name, how
        if not agrees:
            df.findings.append(
                Finding(
                    "constant-mismatch",
                    f"the file's leading digits do not match {name} in base {df.base}: "
                    f"only the first {matched} agree",
                    position=matched + 1,
                )
            )
        return
    match = match_constant(head, df.integer_part, df.base, df.count)
    df.constant, df.constant_how, df.constant_match = match.name, match.how, match


def _groups(unit: bytes) -> tuple[int | None, int | None]:
    """(digits per line, group size) read off one unit of character classes."""
    body = unit.rstrip(WS)
    groups = [len(g) for g in re.split(rb"[ \t]+", body.strip()) if g]
    width = sum(groups) if unit.endswith(b"\n") else None
    group = None
    if len(groups) > 1 and len(set(groups[:-1])) == 1 and groups[-1] <= groups[0]:
        group = groups[0]
    elif not unit.endswith(b"\n") and len(groups) == 1 and unit != body:
        group = groups[0]
    return width, group


def _runs(cols: list[int]) -> list[int]:
    """Lengths of the runs of adjacent byte offsets (digit groups)."""
    runs: list[int] = []
    prev = -2
    for c in cols:
        if c == prev + 1:
            runs[-1] += 1
        else:
            runs.append(1)
        prev = c
    return runs


def _text_layout(src: ByteSource, plan: Detection, scan: IndexResult) -> Layout:
    width = group = line_bytes = None
    if scan.count == len(plan.seg_digits):  # one line holds every digit
        runs = _runs(plan.seg_cols)
        if len(runs) > 1 and len(set(runs[:-1])) == 1 and runs[-1] <= runs[0]:
            group = runs[0]
    elif scan.regular and scan.unit is not None:
        width, group = _groups(scan.unit)
        line_bytes = len(scan.unit) if width is not None else None
    elif plan.syntax is not None:
        line = src.read_at(plan.seg_end, 64 << 10)
        line = line[: line.find(b"\n") + 1] if b"\n" in line else line
        body = plan.syntax.strip(line).strip(b" \t") or line
        width, group = _groups(body.translate(class_table(plan.base or 16)))
    return Layout(
        kind="text",
        line_width=width,
        line_bytes=line_bytes,
        group_size=group,
        labels=plan.labels,
        label_meaning=scan.label_meaning,
        end_label_meaning=scan.end_label_meaning,
        header_lines=plan.header_lines,
        digits_offset=plan.digits_offset,
        newline=plan.newline,
        letter_case=plan.letter_case,
        access="regular" if scan.regular else "indexed",
        index_entries=len(scan.index_pos),
    )


def open_packed(
    src: ByteSource,
    head: bytes,
    base: int | None,
    constant: str | None,
    progress: Progress | None,
    first_position: int | None = None,
) -> DigitFile:
    """Packed binary hex: every byte holds two hex digits, high nibble first; no byte is anything else."""
    name = os.path.basename(src.path)
    if base == 10:
        raise DigitFileError(f"{name}: packed binary holds hex digits, but base 10 was requested")
    last = ""
    if src.compression is None:
        size = src.size_bytes
    else:
        size, tail = 0, b""
        while data := src.read_at(size, CHUNK_BYTES):
            size += len(data)
            tail = (tail + data)[-EDGE_DIGITS:]
            if progress:
                progress(src.stored_bytes_done(size), src.size_bytes)
        last = tail.hex().upper()
    src.check_unchanged()
    df = DigitFile(
        src,
        base=16,
        base_how="packed binary: two hex digits per byte",
        count=2 * size,
        integer_part=None,
        layout=Layout(kind="packed", access="regular"),
        findings=[],
        first=head[:EDGE_DIGITS].hex().upper(),
        last=last,
    )
    if first_position is not None:
        df.first_positions, df.first_how = (first_position,), "given"
    _decide_constant(df, head[:32].hex().upper(), constant)
    return df


def inspect_file(
    path: str | os.PathLike[str],
    base: int | None = None,
    constant: str | None = None,
    *,
    packed: bool | None = None,
    progress: Progress | None = None,
    labels: str | None = None,
    first_position: int | None = None,
) -> InspectResult:
    """Open, pass over and summarise a digit file (what ``spotcheck inspect`` prints)."""
    with open_digit_file(
        path, base, constant, packed=packed, progress=progress, labels=labels, first_position=first_position
    ) as df:
        return df.inspect()
