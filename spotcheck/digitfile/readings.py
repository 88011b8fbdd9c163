"""Readings of a file's head and the choice between them: the layout model's evidence rules.

A *reading* is one :class:`~spotcheck.digitfile.syntax.LabelSyntax` (or none)
applied to the first digit lines (:func:`parse_reading`).  It survives only if
every byte there is a digit, a separator, a label or the first line's integer
part under it.  A labelled reading is scored by its *steps*: the label
differences between neighbouring lines against the digit counts, for each
:class:`~spotcheck.digitfile.syntax.LabelMeaning` (``LabelMeaning.step_ok``, the
one label rule); for labels at both ends a step counts only when both columns
follow it.  A reading whose labels are set off by blanks alone competes with the
unlabelled reading of the same bytes, so its agreeing steps are weighed as
evidence: the chance that digits agree as often by accident (each agreeing step
with a ``k``-character label has chance ``radix**-k``, times the ways to pick the
agreeing steps) must be at most ``10**LABELS_LOG_CHANCE``; between that and
``10**AMBIGUOUS_LOG_CHANCE`` the file is refused as ambiguous
(:class:`AmbiguousLayoutError`, ``choice="labels"``).  :func:`choose_reading`
applies all of this and returns the one reading kept, or raises.  Nothing is
decided from one line's shape.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field

from spotcheck.digitfile.charsets import HEX
from spotcheck.digitfile.syntax import MEANINGS, SYNTAXES, LabelMeaning, LabelSyntax
from spotcheck.errors import DigitFileError

__all__ = [
    "AmbiguousLayoutError",
    "Reading",
    "parse_reading",
    "choose_reading",
    "LABELS_LOG_CHANCE",
    "AMBIGUOUS_LOG_CHANCE",
    "MAX_INTEGER_PART",
]

# --- tuning -----------------------------------------------------------------
LABELS_LOG_CHANCE = -7.0  # log10 chance below which blank-separated labels are labels
MIN_STEPS_BOTH = 2  # agreeing steps that let a start reading win over an end reading (or back)
AMBIGUOUS_LOG_CHANCE = -4.0  # log10 chance below which they are too likely to be ignored
MAX_INTEGER_PART = 20  # longer runs before a point are digits with a stray '.'

_HEXD = rb"0-9A-Fa-f"
_FIRST_BODY = re.compile(rb"[ \t]*(?:([" + _HEXD + rb"]{1,%d})\.)?[" % MAX_INTEGER_PART + _HEXD + rb" \t]*\Z")
_BODY = re.compile(rb"[" + _HEXD + rb" \t]*\Z")


class AmbiguousLayoutError(DigitFileError):
    """Two readings explain the file's head equally well; ``choice`` names what picks one."""

    def __init__(self, message: str, choice: str, readings: tuple[str, ...]) -> None:
        super().__init__(message)
        self.choice = choice
        self.readings = readings


def _line_col(lines: list[tuple[int, bytes]], offset: int) -> tuple[int, int]:
    for i, (off, text) in enumerate(lines):
        if off <= offset <= off + len(text):
            return i + 1, offset - off + 1
    return len(lines), 1


def _show(byte: int) -> str:
    return repr(chr(byte)) if 0x20 <= byte < 0x7F else f"byte 0x{byte:02X}"


@dataclass
class Reading:
    """One reading applied to the examined lines."""

    syntax: LabelSyntax | None
    ok: bool = True
    bad_at: int = -1  # byte offset of the first byte this reading cannot explain
    labels: list[tuple[int, bytes | None, int, int]] = field(default_factory=list)
    """(line index, label text, digits before the line, digits on the line) per digit line."""
    integer_part: bytes | None = None
    body: tuple[int, int] = (0, 0)  # first line's body span (absolute offsets)
    first_only: bool = False
    first_own_sep: bool = False
    first_blank_sep: bool = False  # a blank between the first line's ':'/'|' and its digits
    meaning: LabelMeaning | None = None
    steps: int = 0
    steps_ok: int = 0
    log_chance: float = 0.0
    labelled: bool = False  # labels on most digit lines (or the first only), whatever the evidence
    agree: int = 0
    end_labels: list[bytes | None] = field(default_factory=list)
    """For a ``"both"`` reading: each digit line's end label (``labels`` hold the start labels)."""
    end_meaning: LabelMeaning | None = None


