"""The engine's public face: certified hex digits of a named constant."""

from __future__ import annotations

import math
import operator
import os
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from spotcheck.engine import backend
from spotcheck.engine.blocks import BlockProgress, series_fingerprint, thread_runner
from spotcheck.engine.evaluate import extract_hex, value_bounds, window_capacity
from spotcheck.engine.journal import Journal, request_path
from spotcheck.engine.plan import CostEstimate, RunPlan, estimate_series_cost
from spotcheck.engine.series import series_of
from spotcheck.errors import CertificationError, InfeasibleError, UsageError
from spotcheck.formulas import Formula, get_constant

__all__ = [
    "CostEstimate",
    "CombResult",
    "CrossCheck",
    "DigitResult",
    "cross_check",
    "extract_comb",
    "estimate_cost",
    "extract",
    "hex_digits",
    "leading_digits",
    "MAX_COUNT",
    "check_request",
    "checkpoint_request",
    "comb_checkpoint_request",
    "default_checkpoint_path",
    "default_comb_checkpoint_path",
]

# A request for more digits than this is refused as a usage error: each window
# of about 100 digits costs a full head sum, so larger counts belong to a full
# computation, not to digit extraction.
MAX_COUNT = 100_000
# Requests with more head terms than this are costed (a calibration of a few
# milliseconds) before they start, and refused if they cannot finish.
COST_CHECK_TERMS = 10**10


@dataclass(frozen=True)
class DigitResult:
    """Certified hex digits and how they were obtained."""

    constant: str
    formula: str
    formula_notation: str
    formula_source: str
    position: int
    digits: str
    width_log2: float
    """log2 of the widest certifying interval (about -100 means +-2^-100)."""
    fraction_bits: int
    """Fixed-point fractional bits of the widest window."""
    terms: int
    windows: int
    seconds: float
    backend: str
    terms_loaded: int = 0
    """Of ``terms``, those whose blocks came from the checkpoint, not computed in this run."""
    blocks_loaded: int = 0
    blocks_computed: int = 0
    checkpoint: str | None = None
    """The checkpoint file used, if any."""
    warnings: tuple[str, ...] = ()
    """Problems that did not stop the run (a checkpoint that could not be written...)."""

    @property
    def count(self) -> int:
        return len(self.digits)

    @property
    def terms_computed(self) -> int:
        return self.terms - self.terms_loaded

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["count"] = self.count
        out["terms_computed"] = self.terms_computed
        out["warnings"] = list(self.warnings)
        return out


def check_request(position: object, count: object) -> tuple[int, int]:
    """Validate a (position, count) request; raise :class:`UsageError` if impossible."""
    try:
        p = operator.index(position)  # type: ignore[arg-type]
        n = operator.index(count)  # type: ignore[arg-type]
    except TypeError:
        raise UsageError(f"position and count must be integers, got {position!r} and {count!r}") from None
    if p < 1:
        raise UsageError(f"position must be at least 1 (digit 1 is the first after the point), got {p}")
    if n < 1:
        raise UsageError(f"count must be at least 1, got {n}")
    if n > MAX_COUNT:
        raise UsageError(f"count {n} is too large for digit extraction (at most {MAX_COUNT})")
    return p, n


def resolve_formula(constant: str | Formula, formula: str | None = None) -> tuple[str, Formula]:
    if isinstance(constant, Formula):
        return constant.key, constant
    c = get_constant(constant)
    return c.name, c.formula(formula)


def checkpoint_request(name: str, f: Formula, position: int, count: int) -> dict[str, Any]:
    """What a checkpoint file is keyed by: constant, formula (with its coefficients), position, count."""
    return {
        "constant": name,
        "formula": f.key,
        "notation": f.notation(),
        "series": series_fingerprint(series_of(f)),
        "position": position,
        "count": count,
    }


def default_checkpoint_path(
    constant: str | Formula, position: int, count: int = 16, *, formula: str | None = None
) -> Path:
    """The checkpoint file used for ``checkpoint=True``, under the user's cache directory.

    ``$XDG_CACHE_HOME/spotcheck`` (or ``~/.cache/spotcheck``), one file per
    request: constant, formula, position and count are in the name, and a hash
    of the formula's coefficients keeps two formulas with the same key apart.
    """
    p, n = check_request(position, count)
    name, f = resolve_formula(constant, formula)
    return request_path(f"{name}-{f.key}-at{p}-n{n}", checkpoint_request(name, f, p, n))


