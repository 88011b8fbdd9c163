"""``verify``: the tail, the head, random windows and named positions against the engine."""

from __future__ import annotations

import random
import secrets
import time
from typing import Any

from spotcheck.digitfile import DigitFile
from spotcheck.errors import UsageError

from .common import (
    HexOracle,
    Sampler,
    clamp_window,
    common_rows,
    needs,
    open_run,
    run_plan,
    sample_notes,
    with_run_facts,
)
from .full import is_full, verify_full
from .request import CheckRequest, make_request
from .results import FileFacts, Note, VerifyResult, WindowCheck

__all__ = ["verify_file", "MAX_SAMPLES", "DEFAULT_SAMPLES", "DEFAULT_FULL_BUDGET"]

MAX_SAMPLES = 100_000
DEFAULT_SAMPLES = 8  # random windows when none are asked for
# Seconds a full comparison may take before verify falls back to sampled
# windows.  A minute covers hex files of about 3*10^7 digits on a slow
# machine (the reference computation runs at roughly 10^6 hex digits per
# second); beyond that a full comparison is `scan`'s job.
DEFAULT_FULL_BUDGET = 60.0


def _seed(seed: int | None) -> int:
    return secrets.randbits(32) if seed is None else seed


def verify_file(path: str, request: CheckRequest | None = None, **options: Any) -> VerifyResult:
    """Check a digit file: every digit when a full comparison fits ``full_seconds``, else windows.

    ``request`` (a :class:`~spotcheck.checks.request.CheckRequest`) says what to
    check; ``options`` are its fields, for callers who would rather pass keywords.
    Hexadecimal files: the tail, the head and the positions ``at`` are
    compared with certified engine digits; then, when the estimated time of a
    full comparison with ``reference`` (Arb or MPFR) fits ``full_seconds``
    (:data:`DEFAULT_FULL_BUDGET` when None), every digit is compared with it (as
    ``scan`` does); otherwise ``samples`` random windows are drawn
    (:data:`DEFAULT_SAMPLES` when None; distinct, fewer in a short file), and
    more while ``sample_seconds`` allow.  The result records ``samples`` as
    asked (None: the default), so a report can say when they were not drawn.
    Decimal files go through radix conversion, which covers every digit
    (:func:`spotcheck.checks.decimal.verify_decimal`).  ``cluster`` and
    ``checkpoint`` serve deep windows: ``checkpoint`` is one journal file for
    every engine window of the check (a path, or True for the cache-directory
    file of :func:`spotcheck.checks.common.check_checkpoint_path`), whose path
    goes to ``on_checkpoint`` once it is open.
    """
    request = make_request(request, **options)
    samples = DEFAULT_SAMPLES if request.samples is None else request.samples
    if not 0 <= samples <= MAX_SAMPLES:
        raise UsageError(f"samples must be between 0 and {MAX_SAMPLES}, got {samples}")
    seed = _seed(request.seed)
    request = make_request(request, seed=seed)
    run = open_run(path, request)
    df, facts, oracle = run.df, run.facts, run.oracle
    with run:
        if is_full(facts.constant):  # no digit-extraction formula: every digit against Arb
            return verify_full(df, facts, progress=request.progress)
        for p in request.at:
            if not facts.first <= p <= facts.last:
                raise needs(f"position {p} is outside the file (digits {facts.first}..{facts.last})", "at", p)
        if facts.base == 10:
            from .decimal import verify_decimal

            return with_run_facts(
                run,
                verify_decimal(
                    df,
                    facts,
                    samples=samples,
                    asked=request.samples,
                    seed=seed,
                    at=request.at,
                    window=request.window,
                    sample_seconds=request.sample_seconds,
                    oracle=oracle,
                    progress=request.progress,
                ),
            )
        full = _full_fits(facts, request.reference, request.full_seconds_or(DEFAULT_FULL_BUDGET))
        return with_run_facts(
            run, _verify_hex(df, facts, request, samples, oracle, request.reference if full else None)
        )


def _full_fits(facts: FileFacts, reference: str, budget: float) -> bool:
    """Whether a full comparison is possible and its estimate fits ``budget`` seconds and memory."""
    from .reference import REFERENCES, memory_budget, supported
    from .scan import estimate_scan

    if reference not in REFERENCES:
        raise UsageError(f"unknown reference {reference!r} (choose from {', '.join(REFERENCES)})")
    if not supported(facts.constant) or budget <= 0:
        return False
    seconds, memory = estimate_scan(facts, reference)
    return seconds <= budget and memory <= memory_budget()


def _verify_hex(
    df: DigitFile,
    facts: FileFacts,
    request: CheckRequest,
    samples: int,
    oracle: HexOracle,
    full_reference: str | None,
) -> VerifyResult:
    t0 = time.perf_counter()
    asked, at, progress = request.samples, request.at, request.progress
    assert request.seed is not None
    seed = request.seed
    if full_reference is not None:
        from .reference import CHILD_DIGITS, warm_children

        if facts.checked >= CHILD_DIGITS:
            warm_children()  # the full comparison's child: its start overlaps the windows
    w = clamp_window(request.window, facts.checked)
    rng = random.Random(seed)
    first, last_start = facts.first, facts.last - w + 1
    # A file no longer than the window has one window: the tail.
    plan: list[tuple[str, int]] = [("head", first)] if last_start > first else []
    plan.append(("tail", last_start))
    plan += [("user", p) for p in dict.fromkeys(at) if p not in (first, last_start)]
    # Random windows: distinct, and none where a window is checked anyway.
    sampler = Sampler(rng, first, last_start, fixed=[where for _, where in plan])
    room: int | None = None
    if full_reference is None:
        room = sampler.room
        plan += [("sample", p) for p in sampler.batch(samples)]
    checks: list[WindowCheck] = []
    checks.extend(common_rows(facts))

    def check(kind: str, position: int) -> None:
        checks.append(oracle.compare(df, kind, position, w))

    random_windows, interrupted = run_plan(
        plan,
        check,
        sampler.draw,
        request.sample_seconds if full_reference is None else None,
        progress,
    )
    full_through, wrong, runs, evaluations = 0, None, None, oracle.evaluations
    rounded: int | None = None
    spans: list[tuple[int, int]] = []
    if full_reference is not None and not interrupted:
        from .scan import scan_open

        scan = scan_open(df, facts, reference=full_reference, progress=progress, threads=oracle.workers)
        interrupted = scan.interrupted
        full_through, wrong, evaluations = scan.full_through, scan.wrong_digits, evaluations + 1
        runs, rounded = scan.runs_total, scan.rounded_from
        spans = [(r.start, r.start + r.length - 1) for r in scan.runs]
        for run in scan.runs[:1]:
            checks.append(
                WindowCheck(
                    kind="full",
                    position=run.start,
                    expected=run.expected,
                    found=run.found,
                    match=False,
                    first_difference=run.start,
                    notes=(Note("first-of-wrong-runs", {"runs": scan.runs_total}),),
                )
            )
    return VerifyResult(
        file=facts,
        checks=checks,
        method="digit extraction",
        seconds=time.perf_counter() - t0,
        evaluations=evaluations,
        interrupted=interrupted,
        window=w,
        seed=seed,
        tail_position=last_start,
        random_windows=random_windows,
        samples_asked=asked,
        sample_room=room,
        notes=sample_notes(
            asked, samples, room, "window", reference=full_reference, compared=full_through > 0
        ),
        full_through_value=full_through,
        reference=full_reference,
        wrong_digits=wrong,
        wrong_runs=runs,
        wrong_spans=spans,
        rounded_from=rounded,
    )
