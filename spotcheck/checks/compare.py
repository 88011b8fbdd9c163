"""``compare``: two copies of one digit file, side by side, and which copy is right.

Both files are read through the digit-file layer (any layout, either may be
compressed) by its read-and-check stream (:func:`spotcheck.digitfile.open_stream`:
each byte is read once, validated as it is read), taken together in chunks of
``CHUNK_DIGITS`` (bounded memory whatever their size), and every run of
positions where they differ is listed:
start, length, both copies' digits at its start.  Runs are merged across short
gaps of coincidental agreement (``merge_runs``, as ``scan`` does).

Arbitration: only the differing runs (and the longer copy's extra digits) need
certified digits.

* hex files: the engine's certified digits at each run's start
  (``ARBITRATE_DIGITS`` of them at most) against both copies' digits there;
* decimal files of a constant evaluated in full (e, sqrt(2), ...): the
  certified decimal digits at each run's start, directly (no hex detour);
* other decimal files: a prefix check through radix conversion
  (:mod:`spotcheck.checks.radix`; a long prefix is converted in a child process).  The copies agree before a
  run's start, except at earlier runs, where the digits of the copy found
  right there are spliced in; each candidate prefix ``common + copy's digits of
  the run`` is then checked whole.  A run after one where neither copy was
  right is not arbitrated (there is no known-good prefix to build on).

A copy is "right" at a run when its digits there equal the certified digits;
"both wrong" when neither does.  Only the differing digits are examined: where
the copies agree they may still both be wrong (``verify`` each to know).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator
from dataclasses import asdict, dataclass, field
from typing import Any

from spotcheck.digitfile import DigitFile, DigitStream, open_stream
from spotcheck.engine.api import leading_digits
from spotcheck.formulas import get_constant

from .common import DEFAULT_WINDOW, HexOracle, first_label_finding, needs
from .results import LabelFinding, Note
from .scan import diff_runs, merge_runs
from .schema import SCHEMA_VERSION

__all__ = ["compare_files", "compare_open", "CompareResult", "CopyFacts", "DiffRun", "ExtraDigits"]

Progress = Callable[[int, int], None]

# --- tuning -----------------------------------------------------------------
CHUNK_DIGITS = 1 << 21  # digits of each copy held at a time
ARBITRATE_DIGITS = 64  # certified digits compared at a run's start (at most)
SAMPLE_DIGITS = 16  # digits of each copy shown per run
MAX_RUNS_KEPT = 1000  # runs listed in the result; more are counted
MAX_ARBITRATED_HEX = 100  # hex runs arbitrated (each costs one engine window)
MAX_ARBITRATED_DECIMAL = 8  # decimal runs arbitrated (each costs two radix conversions)
SHIFT_PROBE = 4096  # a run this long, mostly differing, is probed for lost or extra digits
MAX_SHIFT = 64  # digits lost or gained that the probe looks for
SHIFT_MATCH = 256  # digits that must agree after the shift
# ---------------------------------------------------------------------------

A, B, BOTH_WRONG = "A", "B", "both wrong"
GIVEN = "given explicitly"  # how the constant was settled when the caller named it


@dataclass(frozen=True)
class CopyFacts:
    """What the report names about one copy."""

    path: str
    size_bytes: int
    compression: str | None
    base: int
    count: int
    integer_part: str | None
    layout: str
    """A short description of the layout (kind, line width, grouping, labels)."""
    label_finding: LabelFinding | None = None
    """The copy's first position label that disagrees with its digits (None: consistent, absent or ignored)."""


