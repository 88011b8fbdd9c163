"""The radix conversion of a decimal prefix, and where it runs: inline, or in a child process.

:func:`prefix_steps` is the prefix check of :mod:`spotcheck.checks.decimal`
written as a generator: it yields each request for engine digits
``(position, count)`` and is sent the certified digits back, so the big-integer
work and the engine can sit in different processes.  A conversion at 10^8
digits is one GMP call that holds the interpreter lock for many seconds, so
beyond :data:`CHILD_DIGITS` digits it runs in a child process
(:class:`ChildConverter`) that holds the file's digits; the parent keeps the
engine (its cache, checkpoint, cluster and threads), answers the child's
requests, and stops the child at once on Ctrl-C.  Only small results cross
the pipe (the compared windows), never a big integer.

While the child converts, the parent computes the engine window the check is
about to ask for (its end is known before the division; its start, within a
few digits): the two run side by side on two CPUs.

The division is by ``5^n``, not ``10^n``: ``V 16^h / 10^n = V 2^(4h-n) / 5^n``,
the same quotient from a divisor 30% shorter.

The decimal end, fast path.  With ``V`` the prefix (``n`` digits), ``h`` hex
digits of precision, ``V 16^h = a 10^n + r`` and ``(V+1) 16^h = b 10^n + r'``,
and ``X`` the first ``S = h + g`` hex digits of ``x`` (the verified ones and
engine digits): ``V/10^n < x`` whenever ``X >= a 16^g + floor(r 16^g/10^n) + 1``,
and ``x < (V+1)/10^n`` whenever ``X + 1 <= b 16^g + floor(r' 16^g/10^n)``.
Both hold for a right prefix unless ``x`` lies within ``16^-S`` of a decimal
boundary; then ``floor(x 10^n) = V`` without the full multiplication
``x 10^n``, which is computed only when the fast test does not settle it.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Generator
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Protocol

import gmpy2

from .results import Note, WindowCheck

__all__ = [
    "PrefixOutcome",
    "prefix_steps",
    "run_inline",
    "Converter",
    "InlineConverter",
    "ChildConverter",
    "open_converter",
    "CHILD_DIGITS",
]

# --- tuning -----------------------------------------------------------------
CONTINUATION_DIGITS = 16  # engine hex digits past the h the division used (the fast test's g)
MAX_CONTINUATION = 256  # give up settling the decimal end beyond this many extra digits
CHILD_DIGITS = 300_000  # from this many decimal digits on, convert in a child process
SEND_DIGITS = 1 << 22  # digits per message when the file's digits go to the child
PREFETCH_SLACK = 8  # hex digits below the expected start of the engine window fetched ahead
POLL_SECONDS = 0.1  # how often the parent looks at the child (and at Ctrl-C)
# ---------------------------------------------------------------------------

_LOG2_10 = math.log2(10)

EngineAsk = tuple[int, int]
"""``(position, count)``: certified hex digits a prefix check needs from the engine."""


@dataclass(frozen=True)
class PrefixOutcome:
    window: WindowCheck | None
    """The hex-window comparison (None when the prefix determines no hex digit)."""
    end: WindowCheck | None
    """The decimal-end comparison (None when the window differs or it could not be settled)."""

    @property
    def rows(self) -> list[WindowCheck]:
        """The comparisons made, for a report's list of checks."""
        return [c for c in (self.window, self.end) if c is not None]

    @property
    def match(self) -> bool:
        return all(c is None or c.match for c in (self.window, self.end))

    @property
    def first_wrong(self) -> int | None:
        return self.end.first_difference if self.end is not None and not self.end.match else None


def _hex_precision(length: int) -> int:
    """Hex digits of the quotient for a prefix of ``length`` decimal digits (two past its own)."""
    return int(length * _LOG2_10) // 4 + 2


def likely_request(length: int, window: int, basis: int | None = None) -> EngineAsk | None:
    """A window of engine digits that covers, almost surely, what the check of this prefix asks.

    The check asks for digits ``L - w + 1 .. h_n + CONTINUATION_DIGITS`` where
    ``L`` (the hex digits the basis determines) is ``h - 2`` or ``h - 3`` except
    when a carry runs far (chance about ``16^-PREFETCH_SLACK``); then the
    check simply asks again.  None for a prefix too short to be worth it.
    """
    basis = length if basis is None else basis
    if basis < 64:
        return None
    h, h_n = _hex_precision(basis), _hex_precision(length)
    first = max(1, h - PREFETCH_SLACK - min(window, h) + 1)
    return first, h_n + CONTINUATION_DIGITS - first + 1


