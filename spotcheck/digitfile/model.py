"""Plain records the digit-file layer hands to the layers above it.

Nothing here reads a file; these are the results of reading one.  Every record
has a ``to_dict()`` made of JSON-ready values for ``spotcheck inspect --json``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

__all__ = ["Layout", "Finding", "InspectResult"]


@dataclass(frozen=True)
class Layout:
    """How the digits sit in the file (offsets are in the decompressed content)."""

    kind: str
    """``"text"`` (digit characters) or ``"packed"`` (two hex digits per byte, high nibble first)."""
    line_width: int | None = None
    """Digits on each full line after the first, when that is constant."""
    line_bytes: int | None = None
    """Bytes of each full line (newline included), when that is constant."""
    group_size: int | None = None
    """Digits per group between separators inside a line, when constant."""
    labels: str | None = None
    """``None``, ``"start"``, ``"end"``, ``"both"`` (a label at each end) or
    ``"first-line"`` (on the first digit line only): where position labels sit."""
    label_meaning: str | None = None
    """What a label counts: ``"before"`` (digits before its line), ``"first"``
    (position of the line's first digit) or ``"through"`` (digits up to the
    line's end)."""
    end_label_meaning: str | None = None
    """For ``labels="both"``: what the end labels count (``label_meaning`` is the start labels')."""
    header_lines: int = 0
    """Lines before the first digit line (``#`` comments, free text, blank)."""
    digits_offset: int = 0
    """Byte offset of the first digit after the radix point."""
    newline: str | None = None
    """``"\\n"`` or ``"\\r\\n"``, or None for a file without line breaks."""
    letter_case: str | None = None
    """For hex text: ``"upper"``, ``"lower"``, ``"mixed"``; None for decimal or packed."""
    access: str = "regular"
    """``"regular"``: position -> byte offset by arithmetic (O(1));
    ``"indexed"``: through a sparse index built in the first pass."""
    index_entries: int = 0

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class Finding:
    """A non-fatal observation about a file, e.g. a position label that disagrees."""

    kind: str
    """Short machine name: ``label-mismatch``, ``label-missing``, ``constant-mismatch``..."""
    message: str
    line: int | None = None
    byte_offset: int | None = None
    position: int | None = None
    expected: int | None = None
    """For a label finding: the value the digit count implies the label should have."""
    found: str | None = None
    """For a label finding: the label as written in the file."""
    end: str | None = None
    """For a label finding: which end of the line the label sits at (``"start"`` or ``"end"``)."""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True)
class InspectResult:
    """Everything ``spotcheck inspect`` shows about one digit file."""

    path: str
    size_bytes: int
    compression: str | None
    base: int
    base_how: str
    constant: str | None
    constant_how: str
    integer_part: str | None
    count: int
    layout: Layout
    first_digits: str
    last_digits: str
    findings: list[Finding] = field(default_factory=list)
    first_positions: tuple[int, ...] = (1,)
    """Where the file's first digit may lie in the expansion (two when a start label may count from
    0 or from 1: ``verify`` and ``locate`` settle that with certified digits)."""
    first_how: str = "start"
    """``start`` (the file's start is digit 1), ``given`` or ``labels``."""

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["first_positions"] = list(self.first_positions)
        out["layout"] = self.layout.to_dict()
        out["findings"] = [f.to_dict() for f in self.findings]
        return out
