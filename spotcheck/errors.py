"""The one error family for problems a user can cause.

The CLI catches :class:`SpotcheckError` only and prints its message as one
``error:`` line on stderr with exit code 2.  A mismatch between a file and the
engine is a *result*, never an exception.
"""

from __future__ import annotations


class SpotcheckError(Exception):
    """Base class for every error caused by the user's input or request."""


class UsageError(SpotcheckError, ValueError):
    """A request that cannot be served: unknown constant, impossible position..."""


class FormulaError(SpotcheckError, ValueError):
    """A formula definition that is malformed or does not converge."""


class DigitFileError(SpotcheckError, ValueError):
    """A digit file that cannot be read as digits (garbage, empty, wrong base...)."""


class LabelError(DigitFileError):
    """Position labels in a digit file that disagree with the real digit count."""


class FileAccessError(SpotcheckError, OSError):
    """A path that cannot be opened: missing, a directory, unreadable."""


class CertificationError(SpotcheckError, RuntimeError):
    """The engine could not certify the requested digits within its limits.

    Raised instead of ever returning a digit that the error bound does not
    settle.
    """


class CheckpointError(SpotcheckError, ValueError):
    """A checkpoint file that belongs to another request or is damaged; it is never used."""


class InfeasibleError(UsageError):
    """A request that cannot finish: its estimated cost is far beyond what can be run.

    ``estimate`` is the engine's cost estimate (a
    :class:`spotcheck.engine.plan.CostEstimate`); ``hint`` names what would
    make it feasible (``"cluster"``), or is ``None`` when nothing would.  The
    message names no command-line option; the CLI adds that wording.
    """

    def __init__(self, message: str, estimate: object, hint: str | None = None) -> None:
        super().__init__(message)
        self.estimate = estimate
        self.hint = hint


class ClusterError(UsageError):
    """A cluster (Dask scheduler) that cannot be reached or used."""
