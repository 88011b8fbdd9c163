"""Sentences for the notes and warnings the checks give as codes and numbers (``checks.results.Note``).

The checks say what happened (``Note("run-partly-checked", {"checked": 64, "length": 900})``);
this module alone words it, for the terminal report and for the ``note``/``warnings`` strings
that JSON keeps beside the codes.  A code without a sentence here is still shown, as its code
and numbers, never dropped.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from spotcheck.checks.results import Note
from spotcheck.report.console import plural

__all__ = ["note_sentence", "notes_sentence"]


def _shifted(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001 - one signature for every code
    k = d["digits"]
    return (
        f"copy {d['missing_in']} lacks {plural(k, 'digit')} that the other has (or the other has {k} extra) "
        "at or before this position: from here on the copies are shifted, so the comparison stops"
    )


def _beyond_limit(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    pair = " of a decimal pair" if d.get("base") == 10 else ""
    return f"not arbitrated: only the first {d['limit']:,} runs{pair} are"


def _after_unresolved(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    if subject == "extra":
        return "not arbitrated: a differing run before it has no right copy or was not arbitrated"
    return "not arbitrated: an earlier run had no right copy"


def _memory(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    return (
        f"not arbitrated: radix conversion of {d['digits']:,} digits needs about "
        f"{d['bytes'] / 2**30:.1f} GiB of memory, more than is free"
    )


def _converted(d: dict[str, Any], subject: str) -> str:
    what = "a prefix" if subject == "extra" else "prefixes"
    return f"{what} of {d['digits']:,} digits converted to hex and checked against the engine"


def _all_extra(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    n = d["checked"]
    return "the one extra digit was checked" if n == 1 else f"all {n:,} extra digits were checked"


def _damaged(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    n = d["records"]
    return f"{plural(n, 'damaged record')} in the checkpoint {d['checkpoint']} " + (
        "was skipped and its block computed again"
        if n == 1
        else "were skipped and their blocks computed again"
    )


def _not_drawn(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    done = "was" if d["compared"] else "was to be"
    return (
        f"no random window was drawn (--samples {d['asked']:,}): every digit {done} compared with "
        f"{d['reference']} instead (--budget 0 checks windows only)"
    )


def _fewer(d: dict[str, Any], subject: str) -> str:  # noqa: ARG001
    unit, room = d["unit"], d["drawn_from"]
    option = f" (--samples {d['asked']:,})" if d.get("given") else ""
    if room == 0:
        return f"no random {unit} was drawn{option}: the file has no {unit} besides those checked anyway"
    many = "prefixes" if unit == "prefix" else None
    drawn = plural(room, f"random {unit}", f"random {many}" if many else None)
    return f"{drawn} drawn, not {d['asked']:,}{option}: the file has no other distinct {unit}"


_SENTENCES: dict[str, Callable[[dict[str, Any], str], str]] = {
    "samples-not-drawn": _not_drawn,
    "samples-fewer": _fewer,
    "shifted": _shifted,
    "not-arbitrated-beyond-limit": _beyond_limit,
    "not-arbitrated-after-unresolved": _after_unresolved,
    "not-arbitrated-memory": _memory,
    "prefixes-converted": _converted,
    "run-partly-checked": lambda d, s: (
        f"the first {d['checked']:,} of the run's {d['length']:,} digits were checked"
    ),
    "extra-ends-checked": lambda d, s: f"the first and last {d['checked']:,} extra digits were checked",
    "extra-all-checked": _all_extra,
    "checkpoint-damaged": _damaged,
    "checkpoint-failed": lambda d, s: f"{d['reason']}; the check went on without it",
    "maybe-stretch": lambda d, s: (
        f"every window differs, from the file's first digit on: if the file is a stretch that begins "
        f"deeper in the expansion of {d['constant']}, give its first digit's position (--begins-at POSITION)"
    ),
    # rows of the checks table (JSON ``checks[].note``)
    "integer-part": lambda d, s: "digits before the point",
    "window-before-first-wrong": lambda d, s: "the window just before the first wrong digit",
    "full-evaluation-compared": lambda d, s: (
        f"all {d['digits']:,} digits compared with a full evaluation (Arb)"
    ),
    "wrong-run": lambda d, s: f"{plural(d['wrong'], 'wrong digit')} in {d['length']:,}",
    "hex-from-decimal-prefix": lambda d, s: (
        f"hex digits determined by the first {d['decimal_digits']:,} decimal digits"
    ),
    "decimal-recomputed": lambda d, s: (
        f"decimal digits recomputed from the verified hex digits and {plural(d['engine_digits'], 'engine digit')}"
    ),
    "first-of-wrong-runs": lambda d, s: (
        f"first of {plural(d['runs'], 'wrong run')} found by the full comparison"
    ),
}


def note_sentence(note: Note, subject: str = "run") -> str:
    """One note in words; ``subject`` is what it is about (``run``, ``extra``, ``check``).

    >>> note_sentence(Note("run-partly-checked", {"checked": 64, "length": 1200}))
    "the first 64 of the run's 1,200 digits were checked"
    """
    words = _SENTENCES.get(note.code)
    if words is None:
        data = ", ".join(f"{k} {v}" for k, v in note.data.items())
        return f"{note.code}" + (f" ({data})" if data else "")
    return words(note.data, subject)


def notes_sentence(notes: list[Note], subject: str = "run") -> str:
    """Several notes in one line, ``; `` between them ("" for none)."""
    return "; ".join(note_sentence(n, subject) for n in notes)