def _first_decimal_difference(a: str, b: str) -> int | None:
    """1-based index of the first difference of two equal-length digit strings."""
    if a == b:
        return None
    lo, hi = 0, len(a)
    while hi - lo > 64:  # halve towards the first difference
        mid = (lo + hi) // 2
        if a[lo:mid] != b[lo:mid]:
            hi = mid
        else:
            lo = mid
    for i in range(lo, hi):
        if a[i] != b[i]:
            return i + 1
    return None


def _first_difference(expected: str, found: str, position: int) -> int | None:
    for i, (a, b) in enumerate(zip(expected, found)):
        if a != b:
            return position + i
    return position + len(found) if len(found) < len(expected) else None


def prefix_steps(
    digits: str, window: int, kind: str, basis: int | None = None
) -> Generator[EngineAsk, str, PrefixOutcome]:
    """The check of the decimal prefix ``digits``, asking the engine through ``yield``.

    See :func:`spotcheck.checks.decimal.prefix_check` for what is compared.
    """
    n = len(digits)
    basis = n if basis is None else basis
    v = gmpy2.mpz(digits if basis == n else digits[:basis] or "0")
    # floor(V 16^h / 10^basis) by 5^basis: 10^b = 5^b 2^b, and 2^b is a shift of the dividend, so
    # the divisor is 30% shorter.  With e = 4h - b: V 2^e = a 5^b + r5, and the remainder of the
    # division by 10^b is r = r5 2^b (the fast test below uses r/10^b = r5/5^b).
    p5 = gmpy2.mpz(5) ** basis
    h = _hex_precision(basis)
    e = 4 * h - basis
    a, r = divmod(v << e, p5)  # the one big division
    carry, r_b = divmod(r + (gmpy2.mpz(1) << e), p5)  # small quotient: linear time
    b = a + carry
    # Hex digits the basis determines; none for a very short basis, and then
    # the engine alone pins x from digit 1 on.
    big_l = max(0, (4 * h - (a ^ b).bit_length()) // 4) if basis else 0
    big_a = a >> (4 * (h - big_l))
    w = min(window, big_l)
    found_hex = format(int(big_a & ((1 << (4 * w)) - 1)), "X").zfill(w) if w else ""
    # Engine digits through h_n + CONTINUATION_DIGITS pin x far below 10^-n.
    m = CONTINUATION_DIGITS + _hex_precision(n) - big_l
    win: WindowCheck | None = None
    p10 = p5 << basis if basis == n else gmpy2.mpz(10) ** n
    t_lo: Any = None
    settled = False
    while True:
        engine = yield (big_l - w + 1, w + m)
        if w:
            expected_hex = engine[:w]
            diff = _first_difference(expected_hex, found_hex, big_l - w + 1)
            win = WindowCheck(
                kind=kind,
                position=big_l - w + 1,
                expected=expected_hex,
                found=found_hex,
                match=diff is None,
                first_difference=diff,
                notes=(Note("hex-from-decimal-prefix", {"decimal_digits": basis}),),
                base=16,
                prefix=basis,
            )
            if diff is not None:
                return PrefixOutcome(win, None)
        x = (big_a << (4 * m)) | gmpy2.mpz(engine[w:], 16)
        if basis == n and not settled:
            g = 4 * (big_l + m - h)  # bits of x known past the division's precision
            if g > 0:
                above = x >= (a << g) + ((r << g) // p5) + 1
                below = x + 1 <= (b << g) + ((r_b << g) // p5)
                if above and below:  # floor(x 10^n) = V without computing x 10^n
                    t_lo = v
                    break
            settled = True
        shift = 4 * (big_l + m)
        prod = x * p10
        t_lo, t_hi = prod >> shift, (prod + p10) >> shift
        if t_lo == t_hi:
            break
        if m >= MAX_CONTINUATION:  # x is extraordinarily close to a decimal boundary
            return PrefixOutcome(win, None)
        m *= 2
    tail_w = min(window, n)
    whole = v if basis == n else gmpy2.mpz(digits)
    if t_lo == whole:  # the common case: no decimal string of the full length needed
        expected_dec = digits[n - tail_w :].rjust(n)
        q = None
    else:
        expected_dec = gmpy2.mpz(t_lo).digits(10).zfill(n)
        q = _first_decimal_difference(expected_dec, digits)
    start = n - tail_w + 1 if q is None else q
    end = WindowCheck(
        kind=kind,
        position=start,
        expected=expected_dec[start - 1 : start - 1 + tail_w],
        found=digits[start - 1 : start - 1 + tail_w],
        match=q is None,
        first_difference=q,
        notes=(Note("decimal-recomputed", {"engine_digits": m}),),
        base=10,
        prefix=n,
    )
    return PrefixOutcome(win, end)


Engine = Callable[[int, int], str]
"""``engine(position, count)``: certified hex digits (a ``HexOracle.digits``)."""


def run_inline(steps: Generator[EngineAsk, str, PrefixOutcome], engine: Engine) -> PrefixOutcome:
    """Drive a prefix check in this process."""
    try:
        ask = next(steps)
        while True:
            ask = steps.send(engine(*ask))
    except StopIteration as stop:
        outcome: PrefixOutcome = stop.value
        return outcome


Tick = Callable[[float], None]
"""Called with the fraction of a conversion done (an estimate), about ten times a second."""


class Converter(Protocol):
    """The decimal digits ``1..n`` of a file, held where their conversions run."""

    def check(
        self,
        length: int,
        engine: Engine,
        window: int,
        kind: str,
        *,
        basis: int | None = None,
        suffix: str = "",
        tick: Tick | None = None,
    ) -> PrefixOutcome:
        """The check of the prefix of ``length`` digits (with ``suffix`` appended)."""
        ...

    def close(self) -> None: ...


class InlineConverter:
    """The digits in this process (small files: a process start would cost more)."""

    def __init__(self, digits: str) -> None:
        self.digits = digits

    def check(
        self,
        length: int,
        engine: Engine,
        window: int,
        kind: str,
        *,
        basis: int | None = None,
        suffix: str = "",
        tick: Tick | None = None,
    ) -> PrefixOutcome:
        del tick  # small: over before a bar could move
        prefix = self.digits[:length] + suffix
        return run_inline(prefix_steps(prefix, window, kind, basis), engine)

    def close(self) -> None:
        pass


class ChildConverter:
    """The digits in a child process; Ctrl-C (``KeyboardInterrupt`` here) terminates it at once.

    The child starts at the first check and is sent the digits ``1..n`` a
    chunk at a time from ``chunks`` (an iterator of ``(position, digits)``),
    so this process never holds them all.
    """

    def __init__(self, chunks: Callable[[], Any], n: int) -> None:
        self._chunks = chunks
        self.n = n
        self._proc: Any = None
        self._conn: Any = None
        self.peak_bytes: int | None = None
        """The child's peak resident memory, known once it has been closed (for benchmarks)."""

    # -- the child's life -----------------------------------------------------
    def _start(self) -> None:
        from .reference import child_context

        ctx = child_context()
        mine, theirs = ctx.Pipe(duplex=True)
        self._proc = ctx.Process(target=_serve, args=(theirs, self.n), daemon=True)
        self._conn = mine
        self._proc.start()
        theirs.close()
        sent = 0
        for pos, chunk in self._chunks():
            if pos > self.n:
                break
            part = chunk[: self.n - pos + 1].encode("ascii")
            for i in range(0, len(part), SEND_DIGITS):
                mine.send_bytes(part[i : i + SEND_DIGITS])
            sent += len(part)
        if sent != self.n:
            raise RuntimeError(f"the file gave {sent:,} digits for a conversion of {self.n:,}")

    def _receive(self, tick: Callable[[], None] | None = None) -> Any:
        conn, proc = self._conn, self._proc
        while not conn.poll(POLL_SECONDS):
            if not proc.is_alive() and not conn.poll(0):
                raise self._died()
            if tick is not None:
                tick()
        return conn.recv()

    def _died(self) -> Exception:
        """The error for a child that ended without its answer (killed for memory, most likely)."""
        from .common import needs

        proc = self._proc
        if proc is not None:
            proc.join(1)
        code = proc.exitcode if proc is not None else None
        return needs(
            f"the radix conversion of {self.n:,} decimal digits stopped (exit code {code}: out of "
            "memory?); a shorter prefix needs less",
            "limit",
        )

    def _stop(self) -> None:
        proc, conn = self._proc, self._conn
        self._proc = self._conn = None
        if proc is not None:
            proc.terminate()
            proc.join(1)
            if proc.is_alive():
                proc.kill()
                proc.join()
        if conn is not None:
            conn.close()

    # -- checks ---------------------------------------------------------------
    def check(
        self,
        length: int,
        engine: Engine,
        window: int,
        kind: str,
        *,
        basis: int | None = None,
        suffix: str = "",
        tick: Tick | None = None,
    ) -> PrefixOutcome:
        t0 = time.perf_counter()
        expected = estimate_conversion_seconds(length + len(suffix)) if tick is not None else 1.0

        def said() -> None:
            if tick is not None:
                tick((time.perf_counter() - t0) / expected)

        try:
            if self._proc is None:
                self._start()
            self._conn.send(("check", length, window, kind, basis, suffix))
            ahead = likely_request(length + len(suffix), window, basis)
            if ahead is not None:
                engine(*ahead)  # meanwhile the child converts; the engine caches what it computed
            while True:
                tag, value = self._receive(said)
                if tag == "engine":
                    self._conn.send(engine(*value))
                elif tag == "done":
                    outcome: PrefixOutcome = value
                    return outcome
                else:  # "error": raised here, as if the conversion had run in this process
                    raise value
        except (EOFError, ConnectionError) as exc:  # the pipe broke: the child is gone
            died = self._died()
            self._stop()
            raise died from exc
        except BaseException:
            self._stop()
            raise

    def close(self) -> None:
        """End the child; it says its peak memory as it goes."""
        conn = self._conn
        if conn is not None:
            try:
                conn.send(None)
                if conn.poll(1.0):
                    tag, value = conn.recv()
                    if tag == "peak":
                        self.peak_bytes = value
            except (OSError, EOFError):
                pass
        self._stop()


def _serve(conn: Any, n: int) -> None:
    """The child: receive the digits, then run each check asked for, asking back for engine digits."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides; it terminates this process
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked child may carry the parent's handler
    buf = bytearray(n)
    view, got = memoryview(buf), 0
    while got < n:
        got += conn.recv_bytes_into(view[got:])
    view.release()
    digits = buf.decode("ascii")
    del buf
    while True:
        cmd = conn.recv()
        if cmd is None:
            import resource

            conn.send(("peak", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024))
            return
        _, length, window, kind, basis, suffix = cmd
        prefix = (digits if length == n else digits[:length]) + suffix
        try:
            steps = prefix_steps(prefix, window, kind, basis)
            del prefix
            ask = next(steps)
            while True:
                conn.send(("engine", ask))
                ask = steps.send(conn.recv())
        except StopIteration as stop:
            conn.send(("done", stop.value))
        except Exception as exc:  # handed to the parent, which raises it
            conn.send(("error", exc))


CALIBRATION_DIGITS = 1 << 16  # digits converted to time this machine's conversion speed


@lru_cache(maxsize=1)
def _seconds_per_unit() -> float:
    """Seconds per ``n log2(n)^3`` of a conversion (string to integer, 10^n, the division), measured here.

    ``n log(n)^3``, not the textbook ``n log(n)^2``: fitted to GMP's times on
    this project's machine from 6.5*10^4 to 10^8 digits (within 15%).
    """
    n = CALIBRATION_DIGITS
    t0 = time.perf_counter()
    v = gmpy2.mpz("7" * n)
    divmod(v << (4 * _hex_precision(n) - n), gmpy2.mpz(5) ** n)
    return max(time.perf_counter() - t0, 1e-6) / (n * math.log2(n) ** 3)


def estimate_conversion_seconds(n: int) -> float:
    """Seconds a prefix check of ``n`` decimal digits is expected to take (from a timed small conversion)."""
    return _seconds_per_unit() * n * math.log2(max(n, 2)) ** 3


def open_converter(n: int, read: Callable[[int, int], str], chunks: Callable[[], Any]) -> Converter:
    """Where the conversions of a file's first ``n`` digits run: inline below :data:`CHILD_DIGITS`."""
    if n < CHILD_DIGITS:
        return InlineConverter(read(1, n))
    from .reference import warm_children

    warm_children()  # its start overlaps the caller's head check and the file's reading
    return ChildConverter(chunks, n)
