"""The kernel's dispatch rule on CPUs other than this one, and the kernel built
the other ways its header promises (no 128-bit integer type, no vector paths,
another compiler).

`paths_for` is the rule `detect_paths` applies at import, as a pure function:
asked about an AVX2-only CPU or a CPU with no vector extension at all, it must
offer what such a machine would get, whatever this machine has.

The other builds are compiled here with the C compiler of this Python (the one
the install used), and with clang where it is installed, into a temporary
folder, loaded under a module name of their own (their static state is their
own; the installed kernel stays the one in ``sys.modules``), and each path they offer is compared with
the twin bit for bit on the same generated calls as `test_kernel.py`. Without the compiler a build is skipped with the
reason; the dispatch tests need only the installed kernel.
"""

from __future__ import annotations

import importlib.util
import os
import shutil
import subprocess
import sys
import sysconfig
from pathlib import Path
from types import ModuleType

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.engine import backend
from spotcheck.engine.head_py import head_sum_py

from .test_kernel import builtin_calls, edge_moduli_calls

if backend.BACKEND != "c":  # pragma: no cover - exercised only without the extension
    pytest.skip("the compiled kernel is not built", allow_module_level=True)

from spotcheck.engine import _kernel  # noqa: E402

VECTOR = ("avx2", "avx512f", "avx512ifma", "ifma52")


@pytest.mark.parametrize(
    ("features", "offered", "default"),
    [
        ((False, False, False), ("portable", "scalar"), "portable"),
        ((True, False, False), ("portable", "scalar", "avx2"), "avx2"),
        ((True, True, False), ("portable", "scalar", "avx2", "avx512f"), "avx512f"),
        ((True, True, True), ("portable", "scalar", *VECTOR), "avx512ifma"),
        ((True, False, True), ("portable", "scalar", "avx2"), "avx2"),  # IFMA needs AVX-512F
    ],
    ids=["no-vector", "avx2-only", "avx512f", "avx512-ifma", "ifma-without-avx512f"],
)
def test_dispatch_rule_for_other_cpus(
    features: tuple[bool, bool, bool], offered: tuple, default: str
) -> None:
    got_offered, missing, got_default = _kernel.paths_for(*features)
    assert got_offered == offered
    assert got_default == default
    # every path is either offered or missing with a reason that names a feature
    assert set(got_offered) | set(missing) == {"portable", "scalar", *VECTOR}
    assert not set(got_offered) & set(missing)
    for name, why in missing.items():
        assert "lacks" in why and ("AVX" in why), (name, why)


def test_dispatch_rule_agrees_with_this_cpu() -> None:
    cpuinfo = Path("/proc/cpuinfo")
    lines = cpuinfo.read_text().splitlines() if cpuinfo.exists() else []
    flags = next((set(line.split(":", 1)[1].split()) for line in lines if line.startswith("flags")), set())
    if not flags:
        pytest.skip("no /proc/cpuinfo flags to compare with")
    features = ("avx2" in flags and "fma" in flags, "avx512f" in flags, "avx512ifma" in flags)
    offered, missing, default = _kernel.paths_for(*features)
    assert offered == _kernel.paths()
    assert missing == _kernel.unavailable_paths()
    # the default a fresh process picks (this one's may have been forced by a test or SPOTCHECK_KERNEL)
    env = {k: v for k, v in os.environ.items() if k not in ("SPOTCHECK_KERNEL", "SPOTCHECK_PURE")}
    fresh = subprocess.run(
        [sys.executable, "-c", "from spotcheck.engine import _kernel; print(_kernel.active_path())"],
        capture_output=True,
        text=True,
        check=True,
        env=env,
    )
    assert fresh.stdout.strip() == default


def _compiler(name: str) -> list[str] | None:
    """The command for "cc" (this Python's own compiler, the one the install used) or "clang"."""
    cc = (sysconfig.get_config_var("CC") or "cc").split() if name == "cc" else [name]
    return cc if shutil.which(cc[0]) else None


FLAGS = {
    "default": [],
    "no-int128": ["-DSPOTCHECK_NO_INT128"],
    "no-simd": ["-DSPOTCHECK_NO_SIMD"],
    "no-int128-no-simd": ["-DSPOTCHECK_NO_INT128", "-DSPOTCHECK_NO_SIMD"],
}
# this Python's compiler built the installed kernel already ("default"); clang, where it is installed,
# builds it as shipped and without the 128-bit type
BUILDS = [("cc", flags) for flags in FLAGS if flags != "default"] + [
    ("clang", "default"),
    ("clang", "no-int128"),
]
SOURCE = Path(_kernel.__file__).resolve().parent / "_kernel.c"


