"""Layer 3: digit files as people have them.

Open a file of digits of a constant read-only, find the digits whatever the
layout, and read any window of them without loading the file:

* text in base 16 (either case) or 10, with an optional integer part and radix
  point (``3.``), spaces/tabs between groups, any line length, ``#`` comment
  or short free-text header lines, and optional position labels at the start
  or end of lines (checked against the real count; a label that disagrees is a
  :class:`Finding`);
* packed binary hex (two digits per byte, high nibble first);
* gzip, bzip2 or xz around either, recognised by magic bytes.

:func:`open_digit_file` runs one streaming pass (validation, count, labels,
random-access structure) in bounded memory; afterwards ``read(position,
count)`` is O(1) arithmetic for a regular layout and a sparse-index lookup
plus at most ``INDEX_STEP`` bytes of parsing for any other.  Compressed
content has no random access without a pass: reads move forward through the
decompressor; a read before the current point resumes gzip from the nearest
checkpoint the pass kept (every 16 MiB of content) and restarts bzip2 and xz
from the start, so read positions in increasing order (``iter_chunks`` does).

:func:`open_stream` reads a file once from front to back instead: detection
only at open, then the digits chunk by chunk, validated as they are read (the
same errors and findings as the pass), with the count, findings and a
:class:`DigitFile` for random access at the end.

Positions follow the package convention: digit 1 is the first after the point.
"""

from __future__ import annotations

from spotcheck.digitfile.file import DigitFile
from spotcheck.digitfile.model import Finding, InspectResult, Layout
from spotcheck.digitfile.reader import inspect_file, open_digit_file
from spotcheck.digitfile.stream import DigitStream, open_stream

__all__ = [
    "open_digit_file",
    "open_stream",
    "DigitFile",
    "DigitStream",
    "inspect_file",
    "InspectResult",
    "Layout",
    "Finding",
]
