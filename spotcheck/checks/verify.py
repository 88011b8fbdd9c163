"""``verify``: the tail, the head, random windows and named positions against the engine."""

from __future__ import annotations

import random
import secrets
import time
from collections.abc import Sequence

from spotcheck.errors import UsageError

from .common import DEFAULT_WINDOW, HexOracle, Progress, clamp_window, integer_part_check, open_checked
from .results import VerifyResult, WindowCheck
from .stats import false_match_chance, scattered_damage_bound

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
    progress: Progress | None = None,
) -> VerifyResult:
    """Check a digit file's tail, head, ``samples`` random windows and the positions ``at``.

    Hexadecimal files are compared window by window with certified engine
    digits; decimal files go through radix conversion
    (:func:`spotcheck.checks.decimal.verify_decimal`).
    """
    if not 0 <= samples <= MAX_SAMPLES:
        raise UsageError(f"samples must be between 0 and {MAX_SAMPLES}, got {samples}")
    if budget is not None and budget <= 0:
        raise UsageError(f"budget must be a positive number of seconds, got {budget}")
    seed = _seed(seed)
    df, facts = open_checked(
        path, base=base, constant=constant, formula=formula, limit=limit, ignore_labels=ignore_labels
    )
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
                workers=workers,
                progress=progress,
            )
        return _verify_hex(df, facts, samples, seed, at, window, budget, workers, progress)
    finally:
        df.close()


def _verify_hex(df, facts, samples, seed, at, window, budget, workers, progress) -> VerifyResult:  # type: ignore[no-untyped-def]
    t0 = time.perf_counter()
    w = clamp_window(window, facts.checked)
    oracle = HexOracle(facts.constant, facts.formula, workers=workers)
    rng = random.Random(seed)
    last_start = facts.checked - w + 1
    plan: list[tuple[str, int]] = [("head", 1), ("tail", last_start)]
    plan += [("user", p) for p in at]
    plan += sorted(("sample", rng.randint(1, last_start)) for _ in range(samples))
    checks: list[WindowCheck] = []
    ip = integer_part_check(facts)
    if ip is not None:
        checks.append(ip)
    interrupted = False
    random_windows = 0
    try:
        for i, (kind, p) in enumerate(plan):
            checks.append(oracle.compare(df, kind, p, w))
            random_windows += kind == "sample"
            if progress:
                progress(i + 1, len(plan))
        if budget is not None:
            # Draw more random windows while the next one is expected to fit.
            per = (time.perf_counter() - t0) / max(1, len(plan))
            while time.perf_counter() - t0 + per < budget:
                t1 = time.perf_counter()
                checks.append(oracle.compare(df, "sample", rng.randint(1, last_start), w, note="budget"))
                random_windows += 1
                per = max(per, time.perf_counter() - t1)
    except KeyboardInterrupt:
        interrupted = True
    clean_random = random_windows if all(c.match for c in checks) else 0
    return VerifyResult(
        file=facts,
        checks=checks,
        method="digit extraction",
        seconds=time.perf_counter() - t0,
        evaluations=oracle.evaluations,
        interrupted=interrupted,
        window=w,
        seed=seed,
        false_match_chance=false_match_chance(w, 16),
        tail_position=last_start,
        scattered_bound=scattered_damage_bound(clean_random),
        random_windows=random_windows,
    )