def comb_checkpoint_request(
    name: str, f: Formula, position: int, gap: int, count: int, digits: int
) -> dict[str, Any]:
    """What a comb's checkpoint file is keyed by: a :func:`checkpoint_request` naming the comb
    (first position, gap, number of windows, digits a window)."""
    return {**checkpoint_request(name, f, position, digits), "gap": gap, "windows": count}


def default_comb_checkpoint_path(
    constant: str | Formula,
    position: int,
    gap: int,
    count: int,
    digits: int = 16,
    *,
    formula: str | None = None,
) -> Path:
    """The checkpoint file :func:`extract_comb` uses for ``checkpoint=True`` (as
    :func:`default_checkpoint_path`, the comb's gap and windows in the name)."""
    p, n = check_request(position, digits)
    name, f = resolve_formula(constant, formula)
    return request_path(
        f"{name}-{f.key}-comb-at{p}-gap{gap}-w{count}-n{n}",
        comb_checkpoint_request(name, f, p, gap, count, n),
    )


def _journal_warnings(journal: Journal, path: Path | None) -> list[str]:
    """The run's own journal's problems that did not stop it."""
    warnings: list[str] = []
    if journal.damaged:
        warnings.append(
            f"{journal.damaged} damaged record(s) in the checkpoint {path} were skipped "
            "and their blocks computed again"
        )
    if journal.failure:
        warnings.append(f"{journal.failure}; the run went on without it")
    return warnings


def _check_block_k(block_k: object) -> int | None:
    if block_k is None:
        return None
    if isinstance(block_k, bool) or not isinstance(block_k, int) or block_k < 1:
        raise UsageError(f"block size must be a positive integer, got {block_k!r}")
    return block_k


def estimate_cost(
    constant: str | Formula,
    position: int,
    count: int = 16,
    *,
    formula: str | None = None,
    workers: int = 1,
    cluster: bool = False,
    checkpoint: bool = False,
    block_k: int | None = None,
) -> CostEstimate:
    """What :func:`extract` with the same arguments will cost, from a short calibration.

    CPU seconds, wall seconds on ``workers``, memory, the path (compiled
    kernel, or the twin past the kernel's limit for this formula, and why),
    the number of blocks, and whether it can finish at all (``feasible``;
    ``hint`` says what would make it so).  Takes a few milliseconds.
    """
    p, n = check_request(position, count)
    _, f = resolve_formula(constant, formula)
    return estimate_series_cost(
        series_of(f),
        p,
        n,
        workers=workers,
        cluster=bool(cluster),
        block_k=_check_block_k(block_k),
        deep=bool(checkpoint) or bool(cluster),
    )


def _years(seconds: float) -> str:
    years = seconds / (365.25 * 86400)
    return f"{years:.3g} core-years" if years >= 1 else f"{seconds / 86400:.3g} core-days"


_PATH_WORDS = {
    "compiled": "compiled kernel",
    "twin": "pure-Python path",
    "compiled+twin": "compiled kernel and the pure-Python path",
}


def refuse_if_infeasible(estimate: CostEstimate, name: str) -> None:
    """Raise :class:`InfeasibleError` (with the estimate) when ``estimate`` cannot finish."""
    if estimate.feasible:
        return
    why = f"; {estimate.why}" if estimate.why else ""
    path = _PATH_WORDS.get(estimate.path, estimate.path)
    raise InfeasibleError(
        f"position {estimate.position:,} of {name} is out of reach: about "
        f"{_years(estimate.cpu_seconds)} of CPU time on the {path}{why} "
        f"(the limit is {_years(estimate.limit_seconds)})",
        estimate,
        estimate.hint,
    )


