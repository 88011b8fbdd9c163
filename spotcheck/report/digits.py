"""Rendering of `spotcheck digits` and `spotcheck constants`."""

from __future__ import annotations

import time
from typing import Any

from spotcheck.engine.api import CostEstimate, DigitResult, fast_path_position
from spotcheck.engine.backend import PURE_SLOWDOWN
from spotcheck.formulas import Constant
from spotcheck.report.console import (
    PROGRESS_DELAY,
    STYLE_BAD,
    STYLE_DIGITS,
    STYLE_DIM,
    STYLE_OK,
    emit_json,
    plural,
    stderr_console,
    stdout_console,
)

# The estimate is printed (outside --json) when the run is expected to take
# at least this many seconds.
ESTIMATE_SHOWN_SECONDS = 2.0


def duration(seconds: float) -> str:
    """A rough human duration: 45 s, 12 min, 3.5 h, 4.2 days, 3.6 years."""
    if seconds < 90:
        return f"{seconds:.0f} s" if seconds >= 1 else f"{seconds:.2f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    if seconds < 2 * 86400:
        return f"{seconds / 3600:.1f} h"
    if seconds < 2 * 365.25 * 86400:
        return f"{seconds / 86400:.1f} days"
    return f"{seconds / (365.25 * 86400):.3g} years"


def slower_phrase() -> str:
    """How much slower the pure-Python path is, in the one figure the project states."""
    return f"about {PURE_SLOWDOWN} times slower per term than the compiled kernel"


def estimate_line(est: CostEstimate, formula: str) -> str:
    """One line: what the run will cost, on which path and why."""
    path = {
        "compiled": "compiled kernel",
        "twin": f"pure-Python path ({slower_phrase()})",
        "compiled+twin": f"compiled kernel, then the pure-Python path ({slower_phrase()}) "
        f"for {est.twin_terms / est.terms:.0%} of the terms",
    }[est.path]
    why = f" because {est.why}" if est.why and est.path != "compiled" else ""
    wall = f", about {duration(est.wall_seconds)} on {est.workers} workers" if est.workers > 1 else ""
    return (
        f"estimate [{formula}]: {est.terms:,} head terms in {est.blocks:,} blocks, "
        f"about {duration(est.cpu_seconds)} of CPU time{wall}, {est.memory_bytes / 2**20:.0f} MiB of memory; "
        f"path: {path}{why}"
    )


def window_estimate_line(est: CostEstimate) -> str:
    """The cost of a check's deepest engine window, said before the check starts."""
    return f"deepest window (position {est.position:,}): " + estimate_line(est, "tail").split(": ", 1)[1]


def infeasible_line(message: str, est: CostEstimate) -> str:
    """The refusal of a position beyond reach, with what would make it feasible (CLI wording)."""
    return message + infeasible_hint(est)


def infeasible_hint(est: CostEstimate) -> str:
    """What would bring a refused request within reach: a cluster of a size the estimate computed, or nothing.

    A cluster is named only with the cores that would finish the head sum in
    about a year (``CostEstimate.cluster_cores``), never as a cure in general.
    """
    if est.hint == "cluster" and est.cluster_cores is not None:
        return "; " + _cluster_offer(est, est.cluster_cores)
    from spotcheck.engine.cluster import MAX_IN_FLIGHT

    return (
        f"; no option makes it feasible (a Dask cluster keeps at most {MAX_IN_FLIGHT:,} cores busy: "
        f"about {duration(est.cpu_seconds / MAX_IN_FLIGHT)})"
    )


def _cluster_offer(est: CostEstimate, cores: int) -> str:
    return (
        f"a Dask cluster of about {cores:,} {'core' if cores == 1 else 'cores'} (--cluster ADDRESS) would "
        "finish the head sum in about "
        f"{duration(est.cpu_seconds / cores)}"
    )


def long_run_line(est: CostEstimate) -> str | None:
    """For a run this machine would take more than a year over: what a cluster of which size would take."""
    if est.cluster_cores is None or not est.feasible:
        return None
    return (
        f"this run would take about {duration(est.wall_seconds)} on {plural_workers(est.workers)}; "
        + _cluster_offer(est, est.cluster_cores)
    )


