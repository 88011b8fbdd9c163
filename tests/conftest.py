"""Hypothesis profiles, the pytest header, the test order, and a guard on loaded modules.

* ``SPOTCHECK_TEST_ORDER`` sets the order the tests run in: unset, pytest's own
  (files in name order, tests as written); ``reverse``, that order backwards
  (each file's tests and each group sharing a module fixture stay together, so
  nothing is set up twice); ``random`` or ``random:SEED``, shuffled (the files,
  the tests and classes in each file, the tests in each class), then regrouped
  by pytest for its parametrized module fixtures.  The header names the
  order and the seed (so does the end of the run, for ``-q``);
  ``SPOTCHECK_TEST_ORDER=random:SEED`` repeats a run.
  ``.ci/run`` runs the fast suite once in reverse and once shuffled, so a test
  that works only after (or before) another fails there.
* After every test, each ``spotcheck`` module loaded when collection ended must
  still be the module in ``sys.modules`` under its name: a test that replaced
  one (a second build of an extension loaded under the installed one's name)
  fails at its teardown, and the module is put back so that later tests see
  the real one.
"""

from __future__ import annotations

import os
import random
import sys
from types import ModuleType

import pytest
from hypothesis import HealthCheck, settings

settings.register_profile("dev", max_examples=25, deadline=None)
settings.register_profile(
    "ci", max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "dev"))


def _test_order() -> tuple[str, int | None]:
    """("", None), ("reverse", None) or ("random", seed) from SPOTCHECK_TEST_ORDER."""
    value = os.environ.get("SPOTCHECK_TEST_ORDER", "").strip()
    if value in ("", "reverse"):
        return value, None
    kind, _, seed = value.partition(":")
    if kind == "random" and (seed == "" or seed.isdigit()):
        return kind, int(seed) if seed else random.SystemRandom().randrange(10**6)
    raise pytest.UsageError(
        f"SPOTCHECK_TEST_ORDER={value!r}: expected reverse, random or random:SEED (a whole number)"
    )


ORDER, SEED = _test_order()


def pytest_report_header(config):  # noqa: ARG001 - pytest hook signature
    """The kernel in use, the paths this CPU offers, and why the others are skipped; the digit-file
    loops; the test order."""
    from spotcheck.engine import backend

    lines = [
        f"spotcheck head-sum kernel: {backend.BACKEND_NOTE}",
        f"spotcheck digit-file loops: {backend.digitfile_loops().note}",
    ]
    if ORDER:
        lines.append(f"test order: {_order_words()}")
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


def pytest_terminal_summary(terminalreporter) -> None:
    """The order again at the end (``-q`` prints no header)."""
    if ORDER:
        terminalreporter.write_line(f"test order: {_order_words()}")


def _order_words() -> str:
    if ORDER == "reverse":
        return "reversed (SPOTCHECK_TEST_ORDER=reverse)"
    return f"shuffled with seed {SEED} (SPOTCHECK_TEST_ORDER=random:{SEED} repeats it)"


@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Shuffle the files, the classes and free tests within each file, and the tests
    within each class, before pytest groups the tests that share a parametrized
    module fixture (it keeps the rest of the order): each file's and each class's
    fixtures are still set up once."""
    if ORDER != "random":
        return
    rng = random.Random(SEED)
    files: dict[object, dict[object, list[pytest.Item]]] = {}
    for item in items:
        files.setdefault(item.path, {}).setdefault(getattr(item, "cls", None) or item, []).append(item)
    blocks = [list(groups.values()) for groups in files.values()]
    rng.shuffle(blocks)
    items[:] = []
    for groups in blocks:
        rng.shuffle(groups)
        for group in groups:
            rng.shuffle(group)
            items.extend(group)


class _Reverse:
    @pytest.hookimpl(trylast=True)
    def pytest_collection_modifyitems(self, items: list[pytest.Item]) -> None:
        """Reverse after pytest grouped the tests, so each group stays together."""
        items.reverse()


def pytest_configure(config: pytest.Config) -> None:
    if ORDER == "reverse":
        config.pluginmanager.register(_Reverse(), "spotcheck-reverse-order")


# --- no test replaces a loaded module -----------------------------------------------

LOADED: dict[str, ModuleType] = {}


def pytest_collection_finish(session: pytest.Session) -> None:  # noqa: ARG001 - pytest hook signature
    LOADED.update((name, m) for name, m in sys.modules.items() if name.split(".")[0] == "spotcheck")


@pytest.fixture(autouse=True)
def _loaded_modules_stay():
    yield
    replaced = sorted(name for name, module in LOADED.items() if sys.modules.get(name) is not module)
    if replaced:
        for name in replaced:
            sys.modules[name] = LOADED[name]
        pytest.fail(
            f"this test replaced or removed loaded modules in sys.modules: {', '.join(replaced)} "
            "(put back; load another build under a name of its own)"
        )
