"""``verify``: the tail, the head, random windows and named positions against the engine."""

from __future__ import annotations

import random
import secrets
import time
from collections.abc import Sequence
from typing import Any

from spotcheck.digitfile import DigitFile
from spotcheck.errors import UsageError

from .common import (
    DEFAULT_WINDOW,
    HexOracle,
    Progress,
    clamp_window,
    integer_part_check,
    open_checked,
    run_plan,
)
from .results import FileFacts, VerifyResult, WindowCheck

__all__ = ["verify_file", "MAX_SAMPLES"]

MAX_SAMPLES = 100_000


def _seed(seed: int | None) -> int:
    return secrets.randbits(32) if seed is None else seed


def verify_file(
    path: str,
    *,
    base: int | None = None,
    constant: str | None = None,
    formula: str | None = None,
    samples: int = 8,
    seed: int | None = None,
    at: Sequence[int] = (),
    window: int = DEFAULT_WINDOW,
    budget: float | None = None,
    workers: int = 1,
    limit: int | None = None,
    ignore_labels: bool = False,
    labels: str | None = None,
    cluster: Any = None,
    checkpoint: bool = False,
    progress: Progress | None = None,
) -> VerifyResult:
    """Check a digit file's tail, head, ``samples`` random windows and the positions ``at``.

    Hexadecimal files are compared window by window with certified engine
    digits; decimal files go through radix conversion
    (:func:`spotcheck.checks.decimal.verify_decimal`).  ``cluster`` and
    ``checkpoint`` serve deep windows (see :func:`spotcheck.engine.api.extract`).
    """
    if not 0 <= samples <= MAX_SAMPLES:
        raise UsageError(f"samples must be between 0 and {MAX_SAMPLES}, got {samples}")
    if budget is not None and budget <= 0:
        raise UsageError(f"budget must be a positive number of seconds, got {budget}")
    seed = _seed(seed)
    df, facts = open_checked(
        path,
        base=base,
        constant=constant,
        formula=formula,
        limit=limit,
        ignore_labels=ignore_labels,
        labels=labels,
    )
    oracle = HexOracle(facts.constant, facts.formula, workers=workers, cluster=cluster, checkpoint=checkpoint)
    try:
        for p in at:
            if not 1 <= p <= facts.checked:
                raise UsageError(f"--at {p} is outside the file (digits 1..{facts.checked})")
        if facts.base == 10:
            from .decimal import verify_decimal

            return verify_decimal(
                df,
                facts,
                samples=samples,
                seed=seed,
                at=at,
                window=window,
                budget=budget,
                oracle=oracle,
                progress=progress,
            )
        return _verify_hex(df, facts, samples, seed, at, window, budget, oracle, progress)
    finally:
        df.close()


def _verify_hex(
    df: DigitFile,
    facts: FileFacts,
    samples: int,
    seed: int,
    at: Sequence[int],
    window: int,
    budget: float | None,
    oracle: HexOracle,
    progress: Progress | None,
) -> VerifyResult:
    t0 = time.perf_counter()
    w = clamp_window(window, facts.checked)
    rng = random.Random(seed)
    last_start = facts.checked - w + 1
    plan: list[tuple[str, int]] = [("head", 1), ("tail", last_start)]
    plan += [("user", p) for p in at]
    plan += sorted(("sample", rng.randint(1, last_start)) for _ in range(samples))
    checks: list[WindowCheck] = []
    ip = integer_part_check(facts)
    if ip is not None:
        checks.append(ip)

    def check(kind: str, position: int) -> None:
        checks.append(oracle.compare(df, kind, position, w))

    random_windows, interrupted = run_plan(plan, check, lambda: rng.randint(1, last_start), budget, progress)
    return VerifyResult(
        file=facts,
        checks=checks,
        method="digit extraction",
        seconds=time.perf_counter() - t0,
        evaluations=oracle.evaluations,
        interrupted=interrupted,
        window=w,
        seed=seed,
        tail_position=last_start,
        random_windows=random_windows,
    )
