"""Layer 4: the checks.  Each takes a path and returns a plain result object.

* :func:`verify_file`: tail, head, random and named windows against the engine;
* :func:`locate_file`: the first wrong digit (bisection, or a scan);
* :func:`scan_file`: every digit against an independent full computation.

Decimal files are handled through radix conversion (:mod:`.decimal`).
"""

from importlib import import_module
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .locate import locate_file
    from .request import CheckRequest
    from .results import LocateResult, MismatchRun, ScanResult, VerifyResult, WindowCheck
    from .scan import scan_file
    from .verify import verify_file

# Each name is imported from its module on first use, so that a command loads
# only the check it runs (the command's start-up is part of what it costs).
_HOME = {
    "verify_file": "verify",
    "locate_file": "locate",
    "scan_file": "scan",
    "CheckRequest": "request",
    "VerifyResult": "results",
    "LocateResult": "results",
    "ScanResult": "results",
    "MismatchRun": "results",
    "WindowCheck": "results",
}


def __getattr__(name: str) -> Any:
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(import_module(f"{__name__}.{home}"), name)
    globals()[name] = value
    return value


__all__ = [
    "verify_file",
    "locate_file",
    "scan_file",
    "CheckRequest",
    "VerifyResult",
    "LocateResult",
    "ScanResult",
    "MismatchRun",
    "WindowCheck",
]
