"""Shared terminal plumbing: consoles, styles, a lazily shown progress bar."""

from __future__ import annotations

import json
import sys
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

# Named styles, the only place colours are chosen.
STYLE_OK = "bold green"
STYLE_BAD = "bold red"
STYLE_WARN = "yellow"
STYLE_DIM = "dim"
STYLE_DIGITS = "bold cyan"

# A progress bar appears only for work that has run this long (seconds).
PROGRESS_DELAY = 1.0


def stdout_console() -> Any:
    from rich.console import Console

    class _PipeConsole(Console):
        def on_broken_pipe(self) -> None:
            # rich's default exits with code 1; the CLI ends with the verdict's code instead.
            raise BrokenPipeError

    return _PipeConsole(highlight=False, soft_wrap=True)


def stderr_console() -> Any:
    from rich.console import Console

    return Console(stderr=True, highlight=False, soft_wrap=True)


def plural(n: int, word: str, many: str | None = None) -> str:
    """``1 wrong digit``, ``2 wrong digits``.

    >>> plural(1, "run"), plural(3, "run"), plural(2, "prefix", "prefixes")
    ('1 run', '3 runs', '2 prefixes')
    """
    return f"{n:,} {word if n == 1 else (many or word + 's')}"


def emit_json(payload: dict[str, Any]) -> None:
    sys.stdout.write(json.dumps(payload, indent=2, sort_keys=False) + "\n")


def error_line(message: str) -> None:
    """The one-line error every user mistake gets (exit code 2 is the caller's)."""
    sys.stderr.write(f"error: {message}\n")


def warning_line(message: str) -> None:
    sys.stderr.write(f"warning: {message}\n")


def info_line(message: str) -> None:
    """A line for the user on stderr (stdout stays the result)."""
    sys.stderr.write(f"{message}\n")


ProgressCallback = Callable[[int, int], None]


@contextmanager
def progress_bar(description: str, *, enabled: bool = True) -> Iterator[ProgressCallback | None]:
    """Yield a ``callback(done, total)`` that draws a bar on stderr once work is slow.

    The bar is started only after :data:`PROGRESS_DELAY` seconds, so quick calls
    print nothing.  Yields ``None`` when disabled.
    """
    if not enabled:
        yield None
        return
    state: dict[str, Any] = {"bar": None, "task": None, "t0": time.monotonic()}

    def callback(done: int, total: int) -> None:
        if state["bar"] is None:
            if time.monotonic() - state["t0"] < PROGRESS_DELAY:
                return
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeElapsedColumn,
                TimeRemainingColumn,
            )

            bar = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                TextColumn("eta"),
                TimeRemainingColumn(),
                console=stderr_console(),
                transient=True,
            )
            bar.start()
            state["bar"] = bar
            state["task"] = bar.add_task(description, total=total)
            state["total"] = total
        if total != state.get("total"):
            # A new phase (e.g. the full comparison after the engine windows): its ETA
            # comes from its own measured rate, not from the phase before.
            state["bar"].reset(state["task"], total=total, completed=done)
            state["total"] = total
        state["bar"].update(state["task"], completed=done, total=total)

    try:
        yield callback
    finally:
        if state["bar"] is not None:
            state["bar"].stop()
