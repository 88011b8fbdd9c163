"""Independent full computations of a constant for ``scan``: python-flint's Arb or gmpy2's MPFR.

Neither uses a BBP-type formula, so a scan checks a file against a method that
shares nothing with the digit-extraction engine.  Only certified digits are
returned: Arb gives a ball, and the floor of ``x * base^n`` is taken only when
the whole ball agrees on it; MPFR values are correctly rounded (within a few
ulps for compound expressions), and the floor is taken only when ``x +- 8 ulp``
agree.  When they do not, the precision grows and the computation repeats.
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Callable
from functools import lru_cache
from typing import Any

from spotcheck.engine.full import FULL_NAMES, arb_value, mpfr_value
from spotcheck.errors import UsageError

__all__ = ["REFERENCES", "reference_digits", "estimate_reference", "available_memory"]

REFERENCES = ("arb", "mpfr")

# --- tuning -----------------------------------------------------------------
GUARD_BITS = 64
# Peak bytes per bit of working precision (several full-size temporaries):
# an estimate from measurements on this project's machines, rounded up.
BYTES_PER_BIT = 2.0
# Bits used to time a small run before predicting a large one.
CALIBRATION_BITS = 1 << 18
# Share of available memory a scan may plan to use.
MEMORY_SHARE = 0.7
# Digits beyond which the computation runs in a child process (stoppable by
# Ctrl-C); below, starting a process costs more than the computation.
CHILD_DIGITS = 100_000
# Modules the process that children fork from imports once, before any child.
CHILD_PRELOAD = ("spotcheck.checks.reference", "spotcheck.checks.radix", "flint", "gmpy2")
# ---------------------------------------------------------------------------


def _arb_value(name: str) -> Callable[[], object]:
    from flint import arb

    table: dict[str, Callable[[], object]] = {
        "pi": arb.pi,
        "log2": arb.const_log2,
        "log3": lambda: arb(3).log(),
        "pi-squared": lambda: arb.pi() ** 2,
        "catalan": arb.const_catalan,
        "zeta3": lambda: arb(3).zeta(),
        "arctan-half": lambda: (arb(1) / 2).atan(),
    }
    if name in FULL_NAMES:  # constants without a formula: the engine's own Arb expression
        return arb_value(name)
    return table[name]


def _mpfr_value(name: str) -> Callable[[], object]:
    import gmpy2

    table: dict[str, Callable[[], object]] = {
        "pi": gmpy2.const_pi,
        "log2": gmpy2.const_log2,
        "log3": lambda: gmpy2.log(3),
        "pi-squared": lambda: gmpy2.const_pi() ** 2,
        "catalan": gmpy2.const_catalan,
        "zeta3": lambda: gmpy2.zeta(3),
        "arctan-half": lambda: gmpy2.atan(gmpy2.mpfr(1) / 2),
    }
    if name in FULL_NAMES:  # MPFR: independent of the Arb evaluation the engine uses
        return mpfr_value(name)
    return table[name]


def require_supported(constant: str) -> None:
    if not supported(constant):
        raise UsageError(
            f"no independent full computation is available for {constant!r}; "
            "scan covers the built-in constants (use verify or locate)"
        )


def supported(constant: str) -> bool:
    return constant in ("pi", "log2", "log3", "pi-squared", "catalan", "zeta3", "arctan-half") or (
        constant in FULL_NAMES
    )


def _floor_scaled_arb(name: str, base: int, n: int, bits: int, threads: int = 1) -> int | None:
    from flint import arb, ctx

    old, old_threads = ctx.prec, ctx.threads
    ctx.prec, ctx.threads = bits, max(1, threads)
    try:
        x = _arb_value(name)()
        y = (x * arb(base) ** n).floor()  # type: ignore[operator]
        v = y.unique_fmpz()
        return None if v is None else int(v)
    finally:
        ctx.prec, ctx.threads = old, old_threads


def _floor_scaled_mpfr(name: str, base: int, n: int, bits: int, threads: int = 1) -> int | None:  # noqa: ARG001 - MPFR runs on one thread
    import gmpy2

    with gmpy2.context(precision=bits):
        x = _mpfr_value(name)()
        man, exp = x.as_mantissa_exp()  # type: ignore[attr-defined]
    scale = gmpy2.mpz(base) ** n
    lo, hi = (man - 8) * scale, (man + 8) * scale
    if exp >= 0:
        a, b = lo << exp, hi << exp
    else:
        a, b = lo >> -exp, hi >> -exp
    return int(a) if a == b else None


def reference_digits(
    constant: str,
    base: int,
    n: int,
    reference: str = "arb",
    threads: int = 1,
    tick: Callable[[float], None] | None = None,
) -> tuple[str, str]:
    """``(integer_part, digits)``: the first ``n`` certified digits after the point.

    ``threads``: threads Arb may use (MPFR uses one).  Beyond
    :data:`CHILD_DIGITS` digits the computation runs in a child process, so
    that Ctrl-C (``KeyboardInterrupt`` in the caller) stops it at once: Arb and
    MPFR hold the interpreter lock for the whole computation.  ``tick`` is
    called with the seconds elapsed about ten times a second meanwhile.
    """
    if reference not in REFERENCES:
        raise UsageError(f"unknown reference {reference!r} (choose from {', '.join(REFERENCES)})")
    require_supported(constant)
    if n < CHILD_DIGITS or os.environ.get("SPOTCHECK_REFERENCE_INLINE"):
        return _compute_digits(constant, base, n, reference, threads)
    result: tuple[str, str] = run_in_child(_compute_digits, (constant, base, n, reference, threads), tick)
    return result


def run_in_child(
    target: Callable[..., Any], args: tuple[Any, ...], tick: Callable[[float], None] | None
) -> Any:
    """``target(*args)`` in a child process that an interruption of the caller terminates."""
    mpc = child_context()
    recv, send = mpc.Pipe(duplex=False)
    proc = mpc.Process(target=_child_main, args=(send, target, args), daemon=True)
    proc.start()
    send.close()
    t0 = time.perf_counter()
    try:
        while not recv.poll(0.1):
            if not proc.is_alive() and not recv.poll(0):
                raise RuntimeError(f"the reference computation stopped (exit code {proc.exitcode})")
            if tick is not None:
                tick(time.perf_counter() - t0)
        status, value = recv.recv()
    except BaseException:
        proc.terminate()
        proc.join(1)
        if proc.is_alive():
            proc.kill()
            proc.join()
        raise
    finally:
        recv.close()
    proc.join()
    if status == "error":
        raise value
    return value


def child_context() -> Any:
    """The multiprocessing context of every child process of the checks.

    A plain fork when this process has one thread (``/proc/self/task``): the
    child starts at once with everything imported.  Otherwise a fork server:
    the parent may hold threads (flint's pool, the engine's, rich's refresh)
    whose locks a forked child would inherit without the threads; the server
    is a fresh process that imports :data:`CHILD_PRELOAD` once, and each
    child is forked from it, ready to compute.
    """
    import multiprocessing as mp

    methods = mp.get_all_start_methods()
    if "fork" in methods and _single_threaded():
        return mp.get_context("fork")
    if "forkserver" not in methods:
        return mp.get_context("spawn")
    ctx: Any = mp.get_context("forkserver")
    ctx.set_forkserver_preload(list(CHILD_PRELOAD))
    return ctx


def _single_threaded() -> bool:
    """Whether this process has exactly one thread, counted by the kernel (C threads included)."""
    try:
        return len(os.listdir("/proc/self/task")) == 1
    except OSError:
        return False


def warm_children() -> None:
    """Start the fork server now, so that its start-up and imports overlap the caller's own work.

    Call it where a child process will follow (a file large enough).  Nothing
    to do when children are plain forks (one thread) or spawned.
    """
    import multiprocessing as mp

    if "forkserver" not in mp.get_all_start_methods() or _single_threaded():
        return
    from multiprocessing import forkserver

    child_context()
    forkserver.ensure_running()


def _child_main(send: Any, target: Callable[..., Any], args: tuple[Any, ...]) -> None:
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides; it terminates this process
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked child may carry the parent's handler
    try:
        send.send(("ok", target(*args)))
    except BaseException as exc:  # handed to the parent, which raises it
        send.send(("error", exc))
    finally:
        send.close()


def _compute_digits(constant: str, base: int, n: int, reference: str, threads: int) -> tuple[str, str]:
    bits = int(n * math.log2(base)) + GUARD_BITS
    floor_scaled = _floor_scaled_arb if reference == "arb" else _floor_scaled_mpfr
    while True:
        v = floor_scaled(constant, base, n, bits, threads)
        if v is not None:
            break
        bits += 64
    whole, frac = divmod(v, base**n)
    if base == 16:
        return format(whole, "X"), format(frac, "X").zfill(n)
    import gmpy2  # Python's int -> str is quadratic and capped at 4,300 digits

    return str(whole), gmpy2.mpz(frac).digits(10).zfill(n)


@lru_cache(maxsize=32)
def _calibrate(constant: str, reference: str) -> float:
    """Seconds for one run at :data:`CALIBRATION_BITS`."""
    floor_scaled = _floor_scaled_arb if reference == "arb" else _floor_scaled_mpfr
    t0 = time.perf_counter()
    floor_scaled(constant, 16, CALIBRATION_BITS // 4 - 16, CALIBRATION_BITS)
    return max(time.perf_counter() - t0, 1e-4)


def estimate_reference(constant: str, base: int, n: int, reference: str = "arb") -> tuple[float, int]:
    """``(seconds, bytes)`` predicted for :func:`reference_digits`: a small timed run, scaled.

    Infinite seconds for a constant with no full computation (a user formula).

    Time grows like ``b log(b)^2`` in the bit count ``b`` (fast multiplication
    inside binary splitting); memory like :data:`BYTES_PER_BIT` per bit plus
    the digit strings.
    """
    if not supported(constant):
        return math.inf, 0
    bits = int(n * math.log2(base)) + GUARD_BITS
    t0 = _calibrate(constant, reference)
    ratio = max(bits / CALIBRATION_BITS, 1.0)
    seconds = t0 * ratio * (math.log2(max(bits, 2)) / math.log2(CALIBRATION_BITS)) ** 2
    memory = int(BYTES_PER_BIT * bits) + 4 * n
    return seconds, memory


def available_memory() -> int:
    """Bytes of memory available now (MemAvailable), or total physical memory."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return 1 << 32


def memory_budget() -> int:
    return int(MEMORY_SHARE * available_memory())
