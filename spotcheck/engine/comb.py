"""Certified digits at a comb of positions, one pass over the head terms for all of them.

A *comb* is ``count`` windows of ``digits`` hex digits at the positions
``position + i * gap`` (``i < count``), i.e. at bit offsets
``d_i = d_0 + i * 4 gap``.  A head term ``(k, j)`` has the same modulus
``N = q (m k + j)^s`` in every window, and its exponent grows by ``4 gap``
from one window to the next, so its residue in window ``i + 1`` is its
residue in window ``i`` times ``2^(4 gap) mod N``
(:func:`spotcheck.engine.head_py.head_sum_comb_py`, ``head_sum_comb`` in the
kernel): every window after the first costs one modular product and its
fraction words per term instead of a ladder.

Only the arithmetic is shared.  Each window keeps its own head (the terms
with ``D_i - e k >= 0``, so a term in the tail of a shallow window and the
head of a deeper one is summed for the deeper one only), its own tail, its
own remainder bound and so its own :class:`~spotcheck.engine.evaluate.Interval`,
built exactly as :func:`~spotcheck.engine.evaluate.frac_interval` builds it
for the window alone.  All windows are summed with the precision of the
deepest (``words_for`` grows with the offset); a window whose interval does
not certify its digits at that precision is evaluated again alone by
:func:`~spotcheck.engine.evaluate.window_digits`, so a digit is never guessed
and the digits are always those of the window evaluated alone.

The pass is cut into comb blocks (:class:`~spotcheck.engine.blocks.CombRequest`)
run as a window's blocks are: by the plan's runner (threads, a Dask cluster),
each record checked by :func:`~spotcheck.engine.blocks.block_problem`, journaled
in the plan's checkpoint under a section naming the comb.
"""

from __future__ import annotations

from dataclasses import dataclass

from spotcheck.engine.blocks import CombRequest, HeadSum, deep_comb_block_k, sum_comb_blocks
from spotcheck.engine.evaluate import (
    Interval,
    certified_hex_prefix,
    interval_from,
    window_capacity,
    window_digits,
    words_for,
)
from spotcheck.engine.plan import RunPlan
from spotcheck.engine.series import Series

__all__ = ["CombWindow", "comb_heads_fixed", "comb_window_digits", "MAX_WINDOWS"]

# --- tuning -----------------------------------------------------------------
# Windows of one comb, at most: a comb block's journal line holds every
# window's value (at most evaluate.WINDOW_MAX_WORDS = 8 words, 128 hex digits)
# and term count, about 150 bytes a window, so 4,096 windows (about 600 KB)
# stay within journal.MAX_LINE_BYTES (1 MiB).  Also the kernel's MAX_COMB.
MAX_WINDOWS = 4096
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class CombWindow:
    """One window of a comb: its position, certified digits and interval."""

    position: int
    digits: str
    interval: Interval
    alone: bool = False
    """True when the comb's precision did not certify it and it was evaluated alone."""
    comb_blocks: tuple[int, int] = (0, 0)
    """The comb pass's blocks ``(loaded from a checkpoint, computed)``, shared by every window
    (a window evaluated alone has its own besides, in ``interval``)."""


def comb_heads_fixed(
    series: Series,
    d0: int,
    step: int,
    count: int,
    words: int,
    plan: RunPlan | None = None,
    *,
    workers: int = 1,
    block_k: int | None = None,
) -> list[HeadSum]:
    """The head sums of the windows at bit offsets ``d0 + i * step`` with ``64 * words`` bits.

    Comb blocks (:class:`~spotcheck.engine.blocks.CombRequest`) over the
    deepest window's head, run as ``plan`` runs a window's blocks: its runner
    (threads, a Dask cluster), its journal, its progress callback, its block
    size (the deepest window's; for a checkpointed or cluster run, shorter by
    the comb's cost per value of k, :func:`~spotcheck.engine.blocks.deep_comb_block_k`;
    ``block_k`` overrides it).  Without a plan:
    ``workers`` threads, nothing else.  Every comb block's record is checked
    before its sums go to the windows whose heads hold its k.
    """
    plan = plan or RunPlan.local(series, workers=workers)
    d_last = d0 + (count - 1) * step
    if block_k is None and plan.block_k is None and plan.deep:
        block_k = deep_comb_block_k(series, series.head_length(d_last), count)
    size = block_k or plan.block_size(d_last)
    request = CombRequest(series, d0, step, count, words, size)
    return sum_comb_blocks(request, runner=plan.runner, journal=plan.journal, on_block=plan.on_block)


def comb_window_digits(
    series: Series,
    position: int,
    gap: int,
    count: int,
    digits: int,
    plan: RunPlan | None = None,
    *,
    workers: int = 1,
) -> list[CombWindow]:
    """``digits`` certified hex digits at each of the positions ``position + i * gap``, ``i < count``.

    One pass over the head terms serves every window (see the module
    docstring); each window is certified by its own interval, and evaluated
    alone if the shared precision does not settle it.  ``plan`` runs the
    comb's blocks and any window evaluated alone (runner, journal, progress,
    block size); without one, ``workers`` threads.  Raises ``ValueError``
    when ``digits`` exceeds one window's capacity at the deepest position.
    """
    if position < 1 or gap < 1 or count < 1 or digits < 1:
        raise ValueError("a comb needs position >= 1, gap >= 1, count >= 1 and digits >= 1")
    d0, step = 4 * (position - 1), 4 * gap
    d_last = d0 + (count - 1) * step
    if digits > window_capacity(series, d_last):
        raise ValueError(
            f"{digits} digits exceed one window's {window_capacity(series, d_last)} at that depth"
        )
    words = words_for(series, d_last, digits)
    plan = plan or RunPlan.local(series, position, digits, workers)
    heads = comb_heads_fixed(series, d0, step, count, words, plan)
    out = []
    for i, head in enumerate(heads):
        d = d0 + i * step
        interval = interval_from(series, d, words, head)
        found = certified_hex_prefix(interval, digits)
        alone = len(found) < digits
        if alone:  # never guessed: this window alone, with more bits
            found, interval = window_digits(series, d, digits, plan, words=words + 1)
        out.append(
            CombWindow(position + i * gap, found, interval, alone, (head.blocks_loaded, head.blocks_computed))
        )
    return out
