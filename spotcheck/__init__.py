"""spotcheck: trust a digit file of a mathematical constant without recomputing it.

Position convention everywhere: digit 1 is the first digit after the radix
point, in the file's own base.  For pi = 3.243F6A88... in hexadecimal, digit 1
is ``2``.

>>> import spotcheck
>>> spotcheck.hex_digits("pi", 1, 8)
'243F6A88'
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

__all__ = ["__version__", "hex_digits", "extract", "DigitResult"]

if TYPE_CHECKING:
    from spotcheck.engine.api import DigitResult, extract, hex_digits


def __getattr__(name: str) -> Any:  # lazy: keep `import spotcheck` cheap
    if name in ("hex_digits", "extract", "DigitResult"):
        from spotcheck.engine import api

        return getattr(api, name)
    raise AttributeError(f"module 'spotcheck' has no attribute {name!r}")
