"""The compiled extensions on x86-64 CPUs that this machine is not.

Both extensions are built for the generic x86-64 target; the kernel picks
its vector paths at import from what the CPU reports.  The other tests run
them on this machine's CPU only.  Two checks reach further:

* **The machine code.**  The built extensions are disassembled (objdump):
  every VEX- or EVEX-encoded instruction, and every instruction beyond the
  x86-64 baseline (SSE2) from a list of those a compiler emits when allowed
  to, lies in a function of the path whose target allows it (``*_avx2``:
  AVX2 and FMA; ``*_avx512``: AVX-512F too; ``*_ifma``: IFMA too), never in
  the generic code that every CPU runs.
* **Other CPUs, emulated.**  A whole Python process runs under ``qemu-x86_64
  -cpu MODEL``, which reports that CPU model's features: ``qemu64`` (the
  x86-64 baseline, no AVX) and ``Haswell-v4`` (AVX2 and FMA, no AVX-512: a
  machine on which ``avx2`` is the default, not a path forced on a CPU that
  offers more).  qemu executes no AVX-512 at all, so an AVX-512 instruction
  outside its path would stop the process (SIGILL) in both; AVX2 it executes
  whatever the model, which is why the machine-code check above is needed.
  In each model the kernel must offer exactly what the dispatch rule
  (``paths_for``) gives for the model's features, run that default, and
  compute on every path it offers the same sums as the pure-Python twin run
  natively: windows of every series of every built-in formula, with moduli
  at each ladder's limits.  The 1997 table's digits at 10^6 come out of the
  CLI run in the emulated AVX2-only process.  qemu emulates: this checks the
  choice and the arithmetic, not speed.  Without ``qemu-x86_64`` (Debian's
  qemu-user package) these tests are skipped with that reason; ``.ci/run``
  installs it where it can.
"""

from __future__ import annotations

import json
import os
import platform
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from spotcheck.engine.head_py import head_sum_py
from spotcheck.engine.series import Series, series_of
from spotcheck.formulas import BUILTIN_CONSTANTS

from .test_engine import BBP_TABLE_1E6
from .test_kernel import integer_root, kernel_k_limit, series_args

_kernel = pytest.importorskip("spotcheck.engine._kernel", reason="compiled kernel not built")

QEMU = shutil.which("qemu-x86_64")


def qemu_version() -> tuple[int, ...]:
    """qemu-x86_64's version, (0,) if it does not say."""
    if QEMU is None:
        return (0,)
    out = subprocess.run([QEMU, "--version"], capture_output=True, text=True, check=False).stdout
    found = re.search(r"version (\d+)\.(\d+)", out)
    return tuple(int(g) for g in found.groups()) if found else (0,)


X86_LINUX = platform.system() == "Linux" and platform.machine() == "x86_64"

EMULATION = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not X86_LINUX, reason="qemu-user emulation of x86-64 models runs on x86-64 Linux here"
    ),
    pytest.mark.skipif(QEMU is None, reason="qemu-x86_64 not installed (Debian package qemu-user)"),
    # qemu 7.2 release notes (from memory): its x86 emulation (TCG) executes AVX and AVX2 from 7.2 on
    pytest.mark.skipif(
        QEMU is not None and qemu_version() < (7, 2), reason="qemu-x86_64 before 7.2 emulates no AVX2"
    ),
]

# CPU model -> (AVX2 and FMA, AVX-512F, AVX-512 IFMA), as qemu defines the
# models (Haswell: AVX2 and FMA3 since 2013; qemu64: the x86-64 baseline).
MODELS = {"qemu64": (False, False, False), "Haswell-v4": (True, False, False)}

ROOT = Path(__file__).resolve().parents[1]

# Runs in the emulated process: the kernel's own account of the CPU, then
# every job on every path it offers.
PROBE = """
import json, sys
from spotcheck.engine import _kernel as k
jobs = json.load(sys.stdin)
print(json.dumps({
    "offered": list(k.paths()),
    "active": k.active_path(),
    "sums": {p: [list(k._head_sum_path(p, *job)) for job in jobs] for p in k.paths()},
}))
"""

SERIES = [series_of(f) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]


