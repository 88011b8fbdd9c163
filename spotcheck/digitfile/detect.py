"""Look at the head of a digit file and decide how to read the rest.

Detection reads at most ``HEAD_BYTES`` of (decompressed) content and returns a
:class:`Plan`; the streaming pass (:mod:`spotcheck.digitfile.scan`) then
checks the whole file against it.

Rules, in order:

* binary content (control bytes, or mostly bytes >= 0x80) that is not
  compressed is *packed hex* (two hex digits per byte, high nibble first) when
  the caller says so, when the name ends in ``.bin`` or ``.hexbin`` (before any
  compression suffix), or when its first bytes are those of a known constant;
  any other binary content is an error;
* lines before the digits are a header: blank lines, ``#`` comments and a
  short free-text preamble (at most ``MAX_HEADER_LINES`` lines).  The digits
  start at the first line that looks like digits and is followed by lines
  that look like digits too;
* the first digit line may begin with an integer part and a radix point
  (``3.``);
* a line may carry a position label, a decimal number set off by ``:`` or
  ``|`` at its start (``  1000: 1415926535``) or end (``1415926535 : 10``);
* base 16 when any digit is a letter A-F (either case); an explicit base
  overrides, and digits that contradict it are an error.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

from spotcheck.digitfile.charsets import DEC, HEX, HEX_LETTERS, WS, class_table, strip_labels
from spotcheck.errors import DigitFileError

__all__ = ["Plan", "detect_text", "looks_binary", "HEAD_BYTES", "PACKED_SUFFIXES"]

# --- tuning -----------------------------------------------------------------
HEAD_BYTES = 256 * 1024  # bytes of content examined before the pass
MAX_HEADER_LINES = 100  # longest header/preamble accepted before the digits
CONFIRM_LINES = 3  # digit-looking lines that must follow the first digit line
MAX_FIRST_LINE = 64 * 1024  # a first line longer than this is read as one long line
HEAD_DIGITS = 64  # leading digits kept for guessing the constant
MIN_HEX_EVIDENCE = 200  # decimal-only digits this many long cannot be hex by chance
PACKED_SUFFIXES = (".bin", ".hexbin")

_BODY = rb"[0-9A-Fa-f \t]*"
_PLAIN = re.compile(rb"[ \t]*(?:[0-9A-Fa-f]+\.)?" + _BODY + rb"\r?\Z")
_START = re.compile(rb"[ \t]*(\d+)[ \t]*[:|]((?:[ \t]*[0-9A-Fa-f]+\.)?" + _BODY + rb")\r?\Z")
_END = re.compile(rb"((?:[ \t]*[0-9A-Fa-f]+\.)?" + _BODY + rb"?)[ \t]*[:|][ \t]*(\d+)[ \t]*\r?\Z")
_INT_PART = re.compile(rb"[ \t]*([0-9A-Fa-f]+)\.")
_TEXT_BYTES = bytes(range(0x20, 0x7F)) + b"\t\n\r\f\v"


@dataclass
class Plan:
    """What detection decided; the pass and the reader follow it."""

    base: int | None
    """10 or 16, or None when only the constant can tell (short file, no letters)."""
    base_how: str
    explicit_base: bool
    integer_part: str | None
    header_lines: int
    first_line_no: int
    labels: str | None
    first_label: int | None
    digits_offset: int
    seg_end: int
    """The pass starts here: after the first digit line, or at ``digits_offset``
    for a file that is one long line."""
    seg_cols: list[int]
    """Byte offsets of the digits between ``digits_offset`` and ``seg_end``."""
    seg_digits: bytes
    head_digits: bytes
    """Up to ``HEAD_DIGITS`` leading digits after the point, as in the file."""
    sample_digits: int
    """Digits examined for the base decision."""
    template: bytes | None
    """Character classes of one repeating unit (a line, or a group when the file
    has no line breaks) for the regular-layout check; None for labelled files."""
    newline: str | None
    letter_case: str | None
    whole_file_in_head: bool
    notes: list[str] = field(default_factory=list)


def looks_binary(head: bytes) -> bool:
    """True for content that is not text: control bytes or mostly non-ASCII."""
    sample = head[:4096]
    if not sample:
        return False
    odd = sample.translate(None, _TEXT_BYTES)
    if not odd:
        return False
    controls = odd.translate(None, bytes(range(0x80, 0x100)))
    return bool(controls) or len(odd) > 0.3 * len(sample)


def _classify(line: bytes) -> str:
    s = line.strip()
    if not s:
        return "blank"
    if s.startswith(b"#"):
        return "comment"
    if _PLAIN.match(line):
        return "plain"
    if _START.match(line):
        return "start"
    if _END.match(line):
        return "end"
    return "text"


def _line_of(head: bytes, offset: int) -> int:
    return head.count(b"\n", 0, offset) + 1


def detect_text(head: bytes, eof: bool, path: str, base: int | None) -> Plan:
    """Decide the layout of a text digit file from its first bytes.

    ``head`` is the start of the (decompressed) content, ``eof`` says whether
    it is the whole content.  ``base`` is the caller's explicit base or None.
    """
    name = os.path.basename(path)
    if not head.strip():
        raise DigitFileError(
            f"{name}: the file is empty" if not head else f"{name}: the file holds only whitespace"
        )
    start = 3 if head.startswith(b"\xef\xbb\xbf") else 0  # UTF-8 byte-order mark
    complete = head if eof else head[: head.rfind(b"\n") + 1]
    # Split into lines with their offsets.
    lines: list[tuple[int, bytes]] = []
    pos = start
    while pos < len(head) and len(lines) < MAX_HEADER_LINES + CONFIRM_LINES + 64:
        nl = head.find(b"\n", pos)
        end = len(head) if nl < 0 else nl
        lines.append((pos, head[pos:end]))
        pos = end + 1
    kinds = [_classify(text) for _, text in lines]
    digit_kinds = ("plain", "start", "end")
    first = None
    for i, k in enumerate(kinds):
        if i > MAX_HEADER_LINES:
            break
        if k not in digit_kinds:
            continue
        following = [kk for kk in kinds[i + 1 : i + 1 + CONFIRM_LINES + 2] if kk != "blank"][:CONFIRM_LINES]
        if all(kk in digit_kinds for kk in following):
            first = i
            break
    if first is None:
        raise DigitFileError(
            f"{name}: no digits found: none of the first {min(len(lines), MAX_HEADER_LINES)} lines "
            "starts a block of digit lines (expected hex or decimal digits after an optional header)"
        )
    line_off, line = lines[first]
    sample_kinds = [k for k in kinds[first : first + 50] if k in digit_kinds]
    labels: str | None = max(("plain", "start", "end"), key=sample_kinds.count)
    if labels == "plain":
        labels = None
    # The first line: label, integer part, body.
    first_label: int | None = None
    body_off = line_off
    body_end = line_off + len(line.rstrip(b"\r"))
    if labels == "start" and (m := _START.match(line)):
        first_label, body_off = int(m.group(1)), line_off + m.start(2)
    elif labels == "end" and (m := _END.match(line)):
        first_label, body_end = int(m.group(2)), line_off + m.end(1)
    integer_part = None
    digits_offset = body_off
    if m := _INT_PART.match(head, body_off, body_end):
        integer_part = m.group(1).decode().upper().lstrip("0") or "0"
        digits_offset = m.end()
    elif m := re.compile(rb"[ \t]*").match(head, body_off):
        digits_offset = m.end()
    nl_at = line_off + len(line)
    ends_in_newline = head[nl_at : nl_at + 1] == b"\n"
    newline = None
    if ends_in_newline:
        newline = "\r\n" if line.endswith(b"\r") else "\n"
    if (ends_in_newline or eof) and len(line) <= MAX_FIRST_LINE:
        seg_end = nl_at + 1 if ends_in_newline else nl_at
        seg = head[digits_offset:body_end]
    else:
        if labels is not None:
            raise DigitFileError(
                f"{name}: labelled lines longer than {MAX_FIRST_LINE} bytes are not supported"
            )
        seg_end = digits_offset
        seg = b""
    # Digits sample for the base decision and the constant guess.
    region = (
        head[digits_offset:]
        if (eof or labels is None)
        else head[digits_offset : max(len(complete), digits_offset)]
    )
    cleaned = strip_labels(region, labels).translate(None, WS)
    m = re.compile(rb"[0-9A-Fa-f]*").match(cleaned)
    sample = m.group() if m else b""
    if not sample:
        raise DigitFileError(f"{name}: no digits after the radix point")
    has_letters = bool(sample.translate(None, DEC))
    if has_letters and base != 10:
        plain = len(sample) - len(sample.lstrip(DEC))
        if plain >= MIN_HEX_EVIDENCE:
            at = digits_offset + _first_of(head[digits_offset:], HEX_LETTERS)
            raise DigitFileError(
                f"{name}: mixed bases: hex digit {chr(head[at])!r} at byte {at} (line {_line_of(head, at)}), "
                f"but the {plain} digits before it are all decimal"
            )
    base_how: str
    if base is not None:
        if base not in (10, 16):
            from spotcheck.errors import UsageError

            raise UsageError(f"base must be 10 or 16, got {base}")
        base_how = f"given explicitly ({base})"
        if base == 10 and has_letters:
            at = digits_offset + _first_of(head[digits_offset:], HEX_LETTERS)
            raise DigitFileError(
                f"{name}: {chr(head[at])!r} at byte {at} (line {_line_of(head, at)}) is not a decimal digit: "
                "the file looks hexadecimal, but base 10 was requested"
            )
        if base == 16 and not has_letters and len(sample) >= MIN_HEX_EVIDENCE:
            raise DigitFileError(
                f"{name}: none of the first {len(sample)} digits is a letter A-F: the file looks decimal, "
                "but base 16 was requested"
            )
    elif has_letters:
        base = 16
        base_how = "detected: hex letters among the digits"
    elif len(sample) >= MIN_HEX_EVIDENCE:
        base = 10
        base_how = f"detected: no letter A-F among the first {len(sample)} digits"
    else:
        base = None
        base_how = ""
    letter_case = None
    if has_letters:
        up, low = any(c in b"ABCDEF" for c in sample), any(c in b"abcdef" for c in sample)
        letter_case = "mixed" if up and low else ("lower" if low else "upper")
    digits = HEX if (base or 16) == 16 else DEC
    seg_cols = [digits_offset + i for i, c in enumerate(seg) if c in digits]
    seg_digits = bytes(seg[i - digits_offset] for i in seg_cols)
    template = None
    if labels is None:
        template = _template(head, seg_end, digits_offset, eof, base or 16, newline)
    return Plan(
        base=base,
        base_how=base_how,
        explicit_base=base_how.startswith("given"),
        integer_part=integer_part,
        header_lines=first,
        first_line_no=first + 1,
        labels=labels,
        first_label=first_label,
        digits_offset=digits_offset,
        seg_end=seg_end,
        seg_cols=seg_cols,
        seg_digits=seg_digits,
        head_digits=sample[:HEAD_DIGITS],
        sample_digits=len(sample),
        template=template,
        newline=newline,
        letter_case=letter_case,
        whole_file_in_head=eof,
    )


def _first_of(data: bytes, chars: bytes) -> int:
    return min((i for i in (data.find(bytes([c])) for c in chars) if i >= 0), default=0)


def _template(
    head: bytes, seg_end: int, digits_offset: int, eof: bool, base: int, newline: str | None
) -> bytes:
    """Classes of the repeating unit that the rest of the file should follow."""
    table = class_table(base)
    if seg_end > digits_offset:
        nl = head.find(b"\n", seg_end)
        if nl >= 0:
            return head[seg_end : nl + 1].translate(table)
        rest = head[seg_end:].rstrip(WS)
        if rest:
            return rest.translate(table) + (newline or "\n").encode()
        return b"d"
    # One long line: the unit is a group and its separator, or a single digit.
    m = re.compile(rb"[0-9A-Fa-f]+[ \t]+").match(head, seg_end)
    if m and b"\n" not in m.group():
        return m.group().translate(table)
    return b"d"