def extract(
    constant: str | Formula,
    position: int,
    count: int = 16,
    *,
    formula: str | None = None,
    workers: int = 1,
    checkpoint: str | os.PathLike[str] | bool | Journal | None = None,
    cluster: Any = None,
    block_k: int | None = None,
    block_progress: Callable[[BlockProgress], None] | None = None,
    estimate: CostEstimate | None = None,
) -> DigitResult:
    """Certified hex digits of ``constant`` from ``position`` (1 = first after the point).

    For deep positions: ``checkpoint`` (a path, or ``True`` for
    :func:`default_checkpoint_path`, or an open :class:`Journal` that the
    caller closes: a check's one file for all its windows) journals finished head-sum blocks so an
    interrupted run resumes where it stopped (a file that cannot be created
    raises :class:`~spotcheck.errors.CheckpointError` before any work; one
    that fails later becomes a warning in the result); ``cluster`` (a Dask
    scheduler address such as ``"tcp://host:8786"`` or a
    ``distributed.Client``) runs the blocks on a Dask cluster; with either,
    the head sum is cut into the larger blocks of
    :func:`~spotcheck.engine.blocks.deep_block_k`.  ``block_k`` overrides the
    block size (values of k per block); ``block_progress`` is called after
    every block with a :class:`~spotcheck.engine.blocks.BlockProgress`
    (terms done and to do, loaded blocks apart, rate, ETA) and never changes
    the block size.  A request too large to finish raises
    :class:`~spotcheck.errors.InfeasibleError` carrying its
    :class:`CostEstimate` (``estimate``, if given, is used for that decision).

    >>> extract("pi", 1, 8).digits
    '243F6A88'
    """
    p, n = check_request(position, count)
    if (
        isinstance(constant, str) and get_constant(constant).evaluation is not None
    ):  # no formula: evaluate in full
        from spotcheck.engine.full import extract_fields

        return DigitResult(**extract_fields(get_constant(constant), p, n, formula))
    name, f = resolve_formula(constant, formula)
    series = series_of(f)
    block_k = _check_block_k(block_k)
    deep = checkpoint not in (None, False) or cluster is not None
    if estimate is None and series.head_length(4 * (p + n)) * len(series.js) > COST_CHECK_TERMS:
        estimate = estimate_series_cost(
            series, p, n, workers=workers, cluster=cluster is not None, block_k=block_k, deep=deep
        )
    if estimate is not None:
        refuse_if_infeasible(estimate, name)
    plan = RunPlan(series, p, n, thread_runner(workers), block_k=block_k, on_block=block_progress, deep=deep)
    path: Path | None = None
    shared = isinstance(checkpoint, Journal)  # the caller's journal: it opens and closes it
    if isinstance(checkpoint, Journal):
        plan.journal, path = checkpoint, checkpoint.path
    elif checkpoint is True:
        path = default_checkpoint_path(constant, p, n, formula=formula)
    elif checkpoint not in (None, False):
        assert not isinstance(checkpoint, bool)
        path = Path(checkpoint)
    if path is not None and not shared:  # only the cache folder of checkpoint=True is made when missing
        plan.journal = Journal(
            path, series, checkpoint_request(name, f, p, n), create_folder=checkpoint is True
        )
    client, owned = None, False
    finished = False
    try:
        if cluster is not None:
            from spotcheck.engine.cluster import connect, dask_runner

            client, owned = connect(cluster)
            plan.runner = dask_runner(client)
        digits, intervals, seconds = extract_hex(series, p, n, plan)
        finished = True
    finally:
        if plan.journal is not None and not shared:
            plan.journal.close(compact=finished)
        if owned and client is not None:
            client.close()
    warnings: list[str] = []
    if plan.journal is not None and not shared:
        warnings = _journal_warnings(plan.journal, path)
    widest = max(intervals, key=lambda iv: iv.width_log2)
    return DigitResult(
        constant=name,
        formula=f.key,
        formula_notation=f.notation(),
        formula_source=f.source,
        position=p,
        digits=digits,
        width_log2=round(widest.width_log2, 2),
        fraction_bits=widest.bits,
        terms=sum(iv.terms for iv in intervals),
        windows=len(intervals),
        seconds=seconds,
        backend=backend.BACKEND,
        terms_loaded=sum(iv.terms_loaded for iv in intervals),
        blocks_loaded=sum(iv.blocks_loaded for iv in intervals),
        blocks_computed=sum(iv.blocks_computed for iv in intervals),
        checkpoint=str(path) if path is not None else None,
        warnings=tuple(warnings),
    )


@dataclass(frozen=True)
class CombResult:
    """Certified digits at a comb of positions ``position + i * gap`` (:func:`extract_comb`)."""

    constant: str
    formula: str
    positions: tuple[int, ...]
    digits: tuple[str, ...]
    """The digits at each position, each certified by its own interval."""
    width_log2: float
    """log2 of the widest certifying interval."""
    fraction_bits: int
    terms: int
    """Head and tail terms over all windows (a term shared by windows counts once per window)."""
    alone: int
    """Windows the shared precision did not certify, evaluated again alone."""
    seconds: float
    backend: str
    terms_loaded: int = 0
    """Of ``terms``, those whose blocks came from the checkpoint, not computed in this run."""
    blocks_loaded: int = 0
    """Blocks taken from the checkpoint: the comb's (each serving every window) and those of
    windows evaluated alone."""
    blocks_computed: int = 0
    checkpoint: str | None = None
    """The checkpoint file used, if any."""
    warnings: tuple[str, ...] = ()
    """Problems that did not stop the run (a damaged record recomputed, a checkpoint that could not be written...)."""


