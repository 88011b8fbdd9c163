"""What ``spotcheck digits`` asks of the engine, planned in one call and run in another.

:func:`plan_digits` settles the formulas (one, or every formula of the constant
for a cross-check), each formula's checkpoint journal and its cost estimate,
before any work; :func:`run_digits` evaluates them.  A request that cannot be
served is a :class:`UsageError` naming the parameter that resolves it
(``parameter``), never a flag: the CLI names its options.

>>> plan = plan_digits("pi", 1, 8)
>>> plan.keys, plan.full
(['bellard'], False)
>>> run_digits(plan).main.digits
'243F6A88'
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from spotcheck.errors import UsageError

from .plan import CostEstimate

__all__ = ["DigitsPlan", "DigitsRun", "plan_digits", "run_digits"]


def _needs(message: str, parameter: str) -> UsageError:
    exc = UsageError(message)
    exc.parameter = parameter  # type: ignore[attr-defined]
    exc.value = None  # type: ignore[attr-defined]
    return exc


@dataclass
class DigitsPlan:
    """Everything settled before the first head sum: formulas, journals, estimates."""

    constant: str
    position: int
    count: int
    keys: list[str]
    """The formulas to evaluate (the first is the main one; several for a cross-check)."""
    cross_check: bool = False
    main: str = ""
    """The formula whose result is the main one (the default formula, or the one asked for)."""
    full: bool = False
    """The constant has no digit-extraction formula: its digits come from a full evaluation."""
    checkpoints: dict[str, Path | None] = field(default_factory=dict)
    auto_checkpoint: bool = False
    """The journals are the cache directory's (their folder may be made), not files the caller named."""
    estimates: dict[str, CostEstimate] = field(default_factory=dict)
    workers: int = 1
    cluster: Any = None


@dataclass
class DigitsRun:
    """What :func:`run_digits` gives: the main result, every formula's, and the exit code."""

    main: Any
    results: list[Any]
    exit_code: int


def plan_digits(
    constant: str,
    position: int,
    count: int,
    *,
    formula: str | None = None,
    cross_check: bool = False,
    checkpoint: str | None = None,
    workers: int = 1,
    cluster: Any = None,
) -> DigitsPlan:
    """Plan ``count`` certified hex digits of ``constant`` from ``position``.

    ``checkpoint``: ``"auto"`` (one journal per formula under the cache directory), a
    journal file (one formula only), or None.  Estimates are made for each formula with
    the journal and cluster in mind; whether to go ahead is the caller's choice
    (``CostEstimate.feasible``).
    """
    from spotcheck.formulas import get_constant

    from .api import check_request, default_checkpoint_path, estimate_cost

    check_request(position, count)
    const = get_constant(constant)
    if const.evaluation is not None:  # no digit-extraction formula: evaluated in full
        if cross_check or checkpoint is not None or cluster is not None:
            raise _needs(
                f"{const.name} is evaluated in full, not by digit extraction: a cross-check, a checkpoint "
                "and a cluster do not apply",
                "full_evaluation",
            )
        return DigitsPlan(const.name, position, count, [], full=True, workers=workers)
    keys = [f.key for f in const.formulas] if cross_check else [const.formula(formula).key]
    if cross_check and len(keys) < 2:
        raise _needs(f"{const.name} has only one formula; nothing to cross-check", "cross_check")
    if checkpoint is not None and checkpoint != "auto" and len(keys) > 1:
        raise _needs(
            "one checkpoint file serves one formula; use the automatic one with a cross-check", "checkpoint"
        )
    main = const.formula(formula).key
    plan = DigitsPlan(
        const.name,
        position,
        count,
        keys,
        cross_check,
        main,
        workers=workers,
        cluster=cluster,
        auto_checkpoint=checkpoint == "auto",
    )
    for key in keys:
        path: Path | None = None
        if checkpoint == "auto":
            path = default_checkpoint_path(const.name, position, count, formula=key)
        elif checkpoint is not None:
            path = Path(checkpoint)
        plan.checkpoints[key] = path
        plan.estimates[key] = estimate_cost(
            const.name,
            position,
            count,
            formula=key,
            workers=workers,
            cluster=cluster is not None,
            checkpoint=path is not None,
        )
    return plan


def run_digits(
    plan: DigitsPlan,
    *,
    block_progress: Callable[..., None] | None = None,
    on_formula: Callable[[str, Path | None], None] | None = None,
) -> DigitsRun:
    """Evaluate a plan.  ``on_formula(key, checkpoint)`` is called as each formula starts (so an
    interruption can say which journal holds its finished blocks)."""
    from .api import cross_check, extract

    if plan.full:
        result = extract(plan.constant, plan.position, plan.count)
        return DigitsRun(result, [result], 0)

    def per_formula(key: str) -> dict[str, Any]:
        if on_formula is not None:
            on_formula(key, plan.checkpoints[key])
        return {
            "checkpoint": True
            if plan.auto_checkpoint
            else plan.checkpoints[key],  # True: the folder may be made
            "block_progress": block_progress,
            "estimate": plan.estimates[key],
        }

    options: dict[str, Any] = {"workers": plan.workers, "cluster": plan.cluster}
    if plan.cross_check:
        checked = cross_check(
            plan.constant, plan.position, plan.count, formula=plan.main, each=per_formula, **options
        )
        return DigitsRun(checked.main, list(checked.results), checked.exit_code)
    key = plan.keys[0]
    result = extract(plan.constant, plan.position, plan.count, formula=key, **options, **per_formula(key))
    return DigitsRun(result, [result], 0)