def parse_reading(syntax: LabelSyntax | None, lines: list[tuple[int, bytes]], first: int) -> Reading:
    out = Reading(syntax)
    before = 0
    for i in range(first, len(lines)):
        off, text = lines[i]
        text = text[:-1] if text.endswith(b"\r") else text
        if not text.strip(b" \t"):
            continue
        if syntax is None:
            label, b0, b1 = None, 0, len(text)
        elif syntax.where == "both":
            # Both ends on every line, the first included (no first-line variant of its own).
            (label, end_label), b0, b1 = syntax.split_labels(text)
            out.end_labels.append(end_label)
        else:
            label, b0, b1 = syntax.split_first(text) if i == first else syntax.split_line(text)
            if i == first:
                out.first_own_sep = syntax.split_line(text)[0] is not None
                out.first_blank_sep = _blank_beside_mark(syntax, text)
        body = text[b0:b1]
        if i == first:
            m = _FIRST_BODY.match(body)
            if m and m.group(1) is not None:
                out.integer_part = m.group(1)
            out.body = (off + b0, off + b1)
        else:
            m = _BODY.match(body)
        if not m:
            bad = re.compile(
                rb"[ \t]*(?:[" + _HEXD + rb"]{1,%d}\.)?" % MAX_INTEGER_PART if i == first else rb""
            ).match(body)
            skip = bad.end() if bad else 0
            rest = body[skip:].translate(None, HEX + b" \t")
            at = skip + body[skip:].find(rest[:1])
            out.ok, out.bad_at = False, off + b0 + at
            return out
        nd = len(body) - len(body.translate(None, HEX))
        if out.integer_part is not None and i == first:
            nd -= len(out.integer_part)
        out.labels.append((i, label, before, nd))
        before += nd
    return out


def choose_reading(
    syntaxes: Sequence[LabelSyntax | None],
    examined: list[tuple[int, bytes]],
    first: int,
    labels: str | None,
    name: str,
) -> Reading:
    """The one reading of the ``examined`` lines (digit lines from index ``first``) among ``syntaxes``.

    ``labels`` is the caller's word on where labels are (it makes labelled readings
    forced: their labels need no evidence against digits); ``name`` is for messages.
    Raises :class:`AmbiguousLayoutError` when two readings explain the lines, or
    :class:`DigitFileError` naming the first byte no reading explains.
    """
    parses = [parse_reading(s, examined, first) for s in syntaxes]
    for p in parses:
        if p.ok and p.syntax is not None:
            (_score_both if p.syntax.where == "both" else _score)(
                p, forced=labels in ("start", "end", "both")
            )
    for p in parses:
        if p.ok and p.first_only:
            # Not when the other lines carry labels set off by blanks: the first line is damaged.
            for other in SYNTAXES:
                if other.sep == "blank":
                    q = parse_reading(other, examined, first + 1)
                    if q.ok:
                        _score(q)
                        if q.steps_ok and q.log_chance <= AMBIGUOUS_LOG_CHANCE:
                            p.ok = p.labelled = False
    sides = {
        p.syntax.where
        for p in parses
        if p.syntax and p.syntax.where != "both" and p.syntax.sep == "mark" and _has_label(p)
    }
    if len(sides) == 2 and max(len(p.labels) for p in parses if p.bad_at < 0) <= 1:
        # One line with ':' or '|' beside a short number at both ends: which is the label is a guess.
        raise AmbiguousLayoutError(
            f"{name}: the layout is ambiguous: the one digit line could carry its label at the start or "
            "at the end; say where the labels are",
            "labels",
            ("start", "end"),
        )
    return _choose(parses, labels, name, examined)


def _has_label(p: Reading) -> bool:
    return p.bad_at < 0 and any(lab is not None for _, lab, _, _ in p.labels)


def _blank_beside_mark(syntax: LabelSyntax, text: bytes) -> bool:
    """True when the first line's label separator has a blank on the digits' side of its mark."""
    rx = LabelSyntax(syntax.where, syntax.radix, "mark").line_pattern
    if syntax.where == "start":
        m = rx.match(text)
        return bool(m) and text[m.end() - 1 : m.end()] in (b" ", b"\t")  # type: ignore[union-attr]
    m = rx.search(text)
    return bool(m) and text[m.start() : m.start() + 1] in (b" ", b"\t")  # type: ignore[union-attr]