def extract_comb(
    constant: str | Formula,
    position: int,
    gap: int,
    count: int,
    digits: int = 16,
    *,
    formula: str | None = None,
    workers: int = 1,
    checkpoint: str | os.PathLike[str] | bool | Journal | None = None,
    cluster: Any = None,
    block_k: int | None = None,
    block_progress: Callable[[BlockProgress], None] | None = None,
) -> CombResult:
    """``digits`` certified hex digits at each of ``count`` positions ``position + i * gap``.

    One pass over the head terms serves every window (the comb,
    :mod:`spotcheck.engine.comb`); the digits are those of each window
    evaluated alone.  ``workers``, ``checkpoint``, ``cluster``, ``block_k``
    and ``block_progress`` run it as they run :func:`extract`: comb blocks
    (every window's sums of one range of k) on threads or a Dask cluster,
    journaled in the checkpoint (``True``: :func:`default_comb_checkpoint_path`;
    an open :class:`Journal`, a check's, holds the comb beside its windows).

    >>> extract_comb("pi", 1, 8, 2, 8).digits
    ('243F6A88', '85A308D3')
    """
    p, n = check_request(position, digits)
    if isinstance(constant, str) and get_constant(constant).evaluation is not None:
        raise UsageError(f"{constant} has no digit-extraction formula, so it has no comb of windows")
    for name_, value in (("gap", gap), ("count", count)):
        if isinstance(value, bool) or not isinstance(value, int) or value < 1:
            raise UsageError(f"the comb's {name_} must be a positive integer, not {value!r}")
    from spotcheck.engine.comb import MAX_WINDOWS, comb_window_digits

    if count > MAX_WINDOWS:
        raise UsageError(f"a comb has at most {MAX_WINDOWS:,} windows, not {count:,}: split it into several")

    name, f = resolve_formula(constant, formula)
    series = series_of(f)
    capacity = window_capacity(series, 4 * (p - 1 + (count - 1) * gap))
    if n > capacity:  # before any file is opened
        raise UsageError(f"{n} digits exceed one window's {capacity} at that depth")
    block_k = _check_block_k(block_k)
    deep = checkpoint not in (None, False) or cluster is not None
    plan = RunPlan(series, p, n, thread_runner(workers), block_k=block_k, on_block=block_progress, deep=deep)
    path: Path | None = None
    shared = isinstance(checkpoint, Journal)  # the caller's journal: it opens and closes it
    if isinstance(checkpoint, Journal):
        plan.journal, path = checkpoint, checkpoint.path
    elif checkpoint is True:
        path = default_comb_checkpoint_path(constant, p, gap, count, n, formula=formula)
    elif checkpoint not in (None, False):
        assert not isinstance(checkpoint, bool)
        path = Path(checkpoint)
    if path is not None and not shared:  # only the cache folder of checkpoint=True is made when missing
        plan.journal = Journal(
            path, series, comb_checkpoint_request(name, f, p, gap, count, n), create_folder=checkpoint is True
        )
    client, owned = None, False
    finished = False
    t0 = time.perf_counter()
    try:
        if cluster is not None:
            from spotcheck.engine.cluster import connect, dask_runner

            client, owned = connect(cluster)
            plan.runner = dask_runner(client)
        windows = comb_window_digits(series, p, gap, count, n, plan)
        finished = True
    finally:
        if plan.journal is not None and not shared:
            plan.journal.close(compact=finished)
        if owned and client is not None:
            client.close()
    seconds = time.perf_counter() - t0
    warnings = _journal_warnings(plan.journal, path) if plan.journal is not None and not shared else []
    intervals = [w.interval for w in windows]
    widest = max(intervals, key=lambda iv: iv.width_log2)
    return CombResult(
        constant=name,
        formula=f.key,
        positions=tuple(w.position for w in windows),
        digits=tuple(w.digits for w in windows),
        width_log2=round(widest.width_log2, 2),
        fraction_bits=widest.bits,
        terms=sum(iv.terms for iv in intervals),
        alone=sum(w.alone for w in windows),
        seconds=seconds,
        backend=backend.BACKEND,
        terms_loaded=sum(iv.terms_loaded for iv in intervals),
        blocks_loaded=windows[0].comb_blocks[0] + sum(w.interval.blocks_loaded for w in windows if w.alone),
        blocks_computed=windows[0].comb_blocks[1]
        + sum(w.interval.blocks_computed for w in windows if w.alone),
        checkpoint=str(path) if path is not None else None,
        warnings=tuple(warnings),
    )


