"""Layer 4: the checks.  Each takes a path and returns a plain result object.

* :func:`verify_file`: tail, head, random and named windows against the engine;
* :func:`locate_file`: the first wrong digit (bisection, or a scan);
* :func:`scan_file`: every digit against an independent full computation.

Decimal files are handled through radix conversion (:mod:`.decimal`).
"""

from .locate import locate_file
from .results import LocateResult, MismatchRun, ScanResult, VerifyResult, WindowCheck
from .scan import scan_file
from .verify import verify_file

__all__ = [
    "verify_file",
    "locate_file",
    "scan_file",
    "VerifyResult",
    "LocateResult",
    "ScanResult",
    "MismatchRun",
    "WindowCheck",
]