def _score(p: Reading, forced: bool = False) -> None:
    """Pick the meaning whose progression the labels follow best."""
    assert p.syntax is not None
    rows = [(lab, b, n) for _, lab, b, n in p.labels]
    labelled = [r for r in rows if r[0] is not None]
    if rows and rows[0][0] is not None and not p.first_own_sep and len(labelled) == 1:
        labelled = []  # the first line's other separator counts only beside labelled lines
    if not labelled:
        p.ok = False
        return
    if len(labelled) == 1 and rows[0][0] is not None and len(rows) > 1:
        p.first_only = True
        if p.syntax.sep != "mark" or not p.first_own_sep:  # a bare number before the digits is digits
            p.ok = False
            return
    elif 2 * len(labelled) <= len(rows):
        p.ok = False
        return
    best: tuple[int, int, int] | None = None
    for mean in MEANINGS:
        if (mean.kind == "through") != (p.syntax.where == "end"):
            continue  # a start label says where its line starts, an end label where it ends
        if (mean.unit == 2) != (p.syntax.radix == 16):
            continue  # hex labels are byte offsets; decimal labels count digits
        vals = [(p.syntax.value(lab), b, n) if lab is not None else None for lab, b, n in rows]
        agree = sum(1 for v in vals if v is not None and v[0] == mean.expect(v[1], v[2]))
        steps = steps_ok = 0
        evidence = 0.0
        for j in range(len(vals) - 1):
            a, c = vals[j], vals[j + 1]
            if a is None or c is None:
                continue
            steps += 1
            # A step compares neighbours only, so one damaged line breaks one or two steps.
            if mean.step_ok(a[0], a[1], a[2], c[0], c[1], c[2]):
                steps_ok += 1
                evidence -= len(rows[j + 1][0] or b"") * math.log10(p.syntax.radix)
        key = (steps_ok, agree, -MEANINGS.index(mean))
        if best is None or key > best:
            best = key
            p.meaning, p.steps, p.steps_ok, p.agree = mean, steps, steps_ok, agree
            p.log_chance = evidence + math.log10(math.comb(steps, steps_ok)) if steps else 0.0
    if p.first_only or p.steps == 0:
        # A label on a line alone must say what such a label says (0, 1 or the line's count) and
        # be set off from the digits by a blank as well: one damaged byte cannot make both.
        p.ok = p.agree >= 1 and (p.syntax.sep == "blank" or p.first_blank_sep)
        if not p.ok:
            return
    p.labelled = p.ok
    if p.first_only:
        return
    if p.syntax.sep == "blank" and not forced:
        p.ok = p.log_chance <= LABELS_LOG_CHANCE
    else:
        p.ok = True  # no unlabelled reading explains ':' or '|': labels that disagree are damage


def _score_both(p: Reading, forced: bool = False) -> None:
    """Pick the meanings whose progressions both label columns follow best.

    A step (from one line to the next) counts only when the start labels and
    the end labels both follow it: a one-sided reading of the same lines counts
    the other column as digits, so its own steps fail, and a column of digits
    read as labels follows no progression.  Labels set off by blanks compete
    with digits, so a reading with a blank-separated end needs the evidence of
    its agreeing steps (both columns' characters count: the column set off by
    ``:`` or ``|`` agrees only because the other column is not digits).
    """
    assert p.syntax is not None and p.syntax.where == "both"
    rows = [(ls, le, b, n) for (_, ls, b, n), le in zip(p.labels, p.end_labels, strict=True)]
    full = [r for r in rows if r[0] is not None and r[1] is not None]
    if not full or 2 * len(full) <= len(rows):
        p.ok = False
        return
    start, end = p.syntax.ends
    unit = 2 if p.syntax.radix == 16 else 1  # hex labels are byte offsets; decimal labels count digits
    through = LabelMeaning("through", unit)
    vals = [
        (start.value(ls), end.value(le), b, n) if ls is not None and le is not None else None
        for ls, le, b, n in rows
    ]
    per_char = math.log10(p.syntax.radix)
    best: tuple[int, int, int] | None = None
    for mean in (m for m in MEANINGS if m.unit == unit and m.kind != "through"):
        agree = sum(
            1
            for v in vals
            if v is not None and v[0] == mean.expect(v[2], v[3]) and v[1] == through.expect(v[2], v[3])
        )
        steps = steps_ok = 0
        evidence = 0.0
        for j in range(len(vals) - 1):
            a, c = vals[j], vals[j + 1]
            if a is None or c is None:
                continue
            steps += 1
            if mean.step_ok(a[0], a[2], a[3], c[0], c[2], c[3]) and through.step_ok(
                a[1], a[2], a[3], c[1], c[2], c[3]
            ):
                steps_ok += 1
                evidence -= (len(rows[j + 1][0] or b"") + len(rows[j + 1][1] or b"")) * per_char
        key = (steps_ok, agree, -MEANINGS.index(mean))
        if best is None or key > best:
            best = key
            p.meaning, p.end_meaning, p.steps, p.steps_ok, p.agree = mean, through, steps, steps_ok, agree
            p.log_chance = evidence + math.log10(math.comb(steps, steps_ok)) if steps else 0.0
    if p.steps == 0:
        # One labelled line: both labels must say what such labels say (0 or 1, and the line's count).
        p.ok = p.agree >= 1
        if not p.ok:
            return
    if "blank" in (p.syntax.sep, p.syntax.end_sep) and not forced:
        # Without that evidence the blank-separated column may be digits: this reading is then not
        # even a fallback (a one-sided reading, or a refusal, is what the bytes support).
        p.ok = p.log_chance <= LABELS_LOG_CHANCE
    else:
        p.ok = True  # no other reading explains ':' or '|' at both ends: labels that disagree are damage
    p.labelled = p.ok


