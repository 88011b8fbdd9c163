"""What a set of clean checks means, as numbers."""

from __future__ import annotations

# Confidence level of the scattered-damage bound.
CONFIDENCE = 0.95


def false_match_chance(window: int, base: int) -> float:
    """Chance that a wrong window of ``window`` random digits matches by accident."""
    return float(base) ** (-window)


def scattered_damage_bound(clean_windows: int, confidence: float = CONFIDENCE) -> float | None:
    """Upper bound on the damaged fraction after ``clean_windows`` uniform random clean windows.

    With a fraction ``f`` of positions whose window holds damage, ``n``
    independent uniform windows all come back clean with probability
    ``(1 - f)^n``; the exact one-sided binomial (Clopper-Pearson) bound for zero
    failures is ``f <= 1 - (1 - confidence)^(1/n)``.  A damaged digit spoils
    every window that covers it, so this also bounds the fraction of damaged
    digits.
    """
    if clean_windows <= 0:
        return None
    return 1.0 - (1.0 - confidence) ** (1.0 / clean_windows)