@pytest.fixture(scope="module", params=BUILDS, ids=[f"{cc}-{flags}" for cc, flags in BUILDS])
def other_build(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> ModuleType:
    compiler, flags = request.param
    cc = _compiler(compiler)
    if cc is None:
        pytest.skip(f"no {compiler} compiler here to build the kernel with")
    if not SOURCE.exists():
        pytest.skip(f"the kernel's source is not installed beside it ({SOURCE})")
    target = (
        tmp_path_factory.mktemp(f"{compiler}-{flags}") / f"_kernel{sysconfig.get_config_var('EXT_SUFFIX')}"
    )
    command = [
        *cc,
        "-O2",
        "-shared",
        "-fPIC",
        "-Wall",
        f"-I{sysconfig.get_paths()['include']}",
        *FLAGS[flags],
        str(SOURCE),
        "-o",
        str(target),
    ]
    done = subprocess.run(command, capture_output=True, text=True, check=False)
    assert done.returncode == 0, f"{' '.join(command)}\n{done.stderr}"
    module = load_build(target, f"{compiler}-{flags}")
    module.build_name = flags  # type: ignore[attr-defined]
    return module


def load_build(target: Path, build: str) -> ModuleType:
    """The extension at `target`, loaded as a module of its own beside the installed kernel.

    The loader calls the init function named after the last part of the module
    name (``PyInit__kernel``), so the name ends in ``._kernel``; its first part
    is the build's own, so no loaded module is replaced (a single-phase
    extension's init puts the module in ``sys.modules`` under the name it was
    loaded as).  That entry is removed again: the fixture holds the module."""
    name = f"_spotcheck_other_build_{build.replace('-', '_')}._kernel"
    spec = importlib.util.spec_from_file_location(name, target)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    sys.modules.pop(name, None)
    return module


def test_other_build_offers_what_its_flags_say(other_build: ModuleType) -> None:
    # loaded beside the installed kernel, which stays the one every import gets
    assert other_build is not _kernel and Path(other_build.__file__) != Path(_kernel.__file__)
    assert sys.modules["spotcheck.engine._kernel"] is _kernel
    assert importlib.import_module("spotcheck.engine")._kernel is _kernel
    name = other_build.build_name
    assert other_build.ARITHMETIC == ("portable" if "int128" in name else _kernel.ARITHMETIC)
    if "no-simd" in name:
        assert other_build.paths() == ("portable", "scalar")
        assert all("not built" in why for why in other_build.unavailable_paths().values())
    else:
        assert other_build.paths() == _kernel.paths()


def _every_path_matches(build: ModuleType, args: tuple) -> None:
    want = head_sum_py(*args)
    for path in build.paths():
        assert build._head_sum_path(path, *args) == want, path


@settings(max_examples=30, deadline=None)
@given(args=builtin_calls())
def test_other_build_builtin_series_match_twin(other_build: ModuleType, args: tuple) -> None:
    _every_path_matches(other_build, args)


@settings(max_examples=40, deadline=None)
@given(args=edge_moduli_calls())
@example(args=(2**64 - 1, 0, 1, 0, 1, 0, 1, True, [2**62 + 1, 2**63 - 1] * 40, [3, -(2**62) + 1] * 40, 16))
@example(args=(2**64 - 1, 0, 1, 0, 1, 0, 1, False, [2**51 - 1] * 64 + [2**51 - 3] * 64, [1, -1] * 64, 16))
def test_other_build_edge_moduli_match_twin(other_build: ModuleType, args: tuple) -> None:
    _every_path_matches(other_build, args)


WORD = st.integers(0, 2**64 - 1) | st.sampled_from([0, 1, 2**32 - 1, 2**32, 2**63, 2**64 - 2, 2**64 - 1])


@settings(max_examples=300, deadline=None)
@given(acc=WORD, low=WORD, high=st.integers(0, 2**40) | WORD, carry=st.integers(0, 2**36) | WORD)
def test_add_column_is_the_exact_sum(acc: int, low: int, high: int, carry: int) -> None:
    """The vector paths' column sum without a 128-bit type: acc + low + high 2^32 + carry,
    the word and what passes 2^64 (below 2^97 for any 64-bit inputs, so the carry fits a word)."""
    total = acc + low + (high << 32) + carry
    assert _kernel._add_column(acc, low, high, carry) == (total & (2**64 - 1), total >> 64)
