"""Where a file begins in the expansion: its first digit's position, from the caller or the labels.

A digit file holds digits ``P, P+1, ...`` of a constant's expansion (digit 1
is the first after the point).  ``P`` is 1 unless the caller states it or the
file's position labels say otherwise:

* stated (``first_position``): the labels are read as counting from the
  expansion's start (``LabelMeaning.origin = P - 1``), of the kind (0- or
  1-based) most of them agree with; labels that disagree are findings, as for
  any file;
* not stated: labels that agree with a start at digit 1 on any line keep
  ``P = 1`` (the file's start, as always).  Otherwise, when the first digit line
  carries a label and the labels follow the progression, the first label
  places the file.  An end label (the count through its line) gives one ``P``;
  a start label ``L`` gives two, ``L`` (1-based: the position of the line's first
  digit) and ``L + 1`` (0-based: the digits before it), and nothing in the file
  tells them apart.  Both are returned; the caller settles them (the checks ask
  the engine for certified digits at both) or asks for the position.

The compiled loops count labels from the file's start, so a slice's labelled
lines go through the index pass's own loops (``LoopLayout.for_plan``).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from spotcheck.digitfile.syntax import LabelMeaning

__all__ = ["Placement", "place"]

START, GIVEN, LABELS = "start", "given", "labels"
"""How a file's first position was learnt: the file's start (digit 1), the caller's word, its labels."""


@dataclass(frozen=True)
class Placement:
    """The first digit's possible positions (one, or the two a start label leaves open) and how they
    were learnt, with the label meanings the passes check against."""

    positions: tuple[int, ...]
    how: str
    meaning: LabelMeaning | None
    end_meaning: LabelMeaning | None


def place(
    where: str | None,
    meaning: LabelMeaning | None,
    end_meaning: LabelMeaning | None,
    rows: list[tuple[int | None, int | None, int, int]],
    steps_ok: int,
    first_position: int | None,
) -> Placement:
    """Place a file.  ``where`` is the pass's label place (``start``, ``end``, ``both`` or None for
    no labels); ``meaning``/``end_meaning`` what detection chose counting from the file's start;
    ``rows`` one ``(label, end label, digits before, digits on the line)`` per examined digit line
    (``label`` is the start label of a ``both`` reading, the one label otherwise; None where a line
    has none); ``steps_ok`` the agreeing steps between neighbouring labels.

    >>> p = place("start", LabelMeaning("before"), None, [(1000001, None, 0, 8), (1000009, None, 8, 8)], 1, None)
    >>> p.positions, p.how, p.meaning
    ((1000001, 1000002), 'labels', LabelMeaning(kind='first', unit=1, origin=1000000))
    """
    if where is None or meaning is None:
        if first_position is None:
            return Placement((1,), START, meaning, end_meaning)
        return Placement((first_position,), GIVEN, meaning, end_meaning)
    if first_position is not None:
        origin = first_position - 1
        return Placement(
            (first_position,),
            GIVEN,
            _best_kind(meaning, origin, rows, 0),
            None if end_meaning is None else replace(end_meaning, origin=origin),
        )
    if _agreeing(meaning, rows, 0) or _agreeing(_other(meaning), rows, 0):
        return Placement((1,), LABELS, meaning, end_meaning)
    first = rows[0] if rows else None
    if first is None or first[0] is None or (len(rows) > 1 and steps_ok < 1):
        return Placement((1,), START, meaning, end_meaning)  # disagreeing labels are findings, as ever
    _, _, before, nd = first
    if where == "end" or (where == "both" and end_meaning is not None and first[1] is not None):
        through = end_meaning if where == "both" else meaning
        assert through is not None
        value = first[1] if where == "both" else first[0]
        assert value is not None
        at = through.origin_from(value, before, nd)
        if at is None:
            return Placement((1,), START, meaning, end_meaning)
        placed = replace(through, origin=at)
        if where == "end":
            return Placement((at + 1,), LABELS, placed, None)
        return Placement((at + 1,), LABELS, _best_kind(meaning, at, rows, 0), placed)
    assert first[0] is not None
    origins = {
        kind: LabelMeaning(kind, meaning.unit).origin_from(first[0], before, nd)
        for kind in ("first", "before")
    }
    found = {kind: o for kind, o in origins.items() if o is not None}
    if not found:
        return Placement((1,), START, meaning, end_meaning)
    kind = "first" if "first" in found else "before"
    return Placement(
        tuple(sorted(o + 1 for o in found.values())),
        LABELS,
        LabelMeaning(kind, meaning.unit, found[kind]),
        end_meaning,
    )


def _other(meaning: LabelMeaning) -> LabelMeaning:
    """The start-label meaning of the other base (0- or 1-based); a ``through`` meaning has none."""
    kind = {"first": "before", "before": "first"}.get(meaning.kind, meaning.kind)
    return replace(meaning, kind=kind)


def _agreeing(meaning: LabelMeaning, rows: list[tuple[int | None, int | None, int, int]], column: int) -> int:
    return sum(1 for r in rows if (v := r[column]) is not None and meaning.agrees(v, r[2], r[3]))


def _best_kind(
    meaning: LabelMeaning, origin: int, rows: list[tuple[int | None, int | None, int, int]], column: int
) -> LabelMeaning:
    """``meaning`` at ``origin``, of the kind (0- or 1-based) most labels of ``column`` agree with."""
    here = replace(meaning, origin=origin)
    other = _other(here)
    return other if _agreeing(other, rows, column) > _agreeing(here, rows, column) else here
