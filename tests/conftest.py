from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

settings.register_profile("dev", max_examples=25, deadline=None)
settings.register_profile(
    "ci", max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "dev"))


def pytest_report_header(config):  # noqa: ARG001 - pytest hook signature
    """The kernel in use, the paths this CPU offers, and why the others are skipped; the digit-file loops."""
    from spotcheck.engine import backend

    lines = [
        f"spotcheck head-sum kernel: {backend.BACKEND_NOTE}",
        f"spotcheck digit-file loops: {backend.digitfile_loops().note}",
    ]
    try:
        from spotcheck.engine import _kernel  # type: ignore[attr-defined]
    except ImportError:
        return lines + ["kernel paths: none (the compiled kernel is not built); its tests are skipped"]
    lines.append(
        f"kernel path in use: {_kernel.active_path()}; paths this CPU offers: {', '.join(_kernel.paths())}"
    )
    for name, why in _kernel.unavailable_paths().items():
        lines.append(f"kernel path {name} skipped: {why}")
    return lines