@dataclass
class DiffRun:
    """A run of positions where the copies differ (short gaps of agreement merged in)."""

    start: int
    length: int
    differing: int
    """Positions inside the run where the copies differ."""
    a: str
    """Copy A's digits from ``start`` (at most ``ARBITRATE_DIGITS``)."""
    b: str
    certified: str | None = None
    """Certified digits from ``start`` (hex files), when arbitrated."""
    right: str | None = None
    """``"A"``, ``"B"``, ``"both wrong"``, or None when not arbitrated."""
    notes: list[Note] = field(default_factory=list)
    """What the report says about the run beside its verdict (worded in ``spotcheck.report.notes``)."""

    def to_dict(self) -> dict[str, Any]:
        out = {k: v for k, v in asdict(self).items() if k != "notes"}
        out["notes"] = [n.to_dict() for n in self.notes]
        return out


@dataclass
class ExtraDigits:
    """Digits one copy has past the other's end."""

    longer: str
    """``"A"`` or ``"B"``."""
    start: int
    length: int
    digits: str
    """The longer copy's first extra digits (at most ``SAMPLE_DIGITS``)."""
    certified: str | None = None
    right: bool | None = None
    """True when the checked extra digits equal the certified ones; None when not arbitrated."""
    notes: list[Note] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        out = {k: v for k, v in asdict(self).items() if k != "notes"}
        out["notes"] = [n.to_dict() for n in self.notes]
        return out


@dataclass
class CompareResult:
    a: CopyFacts
    b: CopyFacts
    base: int
    constant: str | None
    constant_how: str
    method: str
    """``digit extraction`` (hex), ``radix conversion`` (decimal) or ``none`` (constant unknown)."""
    digits_compared: int
    differing_digits: int
    runs: list[DiffRun] = field(default_factory=list)
    runs_total: int = 0
    extra: ExtraDigits | None = None
    integer_parts: dict[str, Any] | None = None
    shift: dict[str, Any] | None = None
    """When one copy lost digits: ``{"position", "digits", "missing_in"}``; comparing
    position by position stops there (every later position would differ)."""
    """When the integer parts differ: ``{"a", "b", "certified", "right"}``."""
    seconds: float = 0.0
    arbitration_seconds: list[float] = field(default_factory=list)
    """Seconds spent arbitrating each arbitrated run, in order (the extra digits last)."""
    evaluations: int = 0
    interrupted: bool = False

    @property
    def identical(self) -> bool:
        return (
            not self.interrupted
            and self.runs_total == 0
            and self.extra is None
            and self.integer_parts is None
            and self.a.count == self.b.count
        )

    @property
    def keep(self) -> str | None:
        """``"A"``, ``"B"``, ``"either"`` (identical), ``"neither"``, or None (cannot say)."""
        if self.identical:
            return "either"
        if self.interrupted:
            return None
        verdicts = [r.right for r in self.runs]
        if self.integer_parts is not None:
            verdicts.append(self.integer_parts["right"])
        if len(self.runs) < self.runs_total or any(v is None for v in verdicts):
            return None
        ok = {c: all(v == c for v in verdicts) for c in (A, B)}
        if self.extra is not None:
            if self.extra.right is None:
                return None
            longer, shorter = self.extra.longer, B if self.extra.longer == A else A
            if ok[longer] and ok[shorter]:  # no run: the copies differ in length only
                return longer if self.extra.right else shorter
            if ok[longer] and not self.extra.right:
                return "neither"
        if ok[A] and ok[B]:
            return "either"
        for c in (A, B):
            if ok[c]:
                return c
        return "neither"

    @property
    def verdict(self) -> str:
        if self.identical:
            return "identical"
        if self.interrupted and self.runs_total == 0 and self.integer_parts is None:
            return "incomplete"
        return "differ"

    @property
    def labels_consistent(self) -> bool:
        """True when neither copy has a position label that disagrees with its digits (or labels are ignored)."""
        return self.a.label_finding is None and self.b.label_finding is None

    @property
    def exit_code(self) -> int:
        """0 identical digits and consistent labels, 1 the copies differ or a copy's labels disagree."""
        if not self.labels_consistent:
            return 1
        return {"identical": 0, "differ": 1}.get(self.verdict, 0)

    def to_dict(self) -> dict[str, Any]:
        return {
            "command": "compare",
            "verdict": self.verdict,
            "schema_version": SCHEMA_VERSION,
            "a": asdict(self.a),
            "b": asdict(self.b),
            "base": self.base,
            "constant": self.constant,
            "constant_how": self.constant_how,
            "method": self.method,
            "digits_compared": self.digits_compared,
            "differing_digits": self.differing_digits,
            "runs": [r.to_dict() for r in self.runs],
            "runs_total": self.runs_total,
            "extra": self.extra.to_dict() if self.extra is not None else None,
            "integer_parts": self.integer_parts,
            "shift": self.shift,
            "keep": self.keep,
            "seconds": round(self.seconds, 3),
            "arbitration_seconds": [round(s, 4) for s in self.arbitration_seconds],
            "evaluations": self.evaluations,
            "interrupted": self.interrupted,
            "labels_consistent": self.labels_consistent,
        }