@dataclass(frozen=True)
class CrossCheck:
    """Every formula of one constant evaluated at the same digits."""

    results: tuple[DigitResult, ...]
    main: DigitResult
    """The result of the formula asked for (or the default one)."""

    @property
    def agree(self) -> bool:
        return all(r.digits == self.main.digits for r in self.results)

    @property
    def exit_code(self) -> int:
        return 0 if self.agree else 1

    def to_dict(self) -> dict[str, Any]:
        out = self.main.to_dict()
        out["cross_check"] = {"agree": self.agree, "formulas": {r.formula: r.digits for r in self.results}}
        return out


def cross_check(
    constant: str,
    position: int,
    count: int = 16,
    *,
    formula: str | None = None,
    each: Callable[[str], dict[str, Any]] | None = None,
    **kwargs: Any,
) -> CrossCheck:
    """Evaluate every formula of ``constant`` at the same digits; ``agree`` if all give the same.

    ``formula`` picks the main result (default: the constant's default
    formula); ``kwargs`` go to :func:`extract` for each formula, and
    ``each(formula_key)`` may add per-formula keyword arguments (a checkpoint
    path, a progress callback).  Raises :class:`UsageError` for a constant
    with one formula.
    """
    const = get_constant(constant)
    keys = [fm.key for fm in const.formulas]
    if len(keys) < 2:
        raise UsageError(f"{const.name} has only one formula; nothing to cross-check")
    main_key = const.formula(formula).key
    results = []
    for key in keys:
        extra = each(key) if each else {}
        results.append(extract(const.name, position, count, formula=key, **kwargs, **extra))
    main = next(r for r in results if r.formula == main_key)
    return CrossCheck(tuple(results), main)


def fast_path_position(formula: Formula) -> int:
    """Last position whose whole head sum runs on the compiled kernel (0 without one).

    Beyond it, the terms whose moduli ``q (m k + j)^s`` reach 2^63 go to the
    pure-Python path: still exact, but about ``backend.PURE_SLOWDOWN`` times slower per term.
    """
    series = series_of(formula)
    k = backend.kernel_k_limit(series)
    if k == 0:
        return 0
    # head terms k < K(d) with K(d) = (d - shift) // e + 1; all in range while K(d) <= k
    last_d = series.e * k - 1 + series.shift
    d_limit = min(last_d, backend.KERNEL_MAX_EXPONENT + series.shift)
    return max(0, d_limit // 4 + 1)


def hex_digits(constant: str | Formula, position: int, count: int = 16, *, formula: str | None = None) -> str:
    """Certified hex digits as a string (upper case).

    >>> hex_digits("pi", 1, 8)
    '243F6A88'
    """
    return extract(constant, position, count, formula=formula).digits


def leading_digits(constant: str | Formula, base: int, count: int) -> tuple[str, str]:
    """``(integer_part, digits)``: the certified first ``count`` digits after the point.

    Works in base 16 or 10 from an exact evaluation of the whole series, so it
    also gives the integer part, which digit extraction does not.

    >>> leading_digits("pi", 10, 10)
    ('3', '1415926535')
    """
    if base not in (10, 16):
        raise UsageError(f"base must be 10 or 16, got {base}")
    if not 1 <= count <= 2000:
        raise UsageError("leading_digits serves 1 to 2000 digits")
    if (
        isinstance(constant, str) and get_constant(constant).evaluation is not None
    ):  # no formula: evaluate in full
        from spotcheck.engine.full import leading

        return leading(get_constant(constant), base, count)
    _, f = resolve_formula(constant)
    series = series_of(f)
    bits = int(count * math.log2(base)) + 32
    while True:
        lo, hi = value_bounds(series, bits)
        # floor(C * base^count) from both ends; equal means certified.
        a = (lo * base**count) >> bits
        b = (hi * base**count) >> bits
        if a == b:
            sign = "-" if a < 0 else ""
            whole, frac = divmod(abs(a), base**count)
            digits = format(frac, "X") if base == 16 else str(frac)
            return sign + (format(whole, "X") if base == 16 else str(whole)), digits.zfill(count)
        if bits > 64 * count + 4096:
            raise CertificationError(f"could not certify {count} leading digits")
        bits += 64