def k_below(series: Series, bits: int) -> int:
    """The last k whose largest modulus q (m k + j)^s stays below 2^bits."""
    root = integer_root(((1 << bits) - 1) // series.q, series.s)
    return max(0, (root - max(series.js)) // series.m)


def jobs() -> list[tuple]:
    """Per series: a whole head near the start, then windows of 300 terms
    whose largest moduli sit just below each ladder's limit (2^29, 2^31,
    2^32, 2^48, 2^51, 2^52) and in the 64-bit range, 1 to 5 words."""
    out = []
    for i, series in enumerate(SERIES):
        out.append(series_args(series, 600, 0, series.head_length(600 + series.shift), 3))
        for j, bits in enumerate((29, 31, 32, 48, 51, 52, 62)):
            k1 = min(k_below(series, bits), kernel_k_limit(series) - 1) + 1
            k0 = max(0, k1 - 300)
            big_d = series.e * k1 + 40 + 17 * i  # every exponent of the window is at least 40
            out.append(series_args(series, big_d, k0, k1, 1 + (i + j) % 5))
    return out


def emulated(model: str, *args: str, stdin: str = "") -> subprocess.CompletedProcess[str]:
    assert QEMU is not None
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    for name in ("SPOTCHECK_KERNEL", "SPOTCHECK_PURE"):
        env.pop(name, None)
    return subprocess.run(
        [QEMU, "-cpu", model, sys.executable, *args],
        input=stdin,
        capture_output=True,
        text=True,
        env=env,
        timeout=1800,
        check=False,
    )


# --- the machine code -----------------------------------------------------------

OBJDUMP = shutil.which("objdump")

# Instructions beyond the x86-64 baseline (SSE2) that compilers emit when a
# target allows them: SSE3 to SSE4.2, POPCNT, LZCNT, BMI1, BMI2, ADX, MOVBE
# (from the instruction-set extensions as Intel's manual groups them, from
# memory; not a full table).  tzcnt is left out: gcc writes BSF as `rep bsf`,
# which objdump prints as tzcnt and which CPUs before BMI1 run as BSF, the
# same for the nonzero inputs that __builtin_ctz allows (common practice).
BEYOND_SSE2 = frozenset(
    """
    addsubpd addsubps haddpd haddps hsubpd hsubps lddqu movddup movshdup movsldup
    pabsb pabsw pabsd palignr phaddw phaddd phaddsw phsubw phsubd phsubsw pmaddubsw pmulhrsw pshufb
    psignb psignw psignd blendpd blendps blendvpd blendvps dppd dpps extractps insertps movntdqa
    mpsadbw packusdw pblendvb pblendw pcmpeqq pextrb pextrd pextrq phminposuw pinsrb pinsrd pinsrq
    pmaxsb pmaxsd pmaxud pmaxuw pminsb pminsd pminud pminuw pmuldq pmulld ptest roundpd roundps
    roundsd roundss pcmpestri pcmpestrm pcmpistri pcmpistrm pcmpgtq popcnt lzcnt andn bextr blsi
    blsmsk blsr bzhi mulx pdep pext rorx sarx shlx shrx adcx adox movbe
    """.split()
)
PREFIXES = frozenset("rep repe repz repne repnz lock notrack bnd data16 cs ds es fs gs ss".split())

# A function's path, from its name, and what that path's target allows.
PATH_ALLOWS = {
    "avx2": {"vex", "beyond"},
    "avx512": {"vex", "beyond", "avx512"},
    "ifma": {"vex", "beyond", "avx512", "ifma"},
}


def instruction_kinds(mnemonic: str, operands: str) -> set[str]:
    """What an instruction needs beyond SSE2: vex (a VEX or EVEX encoding),
    avx512 (zmm or mask registers), ifma, beyond (the list above)."""
    kinds = set()
    if mnemonic.startswith("v"):
        kinds.add("vex")
    if "%zmm" in operands or re.search(r"%k[0-7]\b", operands) or re.fullmatch(r"k[a-z]+[bwdq]", mnemonic):
        kinds.add("avx512")
    if mnemonic.startswith("vpmadd52"):
        kinds.add("ifma")
    base = mnemonic[1:] if mnemonic.startswith("v") else mnemonic
    if base in BEYOND_SSE2 or base.startswith(("pmovsx", "pmovzx", "crc32")):
        kinds.add("beyond")
    return kinds


def function_kinds(disassembly: str) -> dict[str, set[str]]:
    """Function name (without .constprop and the like) -> the kinds its instructions need."""
    out: dict[str, set[str]] = {}
    name = None
    for line in disassembly.splitlines():
        head = re.match(r"[0-9a-f]+ <([^>]+)>:$", line)
        if head:
            name = head.group(1).split(".")[0]
            out.setdefault(name, set())
            continue
        parts = line.split("\t")
        if name is None or len(parts) < 2 or not parts[0].strip().endswith(":"):
            continue
        words = parts[1].split()
        while words and words[0] in PREFIXES:
            words = words[1:]
        if words:
            out[name] |= instruction_kinds(words[0], " ".join(words[1:]))
    return out


def strays(kinds: dict[str, set[str]]) -> dict[str, set[str]]:
    """The functions that use what their path (none: the generic code) does not allow."""
    out = {}
    for name, used in kinds.items():
        path = re.search(r"_(avx2|avx512|ifma)(?:_|$)", name)
        extra = used - (PATH_ALLOWS[path.group(1)] if path else set())
        if extra:
            out[name] = extra
    return out


def test_the_machine_code_check_finds_a_stray_instruction() -> None:
    text = "\n".join(
        [
            "0000000000001000 <run_job>:",
            "    1000:\tadd    %rax,%rbx",
            "    1004:\tvpaddq %ymm1,%ymm2,%ymm3",
            "0000000000002000 <ladder32_avx2.constprop.0>:",
            "    2000:\tvpmuludq %ymm1,%ymm2,%ymm3",
            "    2004:\tvpaddq %zmm1,%zmm2,%zmm3",
            "0000000000003000 <medium_ifma>:",
            "    3000:\tvpmadd52luq %zmm1,%zmm2,%zmm3",
            "    3004:\tkmovw  %k1,%eax",
            "0000000000004000 <count>:",
            "    4000:\trep bsf %rdi,%rax",
            "    4004:\tlock popcnt %rdi,%rax",
            "    4008:\ttzcnt  %rdi,%rax",
        ]
    )
    assert strays(function_kinds(text)) == {
        "run_job": {"vex"},
        "ladder32_avx2": {"avx512"},
        "count": {"beyond"},
    }


@pytest.mark.skipif(OBJDUMP is None, reason="objdump not installed (binutils)")
@pytest.mark.skipif(not X86_LINUX, reason="the check reads x86-64 machine code")
@pytest.mark.parametrize("module", ["spotcheck.engine._kernel", "spotcheck.digitfile._index"])
def test_generic_code_holds_no_instruction_beyond_sse2(module: str) -> None:
    """What every x86-64 CPU runs (everything outside a path's functions) is
    SSE2 code; each path's functions use no more than their target."""
    assert OBJDUMP is not None
    mod = pytest.importorskip(module, reason="extension not built")
    text = subprocess.run(
        [OBJDUMP, "-d", "--no-show-raw-insn", str(mod.__file__)], capture_output=True, text=True, check=True
    ).stdout
    kinds = function_kinds(text)
    assert len(kinds) > 20 and strays(kinds) == {}
    if module.endswith("_kernel") and "avx2" in _kernel.paths_for(True, False, False)[0]:
        # the paths' functions are there and were read
        assert {"avx512", "ifma"} <= kinds["medium_ifma"]
        assert "vex" in kinds["fill_avx2"] and "avx512" not in kinds["fill_avx2"]
        assert "avx512" in kinds["ladder32_avx512"]


# --- other CPUs, emulated ------------------------------------------------------------


class TestEmulatedCpus:
    """Whole processes under qemu-x86_64 -cpu MODEL (see the module's docstring)."""

    pytestmark = EMULATION

    @pytest.mark.parametrize("model", sorted(MODELS))
    def test_cpu_gets_its_paths_and_every_path_matches_the_twin(self, model: str) -> None:
        work = jobs()
        out = emulated(model, "-c", PROBE, stdin=json.dumps(work))
        assert out.returncode == 0, out.stderr[-2000:]
        got = json.loads(out.stdout)
        offered, _missing, default = _kernel.paths_for(*MODELS[model])
        assert got["offered"] == list(offered) and got["active"] == default
        if "avx2" in _kernel.paths_for(True, False, False)[0]:  # a build with the vector paths
            assert default == ("avx2" if MODELS[model][0] else "portable")
        want = [list(head_sum_py(*job)) for job in work]
        assert sum(w[1] for w in want) > 10_000  # the jobs sum real terms
        for path in offered:
            assert got["sums"][path] == want, path

    def test_avx2_only_cpu_prints_the_1997_table_digits(self) -> None:
        out = emulated(
            "Haswell-v4", "-m", "spotcheck", "digits", "pi", "--at", "1000000", "--count", "14", "--json"
        )
        assert out.returncode == 0, out.stderr[-2000:]
        assert json.loads(out.stdout)["digits"] == BBP_TABLE_1E6
        version = emulated("Haswell-v4", "-m", "spotcheck", "--version")
        assert (
            "path avx2 (the fastest this CPU offers; this CPU offers: portable, scalar, avx2;"
            in version.stdout
        )