def _describe_layout(df: DigitFile) -> str:
    lay = df.layout
    if lay.kind == "packed":
        return "packed binary"
    parts = [f"{lay.line_width} digits per line" if lay.line_width else "irregular lines"]
    if lay.group_size:
        parts.append(f"groups of {lay.group_size}")
    if lay.labels:
        parts.append("labels at both line ends" if lay.labels == "both" else f"labels at line {lay.labels}")
    return ", ".join(parts)


def _facts(df: DigitFile, ignore_labels: bool = False) -> CopyFacts:
    return CopyFacts(
        path=df.path,
        size_bytes=df.size_bytes,
        compression=df.compression,
        base=df.base,
        count=df.count,
        integer_part=df.integer_part,
        layout=_describe_layout(df),
        label_finding=None if ignore_labels else first_label_finding(df),
    )


def compare_files(
    path_a: str,
    path_b: str,
    *,
    base: int | None = None,
    constant: str | None = None,
    formula: str | None = None,
    ignore_labels: bool = False,
    workers: int = 1,
    progress: Progress | None = None,
) -> CompareResult:
    """Compare two copies of a digit file and say, with certified digits, which is right where they differ.

    Each copy is read once, front to back (the digit-file layer's read-and-check
    stream); ``progress(done, total)`` counts bytes of both files as stored.
    """
    # Labels that disagree with the digits are damage to that copy, reported beside the
    # comparison (exit 1), not bad input; ``ignore_labels`` drops those findings.
    sa = open_stream(path_a, base=base, constant=constant, strict_labels=False)
    try:
        sb = open_stream(path_b, base=base, constant=constant, strict_labels=False)
        try:
            return _compare(
                sa,
                sb,
                constant=constant,
                formula=formula,
                workers=workers,
                progress=progress,
                ignore_labels=ignore_labels,
            )
        finally:
            sb.close()
    finally:
        sa.close()


class _FileDigits:
    """An opened :class:`DigitFile` read front to back like a stream (for :func:`compare_open`)."""

    def __init__(self, df: DigitFile) -> None:
        self.df, self.path, self.base, self.size_bytes = df, df.path, df.base, df.size_bytes
        self.integer_part = df.integer_part
        self.first_positions = df.first_positions
        self.digits_read = 0

    @property
    def bytes_done(self) -> int:
        return self.size_bytes * self.digits_read // max(1, self.df.count)

    @property
    def done(self) -> bool:
        return self.digits_read >= self.df.count

    def take(self, n: int) -> bytes:
        out = self.df.read(self.digits_read + 1, n).encode("ascii")
        self.digits_read += len(out)
        return out

    def chunks(self, copy: bool = True) -> Iterator[bytes]:
        while not self.done:
            yield self.take(CHUNK_DIGITS)

    def drain(self) -> None:
        self.digits_read = self.df.count

    def finish(self) -> DigitFile:
        return self.df