def plural_workers(n: int) -> str:
    return f"{n:,} worker" if n == 1 else f"{n:,} workers"


def interrupted_line(progress: Any, checkpoint: str | None) -> str:
    """What an interrupted run finished, and where it is kept."""
    if progress is None:
        done = "no head-sum block was finished"
    else:
        done = (
            f"{progress.done:,} of {progress.total:,} head-sum blocks finished "
            f"({progress.computed:,} computed in this run, {progress.resumed:,} loaded from the checkpoint)"
        )
    if checkpoint:
        return f"interrupted: {done}; they are kept in {checkpoint}: run the same command to resume"
    return f"interrupted: {done}; without a checkpoint they are lost"


class TermProgress:
    """A ``callback(BlockProgress)`` drawing terms done over terms to do on stderr.

    Loaded blocks are counted apart (they cost nothing), so the ETA is the
    terms left over this run's own rate.  It appears only after
    ``PROGRESS_DELAY`` seconds; a new line for each window and precision.
    ``last`` is the latest progress seen (for the interruption message).
    """

    def __init__(self, description: str, *, enabled: bool = True) -> None:
        self.description = description
        self.enabled = enabled
        self.last: Any = None
        self._bar: Any = None
        self._task: Any = None
        self._window: tuple[int, int] | None = None
        self._t0 = time.monotonic()

    def __call__(self, p: Any) -> None:
        self.last = p
        if not self.enabled:
            return
        if self._bar is None:
            if time.monotonic() - self._t0 < PROGRESS_DELAY:
                return
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            self._bar = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                TextColumn("{task.fields[note]}"),
                TimeElapsedColumn(),
                TextColumn("eta {task.fields[eta]}"),
                console=stderr_console(),
                transient=True,
            )
            self._bar.start()
        if self._window != (p.d, p.words):
            self._window = (p.d, p.words)
            self._task = self._bar.add_task(self.description, total=p.terms_total, note="", eta="")
        note = f"{p.terms_done / max(p.terms_total, 1):.1%} of {p.terms_total:,} terms"
        if p.terms_loaded:
            note += f" ({p.terms_loaded:,} loaded)"
        eta = "-:--:--" if p.eta is None else _clock(p.eta)
        self._bar.update(self._task, completed=p.terms_done, total=p.terms_total, note=note, eta=eta)

    def close(self) -> None:
        if self._bar is not None:
            self._bar.stop()
            self._bar = None


def _clock(seconds: float) -> str:
    if seconds > 99 * 3600:
        return duration(seconds)
    s = int(seconds + 0.5)
    return f"{s // 3600}:{s // 60 % 60:02d}:{s % 60:02d}"


def group(digits: str, size: int = 8) -> str:
    return " ".join(digits[i : i + size] for i in range(0, len(digits), size))


def digits_payload(
    result: DigitResult, cross: list[DigitResult] | None, estimate: CostEstimate | None = None
) -> dict[str, Any]:
    out = result.to_dict()
    if estimate is not None:
        out["estimate"] = estimate.to_dict()
    if cross is not None:
        out["cross_check"] = {
            "agree": all(r.digits == result.digits for r in cross),
            "formulas": {r.formula: r.digits for r in cross},
        }
    return out


def terms_summary(result: DigitResult) -> str:
    """``N terms in S s (compiled kernel)``, computed and loaded terms apart after a resume, or the
    full evaluation's time (it has no head terms)."""
    if result.backend not in ("c", "python"):  # a full evaluation (Arb): no terms to count
        return f"evaluated in full in {result.seconds:.3f} s"
    path = "compiled kernel" if result.backend == "c" else "pure-Python path"
    if not result.terms_loaded:
        return f"{plural(result.terms, 'term')} in {result.seconds:.3f} s ({path})"
    return (
        f"{result.terms:,} terms: {result.terms_computed:,} computed in {result.seconds:.3f} s, "
        f"{result.terms_loaded:,} loaded from the checkpoint ({result.blocks_loaded:,} blocks) ({path})"
    )


