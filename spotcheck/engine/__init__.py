"""Layer 2: exact fixed-point evaluation of BBP-type series and certified digits."""

from spotcheck.engine.api import DigitResult, extract, hex_digits

__all__ = ["DigitResult", "extract", "hex_digits"]