def compare_open(
    da: DigitFile,
    db: DigitFile,
    *,
    constant: str | None = None,
    formula: str | None = None,
    workers: int = 1,
    progress: Progress | None = None,
    ignore_labels: bool = False,
) -> CompareResult:
    """Compare two opened copies (see :func:`compare_files`); the files stay open."""
    return _compare(
        _FileDigits(da),
        _FileDigits(db),
        constant=constant,
        formula=formula,
        workers=workers,
        progress=progress,
        ignore_labels=ignore_labels,
    )


def _settle_constant(da: DigitFile, db: DigitFile, constant: str | None) -> tuple[str | None, str]:
    if constant is not None:
        return get_constant(constant).name, GIVEN
    ca, cb = da.constant, db.constant
    if ca is not None and cb is not None and ca != cb:
        raise needs(
            f"the copies look like different constants: {da.path} is {ca}, {db.path} is {cb}; "
            "name the constant if they are copies of one file",
            "constant",
        )
    if ca is not None:
        return ca, f"copy A: {da.constant_how}"
    if cb is not None:
        return cb, f"copy B: {db.constant_how}"
    return None, f"neither copy's leading digits match a known constant ({da.constant_how})"


class _Runs:
    """Differing runs collected chunk by chunk, merged across short gaps, kept up to a cap."""

    def __init__(self) -> None:
        self.done: list[DiffRun] = []
        self.total = 0
        self.differing = 0
        self.pending: DiffRun | None = None

    def add(self, a: str, b: str, start: int) -> None:
        found = [(f, last, last - f + 1) for f, last in diff_runs(a, b, start)]
        if not found:
            return
        self.differing += sum(w for _, _, w in found)
        carried = []
        if self.pending is not None:
            p = self.pending
            carried = [(p.start, p.start + p.length - 1, p.differing)]
        merged = merge_runs(carried + found)
        for i, (f, last, w) in enumerate(merged):
            if carried and i == 0 and f == carried[0][0]:
                assert self.pending is not None
                run = self.pending
                run.length, run.differing = last - f + 1, w
            else:
                k = f - start
                run = DiffRun(f, last - f + 1, w, a[k : k + ARBITRATE_DIGITS], b[k : k + ARBITRATE_DIGITS])
            if i < len(merged) - 1:
                self._finish(run)
            else:
                self.pending = run

    def _finish(self, run: DiffRun) -> None:
        self.total += 1
        if len(self.done) < MAX_RUNS_KEPT:
            self.done.append(run)

    def flush(self) -> None:
        if self.pending is not None:
            self._finish(self.pending)
            self.pending = None


def _interrupted_facts(s: DigitStream | _FileDigits) -> CopyFacts:
    """Facts of a copy that was not read to its end: its count is the digits read so far."""
    if isinstance(s, _FileDigits):
        return _facts(s.df)
    return CopyFacts(
        path=s.path,
        size_bytes=s.size_bytes,
        compression=s.compression,
        base=s.base,
        count=s.digits_read,
        integer_part=s.integer_part,
        layout="interrupted before its end",
    )


