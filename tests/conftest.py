from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

settings.register_profile("dev", max_examples=25, deadline=None)
settings.register_profile(
    "ci", max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "dev"))


def pytest_report_header(config):  # noqa: ARG001 - pytest hook signature
    from spotcheck.engine import backend

    return f"spotcheck head-sum kernel: {backend.BACKEND_NOTE}"