def full_evaluation_line(result: DigitResult) -> str:
    """Say that digits of a constant with no extraction formula come from a full evaluation."""
    return (
        f"{result.constant} has no digit-extraction formula: every digit up to position "
        f"{result.position + result.count - 1:,} was computed ({result.formula_notation})"
    )


def show_digits(
    result: DigitResult,
    cross: list[DigitResult] | None,
    *,
    as_json: bool,
    quiet: bool,
    estimate: CostEstimate | None = None,
) -> None:
    if as_json:
        emit_json(digits_payload(result, cross, estimate))
        return
    if quiet:
        print(result.digits)
        return
    con = stdout_console()
    con.print(result.digits, style=STYLE_DIGITS)
    con.print(
        f"{result.constant}, hex digits {result.position}..{result.position + result.count - 1} "
        f"(digit 1 is the first after the point)",
        style=STYLE_DIM,
    )
    con.print(
        f"formula {result.formula}: {result.formula_notation}; certified by an interval of width "
        f"2^{result.width_log2:.1f} at {result.fraction_bits} fractional bits; "
        f"{terms_summary(result)}",
        style=STYLE_DIM,
    )
    if cross is not None:
        agree = all(r.digits == result.digits for r in cross)
        names = ", ".join(r.formula for r in cross)
        if agree:
            con.print(f"cross-check: formulas {names} agree", style=STYLE_OK)
        else:
            con.print("cross-check FAILED: the formulas disagree", style=STYLE_BAD)
            for r in cross:
                con.print(f"  {r.formula:>10}  {group(r.digits)}")


def _evaluation(c: Constant) -> dict[str, Any] | None:
    ev = c.evaluation
    if ev is None:
        return None
    return {"key": ev.key, "notation": ev.notation(), "arb": ev.arb, "mpfr": ev.mpfr, "source": ev.source}


def constants_payload(constants: list[Constant]) -> dict[str, Any]:
    return {
        "constants": [
            {
                "name": c.name,
                "title": c.title,
                "origin": c.origin,
                "aliases": list(c.aliases),
                "method": c.method,
                "default_formula": c.method_key(),
                "evaluation": _evaluation(c),
                "formulas": [
                    {
                        "key": f.key,
                        "notation": f.notation(),
                        "terms_per_bit": round(f.cost_per_bit, 4),
                        "fast_path_up_to_position": fast_path_position(f),
                        "source": f.source,
                    }
                    for f in c.formulas
                ],
            }
            for c in constants
        ]
    }


def show_constants(constants: list[Constant], *, as_json: bool) -> None:
    if as_json:
        emit_json(constants_payload(constants))
        return
    con = stdout_console()
    for c in constants:
        origin = "" if c.origin == "built-in" else f"  [{STYLE_DIM}](from {c.origin})[/]"
        aliases = f"  [{STYLE_DIM}]also: {', '.join(c.aliases)}[/]" if c.aliases else ""
        con.print(f"[bold]{c.name}[/]  {c.title}{aliases}{origin}")
        if c.evaluation is not None:
            con.print(f"  {c.evaluation.key}: {c.evaluation.notation()}")
            con.print(f"    [{STYLE_DIM}]no digit-extraction formula: every request evaluates it in full[/]")
            con.print(f"    [{STYLE_DIM}]source: {c.evaluation.source}[/]")
            continue
        default = c.formula().key
        for f in c.formulas:
            label = f"{f.key} (default)" if f.key == default and len(c.formulas) > 1 else f.key
            fast = fast_path_position(f)
            reach = f"compiled kernel up to position {fast:.3g}" if fast else "pure-Python path only"
            con.print(f"  {label}: {f.notation()}")
            con.print(f"    [{STYLE_DIM}]{f.cost_per_bit:.2f} terms per bit; {reach}[/]")
            con.print(f"    [{STYLE_DIM}]source: {f.source}[/]")