def _compare(
    sa: DigitStream | _FileDigits,
    sb: DigitStream | _FileDigits,
    *,
    constant: str | None,
    formula: str | None,
    workers: int,
    progress: Progress | None,
    ignore_labels: bool = False,
) -> CompareResult:
    t0 = time.perf_counter()
    for s in (sa, sb):
        if s.first_positions != (1,):  # positions and arbitration count from digit 1 here
            where = " or ".join(f"{p:,}" for p in s.first_positions)
            raise needs(
                f"{s.path}: the copy begins at digit {where} of the expansion; copies of a stretch from "
                "deeper in the expansion are not compared yet",
                "verify_each",
            )
    if sa.base != sb.base:
        raise needs(
            f"the copies are in different bases ({sa.path}: base {sa.base}, {sb.path}: base {sb.base}), "
            "so their digits cannot be compared; check each against the constant instead",
            "verify_each",
        )
    total = sa.size_bytes + sb.size_bytes
    runs = _Runs()
    probe = _Probe()
    shift: dict[str, Any] | None = None
    shift_run: DiffRun | None = None
    interrupted = False
    compared = 0
    try:
        ita, itb = sa.chunks(copy=False), sb.chunks(copy=False)  # each chunk is done with before the next
        pa = pb = b""
        ia = ib = 0
        p = 1
        while True:
            if ia >= len(pa):
                pa, ia = next(ita, b""), 0
            if ib >= len(pb):
                pb, ib = next(itb, b""), 0
            n = min(len(pa) - ia, len(pb) - ib, CHUNK_DIGITS)
            if n <= 0:
                break  # one copy (or both) ended
            # Equal digits cost one memcmp and no copy; differing ones are decoded.
            if not pa.startswith(memoryview(pb)[ib : ib + n], ia):
                runs.add(pa[ia : ia + n].decode("ascii"), pb[ib : ib + n].decode("ascii"), p)
            probe.follow(runs.pending, pa, ia, pb, ib, n, p)
            ia, ib, p = ia + n, ib + n, p + n
            compared = p - 1
            if progress:
                progress(sa.bytes_done + sb.bytes_done, total)
            run = runs.pending
            if (
                run is not None
                and run.length >= SHIFT_PROBE
                and run.differing > 0.75 * run.length
                and probe.tried != run.start
            ):
                probe.tried = run.start
                shift = probe.shift()
                if shift is not None:
                    shift_run = run
                    break
        # The count, findings and index of each copy are known once it is read to its end.
        sa.drain()
        sb.drain()
        if progress:
            progress(total, total)
    except KeyboardInterrupt:
        interrupted = True
    runs.flush()
    if interrupted:
        result = CompareResult(
            a=_interrupted_facts(sa),
            b=_interrupted_facts(sb),
            base=sa.base,
            constant=get_constant(constant).name if constant is not None else None,
            constant_how=GIVEN if constant is not None else "not settled: interrupted",
            method="none",
            digits_compared=compared,
            differing_digits=runs.differing,
            runs=runs.done,
            runs_total=runs.total,
            interrupted=True,
        )
        result.seconds = time.perf_counter() - t0
        return result
    da, db = sa.finish(), sb.finish()
    name, how = _settle_constant(da, db, constant)
    method = "none" if name is None else ("digit extraction" if da.base == 16 else "radix conversion")
    if name is not None and get_constant(name).evaluation is not None:
        method = "full evaluation"
    common = min(da.count, db.count)
    result = CompareResult(
        a=_facts(da, ignore_labels),
        b=_facts(db, ignore_labels),
        base=da.base,
        constant=name,
        constant_how=how,
        method=method,
        digits_compared=compared,
        differing_digits=runs.differing,
        runs=runs.done,
        runs_total=runs.total,
        shift=shift,
    )
    if shift is not None and shift_run is not None:
        shift_run.notes.append(
            Note("shifted", {"missing_in": shift["missing_in"], "digits": shift["digits"]})
        )
        shift_run.length = common - shift_run.start + 1
    if da.count != db.count:
        longer, df = (A, da) if da.count > db.count else (B, db)
        result.extra = ExtraDigits(longer, common + 1, df.count - common, df.read(common + 1, SAMPLE_DIGITS))
    int_a, int_b = da.integer_part, db.integer_part
    if int_a is not None and int_b is not None and (int_a.lstrip("0") or "0") != (int_b.lstrip("0") or "0"):
        result.integer_parts = {"a": int_a, "b": int_b, "certified": None, "right": None}
    if name is not None:
        try:
            _arbitrate(result, da, db, name, formula, workers)
        except KeyboardInterrupt:
            result.interrupted = True
    result.seconds = time.perf_counter() - t0
    return result


