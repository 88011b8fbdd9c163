"""One check's request: what to check and how, built once and handed down unchanged.

A :class:`CheckRequest` is frozen: the CLI builds it from its options (or a
caller from keywords, :func:`make_request`), and every layer of a check reads
the fields it needs from it instead of taking them as keywords.  The two time
limits have one name each: ``full_seconds`` (a full comparison with an
independent computation may run when its estimate fits: ``verify``'s every
digit, ``locate``'s comparison of the digits before a wrong one) and
``sample_seconds`` (``verify`` keeps drawing random windows this long).

>>> r = make_request(None, constant="pi", first_position=1_000_001)
>>> r.constant, r.first_position, r.full_seconds_or(60.0)
('pi', 1000001, 60.0)
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

from spotcheck.engine.plan import CostEstimate
from spotcheck.errors import UsageError

__all__ = ["CheckRequest", "make_request", "DEFAULT_WINDOW"]

DEFAULT_WINDOW = 16  # digits compared per check

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class CheckRequest:
    """What a check of one file is asked to do.  Every field has the default a caller gets
    when it does not say; ``None`` for a time limit means the check's own default."""

    # -- what the file is ------------------------------------------------------
    base: int | None = None
    constant: str | None = None
    formula: str | None = None
    labels: str | None = None
    """Where the position labels are, when the layout cannot tell (``start``, ``end``, ``both``, ``none``)."""
    ignore_labels: bool = False
    first_position: int | None = None
    """The position in the expansion of the file's first digit (None: the labels say, else 1)."""
    limit: int | None = None
    """Check only the file's first ``limit`` digits."""
    # -- how much to check -----------------------------------------------------
    window: int = DEFAULT_WINDOW
    samples: int | None = None
    """Random windows (``verify``; None: the default number)."""
    seed: int | None = None
    at: tuple[int, ...] = ()
    """Positions of windows to check besides the planned ones (``verify``)."""
    full_seconds: float | None = None
    """Seconds a full comparison may take (None: the check's default)."""
    sample_seconds: float | None = None
    """Seconds ``verify`` keeps drawing random windows (None: only the asked number)."""
    reference: str = "arb"
    # -- where to compute ------------------------------------------------------
    workers: int = 1
    cluster: Any = None
    """A Dask scheduler address (or Client) for deep windows' head sums."""
    checkpoint: bool | str = False
    """One journal for every engine window of the check: a path, or True for the cache-directory rule."""
    # -- what the caller hears -------------------------------------------------
    progress: Progress | None = field(default=None, compare=False, repr=False)
    on_estimate: Callable[[CostEstimate], None] | None = field(default=None, compare=False, repr=False)
    on_checkpoint: Callable[[str], None] | None = field(default=None, compare=False, repr=False)

    def __post_init__(self) -> None:
        if self.limit is not None and self.limit < 1:
            raise UsageError(f"limit must be at least 1, got {self.limit}")
        if self.first_position is not None and self.first_position < 1:
            raise UsageError(f"the first digit's position must be 1 or more, got {self.first_position}")
        if self.full_seconds is not None and not self.full_seconds >= 0:
            raise UsageError(f"budget must be zero or more seconds, got {self.full_seconds}")
        if self.sample_seconds is not None and not self.sample_seconds > 0:
            raise UsageError(f"sample time must be a positive number of seconds, got {self.sample_seconds}")
        if self.workers < 1:
            raise UsageError(f"workers must be 1 or more, got {self.workers}")
        if not isinstance(self.at, tuple):
            object.__setattr__(self, "at", tuple(self.at))

    def full_seconds_or(self, default: float) -> float:
        """``full_seconds``, or the check's ``default`` when the request leaves it open."""
        return default if self.full_seconds is None else self.full_seconds


def make_request(request: CheckRequest | None, **options: Any) -> CheckRequest:
    """``request`` (or the default one) with ``options`` (field names of :class:`CheckRequest`) put in.

    The public checks take a request, keywords, or both: this is their one way in.
    An unknown keyword is a ``TypeError``, as for any function.
    """
    base = request if request is not None else CheckRequest()
    if not options:
        return base
    at = options.get("at")
    if at is not None and not isinstance(at, tuple):
        options["at"] = tuple(_positions(at))
    return dataclasses.replace(base, **options)


def _positions(at: Sequence[int]) -> list[int]:
    return [int(p) for p in at]