def _choose(parses: list[Reading], labels: str | None, name: str, lines: list[tuple[int, bytes]]) -> Reading:
    plain = next((p for p in parses if p.syntax is None and p.ok), None)
    labelled = [p for p in parses if p.syntax is not None and p.ok]
    if labelled:
        # Same place and separator: decimal unless hex labels follow the progression better.
        labelled.sort(key=lambda p: (p.steps_ok, p.agree, p.syntax.radix == 10), reverse=True)  # type: ignore[union-attr]
        top = labelled[0]
        rivals = [
            p
            for p in labelled[1:]
            if p.syntax.where != top.syntax.where  # type: ignore[union-attr]
            and (
                (p.steps_ok, p.agree) == (top.steps_ok, top.agree)
                # ':' both before and after a short number: which side is the label is a guess
                or (
                    p.syntax.sep == top.syntax.sep == "mark"  # type: ignore[union-attr]
                    and "both" not in (p.syntax.where, top.syntax.where)  # type: ignore[union-attr]
                    and p.steps_ok < MIN_STEPS_BOTH
                )
            )
        ]
        if rivals:
            a, b = top.syntax.name, rivals[0].syntax.name  # type: ignore[union-attr]
            raise AmbiguousLayoutError(
                f"{name}: the layout is ambiguous: {a} and {b} both explain the first lines; "
                "say where the labels are",
                "labels",
                (top.syntax.where, rivals[0].syntax.where),  # type: ignore[union-attr]
            )
        return top
    if plain is None:
        # Only labels explain the bytes: take the best-labelled reading, its disagreements are damage.
        rest = [p for p in parses if p.syntax is not None and p.labelled]
        if rest:
            return max(rest, key=lambda p: (p.steps_ok, p.agree, p.syntax.radix == 10))  # type: ignore[union-attr]
    if plain is not None:
        # A blank-separated reading with some evidence but not enough is a rival, not a loser.
        for p in parses:
            if (
                p.syntax is not None
                and p.syntax.sep == "blank"
                and p.syntax.end_sep in (None, "blank")
                and p.steps_ok >= 1
                and p.log_chance <= AMBIGUOUS_LOG_CHANCE
                and not p.first_only
            ):
                column = {"start": "the first column", "end": "the last column"}.get(
                    p.syntax.where, "the first and last columns"
                )
                raise AmbiguousLayoutError(
                    f"{name}: the layout is ambiguous: {column} could be {p.syntax.name} "
                    f"({p.steps_ok} of {p.steps} steps agree) or digits; say whether the lines carry labels",
                    "labels",
                    (p.syntax.where, "none"),
                )
        return plain
    # Nothing explains every byte: name the first byte the furthest-reaching reading cannot explain.
    worst = max(parses, key=lambda p: p.bad_at)
    if worst.bad_at < 0:
        raise DigitFileError(
            f"{name}: no digit line among the first {len(lines)} lines carries a position label at "
            + ("both line ends" if labels == "both" else f"the line {labels}s")
        )
    line, col = _line_col(lines, worst.bad_at)
    off, text = lines[line - 1]
    byte = text[col - 1] if col - 1 < len(text) else 0x0A
    raise DigitFileError(
        f"{name}: stray character {_show(byte)} at byte {worst.bad_at} (line {line}, column {col}): "
        "not a digit, a blank, a line break or a position label"
    )