class _Probe:
    """The first digits of both copies at the pending run's start, for the lost-digits probe."""

    def __init__(self) -> None:
        self.start = 0
        self.a = self.b = ""
        self.tried = 0

    def follow(self, run: DiffRun | None, a: bytes, ia: int, b: bytes, ib: int, n: int, p: int) -> None:
        """Keep (or extend) the samples of ``run`` from ``a[ia:ia+n]`` and ``b[ib:ib+n]``, which start at ``p``."""
        need = SHIFT_MATCH + MAX_SHIFT
        if run is None:
            return
        if run.start != self.start:
            k = run.start - p  # a run starts in the step that finds it
            if not 0 <= k < n:
                return
            self.start = run.start
            w = min(need, n - k)
            self.a, self.b = a[ia + k : ia + k + w].decode("ascii"), b[ib + k : ib + k + w].decode("ascii")
        elif len(self.a) < need and p == self.start + len(self.a):
            w = min(need - len(self.a), n)
            self.a += a[ia : ia + w].decode("ascii")
            self.b += b[ib : ib + w].decode("ascii")

    def shift(self) -> dict[str, Any] | None:
        """Lost or extra digits: the copies agree again once one is shifted by ``k <= MAX_SHIFT``."""
        a, b, start = self.a, self.b, self.start
        for k in range(1, MAX_SHIFT + 1):
            if len(a) >= k + SHIFT_MATCH and a[k : k + SHIFT_MATCH] == b[:SHIFT_MATCH]:
                return {"position": start, "digits": k, "missing_in": B}
            if len(b) >= k + SHIFT_MATCH and b[k : k + SHIFT_MATCH] == a[:SHIFT_MATCH]:
                return {"position": start, "digits": k, "missing_in": A}
        return None


def _arbitrate(
    result: CompareResult, da: DigitFile, db: DigitFile, name: str, formula: str | None, workers: int
) -> None:
    if result.integer_parts is not None:
        expected, _ = leading_digits(name, result.base, 1)
        ip = result.integer_parts
        ip["certified"] = expected
        ra, rb = ((ip[k].upper().lstrip("0") or "0") == expected for k in ("a", "b"))
        ip["right"] = A if ra else B if rb else BOTH_WRONG
    oracle = HexOracle(name, get_constant(name).method_key(formula), workers=workers)
    if result.base == 16:
        _arbitrate_direct(result, da, db, oracle.digits)
    elif get_constant(name).evaluation is not None:  # the decimal expansion directly, no hex detour
        from spotcheck.engine.full import certified_digits

        def decimal_digits(position: int, count: int) -> str:
            oracle.evaluations += 1
            return certified_digits(name, 10, position, count)[1]

        _arbitrate_direct(result, da, db, decimal_digits)
    else:
        _arbitrate_decimal(result, da, db, oracle)
    result.evaluations = oracle.evaluations


def _full_sample(df: DigitFile, run: DiffRun, have: str) -> str:
    w = min(run.length, ARBITRATE_DIGITS)
    return have if len(have) >= w else df.read(run.start, w)


def _judge(a_ok: bool, b_ok: bool) -> str:
    return A if a_ok else B if b_ok else BOTH_WRONG


def _arbitrate_direct(
    result: CompareResult, da: DigitFile, db: DigitFile, certified: Callable[[int, int], str]
) -> None:
    """Each run's digits against ``certified(position, count)`` digits in the files' base."""
    for i, run in enumerate(result.runs):
        if i >= MAX_ARBITRATED_HEX:
            run.notes.append(Note("not-arbitrated-beyond-limit", {"limit": MAX_ARBITRATED_HEX, "base": 16}))
            continue
        t = time.perf_counter()
        w = min(run.length, ARBITRATE_DIGITS)
        run.a, run.b = _full_sample(da, run, run.a)[:w], _full_sample(db, run, run.b)[:w]
        run.certified = certified(run.start, w)
        run.right = _judge(run.a == run.certified, run.b == run.certified)
        if run.length > w:
            run.notes.append(Note("run-partly-checked", {"checked": w, "length": run.length}))
        result.arbitration_seconds.append(time.perf_counter() - t)
    extra = result.extra
    if extra is not None:
        t = time.perf_counter()
        df = da if extra.longer == A else db
        w = min(extra.length, ARBITRATE_DIGITS)
        head = df.read(extra.start, w)
        end_pos = extra.start + extra.length - w
        tail = df.read(end_pos, w) if end_pos > extra.start else ""
        extra.certified = certified(extra.start, w)
        extra.right = head == extra.certified and (not tail or tail == certified(end_pos, w))
        extra.notes.append(Note("extra-ends-checked" if tail else "extra-all-checked", {"checked": w}))
        result.arbitration_seconds.append(time.perf_counter() - t)


def _arbitrate_decimal(result: CompareResult, da: DigitFile, db: DigitFile, oracle: HexOracle) -> None:
    from .decimal import estimate_conversion_bytes
    from .radix import open_converter
    from .reference import memory_budget

    def spliced(upto: int) -> str | None:
        """Digits 1..upto-1 with each earlier run taken from the copy found right there."""
        parts: list[str] = []
        p = 1
        for run in result.runs:
            if run.start >= upto:
                break
            if run.right not in (A, B):
                return None
            parts.append(da.read(p, run.start - p) if run.start > p else "")
            src = da if run.right == A else db
            parts.append(src.read(run.start, run.length))
            p = run.start + run.length
        if upto > p:
            parts.append(da.read(p, upto - p))
        return "".join(parts)

    def check(common: str, *suffixes: str) -> list[bool]:
        """Each prefix ``common + suffix`` checked whole; a large ``common`` is converted in a
        child process (Ctrl-C stops it at once), which holds it for every suffix."""
        n = len(common)
        conv = open_converter(
            n,
            lambda p, k: common[p - 1 : p - 1 + k],
            lambda: iter([(1, common)]),
        )
        try:
            return [conv.check(n, oracle.digits, DEFAULT_WINDOW, "compare", suffix=x).match for x in suffixes]
        finally:
            conv.close()

    blocked = False
    for i, run in enumerate(result.runs):
        end = run.start + min(run.length, ARBITRATE_DIGITS) - 1
        if blocked or i >= MAX_ARBITRATED_DECIMAL:
            run.notes.append(
                Note("not-arbitrated-after-unresolved")
                if blocked
                else Note("not-arbitrated-beyond-limit", {"limit": MAX_ARBITRATED_DECIMAL, "base": 10})
            )
            continue
        need = estimate_conversion_bytes(end)
        if need > memory_budget():
            run.notes.append(Note("not-arbitrated-memory", {"digits": end, "bytes": need}))
            blocked = True
            continue
        t = time.perf_counter()
        basis = spliced(run.start)
        if basis is None:
            blocked = True
            run.notes.append(Note("not-arbitrated-after-unresolved"))
            continue
        w = end - run.start + 1
        run.a, run.b = _full_sample(da, run, run.a)[:w], _full_sample(db, run, run.b)[:w]
        right_a, right_b = check(basis, run.a, run.b)
        run.right = _judge(right_a, right_b)
        run.notes.append(Note("prefixes-converted", {"digits": end}))
        blocked = run.right == BOTH_WRONG
        result.arbitration_seconds.append(time.perf_counter() - t)
    extra = result.extra
    if extra is not None:
        end = extra.start + min(extra.length, DEFAULT_WINDOW) - 1
        if blocked or len(result.runs) < result.runs_total or any(r.right is None for r in result.runs):
            extra.notes.append(Note("not-arbitrated-after-unresolved"))
            return
        if estimate_conversion_bytes(end) > memory_budget():
            extra.notes.append(
                Note("not-arbitrated-memory", {"digits": end, "bytes": estimate_conversion_bytes(end)})
            )
            return
        t = time.perf_counter()
        basis = spliced(extra.start)
        df = da if extra.longer == A else db
        if basis is None:
            return
        (extra.right,) = check(basis, df.read(extra.start, end - extra.start + 1))
        extra.notes.append(Note("prefixes-converted", {"digits": end}))
        result.arbitration_seconds.append(time.perf_counter() - t)
