"""Layer 5b: the command line.  Each command parses, makes one library call, renders.

Every error a user can cause ends as one ``error:`` line on stderr and exit
code 2; a certified mismatch is exit code 1; all-match is 0.
"""

from __future__ import annotations

import importlib
import math
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Annotated, Any

import typer

from spotcheck import __version__
from spotcheck.errors import InfeasibleError, SpotcheckError


def _plain_metavars() -> None:
    """Show FILE, N and the like in the help as written, not ``{file}``, ``<str>`` or ``<bool>``.

    typer (with click >= 8.2) puts a required argument's name in braces in the
    usage line and its click type (``<str>``) beside it; every parameter here
    has a metavar of its own, and a flag takes no value.
    """
    import typer.core

    arg = typer.core.TyperArgument
    if not getattr(arg.make_metavar, "_spotcheck", False):
        original_metavar = arg.make_metavar

        def make_metavar(self: Any, *args: Any, **kwargs: Any) -> str:  # (ctx, *, usage) in typer 0.2x
            if self.metavar is not None:
                usage = kwargs.get("usage", False)
                return str(self.metavar) if self.required or not usage else f"[{self.metavar}]"
            result: str = original_metavar(self, *args, **kwargs)
            return result

        make_metavar._spotcheck = True  # type: ignore[attr-defined]
        setattr(arg, "make_metavar", make_metavar)  # noqa: B010 - typer versions type it differently
    for cls in (typer.core.TyperOption, typer.core.TyperArgument):
        original = getattr(cls, "display_type_rich", None)  # older typer: the type column
        if original is None or getattr(original, "_spotcheck", False):
            continue

        def display(self: Any, ctx: Any, _original: Any = original) -> str | None:
            if getattr(self, "is_flag", False) or isinstance(self, typer.core.TyperArgument):
                return None
            result: str | None = _original(self, ctx)
            return result

        display._spotcheck = True  # type: ignore[attr-defined]
        setattr(cls, "display_type_rich", display)  # noqa: B010 - typer versions type it differently


_plain_metavars()

WHOLE_NUMBER_FORMS = "1000000, 1,000,000, 1e6 or 10^6"
MAX_WHOLE_DIGITS = 40  # a position or count longer than this is a typing mistake, not a request


def parse_whole(text: str) -> int:
    """A position or count as people type it: ``1000000``, ``1,000,000``, ``1e6``, ``2.5e9``, ``10^6``.

    Raises ``ValueError`` with a sentence for the user when ``text`` is not a
    whole number (``1.5e0``, ``1e-3``) or not a number at all.

    >>> parse_whole("1e9"), parse_whole("10^9"), parse_whole("1,000,000"), parse_whole("2.5e3")
    (1000000000, 1000000000, 1000000, 2500)
    """
    import re
    from fractions import Fraction

    t = text.strip()
    if re.fullmatch(r"[+-]?\d{1,3}(,\d{3})+", t):
        t = t.replace(",", "")
    power = re.fullmatch(r"(\d+)\s*\^\s*(\d+)", t)
    if power:
        base, exp = int(power.group(1)), int(power.group(2))
        if base > 1 and exp * math.log10(base) > MAX_WHOLE_DIGITS:
            raise ValueError(f"{text} is too large")
        return int(base**exp)
    sci = re.fullmatch(r"[+-]?(\d[\d_]*(\.\d*)?|\.\d+)([eE]([+-]?\d+))?", t)
    if not sci:
        raise ValueError(f"{text!r} is not a whole number (write it as {WHOLE_NUMBER_FORMS})")
    if sci.group(4) is not None and abs(int(sci.group(4))) > MAX_WHOLE_DIGITS:
        raise ValueError(f"{text} is too large" if int(sci.group(4)) > 0 else f"{text} is not a whole number")
    value = Fraction(t)
    if value.denominator != 1:
        raise ValueError(f"{text} is {float(value):g}, not a whole number")
    return int(value)


def _click() -> Any:
    """The click typer builds on: its own copy (typer 0.2x vendors it) or the click package."""
    try:
        return importlib.import_module("typer._click.types")
    except ImportError:  # older typer: click itself
        return importlib.import_module("click.types")


_ParamType: Any = _click().ParamType


class _Whole(_ParamType):
    """The one parser of positions and counts on the command line (:func:`parse_whole`)."""

    name = "integer"

    def __init__(self, minimum: int | None = None) -> None:
        self.minimum = minimum

    def convert(self, value: Any, param: Any, ctx: Any) -> int:
        if isinstance(value, int) and not isinstance(value, bool):
            n = value
        else:
            try:
                n = parse_whole(str(value))
            except ValueError as exc:
                self.fail(str(exc), param, ctx)
        if self.minimum is not None and n < self.minimum:
            self.fail(f"must be {self.minimum} or more, got {value}", param, ctx)
        return n


WHOLE = _Whole()


class _Text(_ParamType):
    """A plain string argument whose metavar (FILE, NAME) is the whole of its help column."""

    name = "text"

    def get_metavar(self, param: Any, ctx: Any = None) -> str:
        return ""

    def convert(self, value: Any, param: Any, ctx: Any) -> str:
        return str(value)


TEXT = _Text()

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    context_settings={"help_option_names": ["-h", "--help"]},
    help="Spot-check digit files of mathematical constants with certified digit extraction.",
)

EXIT_OK, EXIT_MISMATCH, EXIT_BAD_INPUT = 0, 1, 2

FormulaFileOpt = Annotated[
    list[Path] | None,
    typer.Option("--formula-file", metavar="FILE", help="TOML file defining extra constants (repeatable)."),
]
JsonOpt = Annotated[
    bool, typer.Option("--json", help="Print one JSON object instead of the terminal report.")
]
QuietOpt = Annotated[
    bool,
    typer.Option(
        "--quiet", "-q", help="Print nothing: the exit code is the answer (errors still go to stderr)."
    ),
]
WorkersOpt = Annotated[
    int | None,
    typer.Option(
        "--workers",
        "-w",
        metavar="N",
        click_type=_Whole(minimum=1),
        help="Threads for the head sum (default: one per physical core).",
    ),
]


def _load_formula_files(paths: list[Path] | None) -> None:
    if paths:
        from spotcheck.formula_file import register_formula_file

        for p in paths:
            register_formula_file(p)


def _workers(n: int | None) -> int:
    if n is not None:
        return n
    from spotcheck.engine.cpus import physical_cores

    return physical_cores()


def _version_callback(value: bool) -> None:
    if value:
        from spotcheck.engine import backend

        print(f"spotcheck {__version__}")
        print(f"head-sum kernel: {backend.BACKEND_NOTE}")
        print(f"digit-file loops: {backend.digitfile_loops().note}")
        raise typer.Exit(0)


@app.callback()
def _root(
    version: Annotated[
        bool,
        typer.Option("--version", callback=_version_callback, is_eager=True, help="Show version and kernel."),
    ] = False,
) -> None:
    """Spot-check digit files of mathematical constants with certified digit extraction."""


CheckpointOpt = Annotated[
    str | None,
    typer.Option(
        "--checkpoint",
        metavar="FILE|auto",
        help="Keep finished head-sum blocks in FILE, one journal for every engine window the command "
        "evaluates; the same command resumes after an interruption. 'auto': a file under the user's "
        "cache directory named after the request (its path is printed).",
    ),
]


@app.command()
def digits(
    constant: Annotated[
        str,
        typer.Argument(metavar="NAME", click_type=TEXT, help="Constant name (see `spotcheck constants`)."),
    ],
    at: Annotated[
        int,
        typer.Option(
            "--at",
            metavar="POSITION",
            click_type=WHOLE,
            help="Position of the first digit (1 = first after the point; 1e9 and 10^9 work).",
        ),
    ] = 1,
    count: Annotated[
        int, typer.Option("--count", "-n", metavar="N", click_type=WHOLE, help="Number of hex digits.")
    ] = 16,
    formula: Annotated[
        str | None, typer.Option("--formula", metavar="KEY", help="Formula key (default: the fastest).")
    ] = None,
    cross_check_: Annotated[
        bool,
        typer.Option("--cross-check", help="Evaluate every formula of the constant; exit 1 if any disagree."),
    ] = False,
    formula_file: FormulaFileOpt = None,
    workers: WorkersOpt = None,
    checkpoint: CheckpointOpt = None,
    cluster: Annotated[
        str | None,
        typer.Option(
            "--cluster",
            metavar="ADDRESS",
            help="Run the head sum on a Dask scheduler, e.g. tcp://host:8786 (pip install 'spotcheck\\[cluster]').",
        ),
    ] = None,
    as_json: JsonOpt = False,
    quiet: Annotated[
        bool, typer.Option("--quiet", "-q", help="Print the digits alone (no estimate, no progress).")
    ] = False,
) -> None:
    """Print certified hexadecimal digits of constant NAME from position --at."""
    from spotcheck.engine.digits import plan_digits, run_digits
    from spotcheck.errors import UsageError
    from spotcheck.report.console import info_line, warning_line
    from spotcheck.report.digits import (
        ESTIMATE_SHOWN_SECONDS,
        TermProgress,
        estimate_line,
        full_evaluation_line,
        infeasible_line,
        interrupted_line,
        long_run_line,
        show_digits,
    )

    _load_formula_files(formula_file)
    plan = plan_digits(
        constant,
        at,
        count,
        formula=formula,
        cross_check=cross_check_,
        checkpoint=checkpoint,
        workers=_workers(workers),
        cluster=cluster,
    )
    talk = not (quiet or as_json)
    if plan.full:
        result = run_digits(plan).main
        if talk:
            info_line(full_evaluation_line(result))
        show_digits(result, None, as_json=as_json, quiet=quiet)
        return
    for key, est in plan.estimates.items():
        if talk and (est.cpu_seconds >= ESTIMATE_SHOWN_SECONDS or not est.feasible):
            info_line(estimate_line(est, key))
            longer = long_run_line(est)
            if longer is not None:
                info_line(longer)
        if not est.feasible:
            raise UsageError(infeasible_line(_refusal(plan.constant, est), est))
    for path in plan.checkpoints.values():
        if path is not None and talk:
            info_line(f"checkpoint: {path}")
    bar = TermProgress(f"{plan.constant} head sum", enabled=talk)
    current: dict[str, str | None] = {"checkpoint": None}

    def on_formula(key: str, path: Path | None) -> None:
        current["checkpoint"] = None if path is None else str(path)

    try:
        done = run_digits(plan, block_progress=bar, on_formula=on_formula)
    except KeyboardInterrupt:
        bar.close()
        info_line(interrupted_line(bar.last, current["checkpoint"]))
        raise typer.Exit(130) from None
    finally:
        bar.close()
    for r in done.results:
        for w in r.warnings:
            warning_line(w)
    show_digits(
        done.main,
        done.results if plan.cross_check else None,
        as_json=as_json,
        quiet=quiet,
        estimate=plan.estimates[done.main.formula],
    )
    if done.exit_code:
        raise typer.Exit(done.exit_code)


def _refusal(name: str, est: Any) -> str:
    from spotcheck.engine.api import refuse_if_infeasible

    try:
        refuse_if_infeasible(est, name)
    except SpotcheckError as exc:
        return str(exc)
    return ""


@app.command()
def constants(formula_file: FormulaFileOpt = None, as_json: JsonOpt = False) -> None:
    """List the constants and formulas available, with their published sources."""
    from spotcheck.formulas import all_constants
    from spotcheck.report.digits import show_constants

    _load_formula_files(formula_file)
    show_constants(all_constants(), as_json=as_json)


FileArg = Annotated[
    str,
    typer.Argument(
        metavar="FILE",
        click_type=TEXT,
        help="Digit file (plain, gzip, bzip2 or xz; hex or decimal); - reads standard input.",
    ),
]
ConstantOpt = Annotated[
    str | None,
    typer.Option(
        "--constant", "-c", metavar="NAME", help="Constant of the file (default: guessed from its digits)."
    ),
]
BaseOpt = Annotated[
    int | None,
    typer.Option("--base", metavar="10|16", help="Base of the file's digits, 10 or 16 (default: detected)."),
]
FormulaOpt = Annotated[
    str | None,
    typer.Option("--formula", metavar="KEY", help="Formula key for the engine (default: the fastest)."),
]
WindowOpt = Annotated[
    int, typer.Option("--window", metavar="N", click_type=WHOLE, help="Digits compared per check.")
]
LimitOpt = Annotated[
    int | None,
    typer.Option("--limit", metavar="N", click_type=WHOLE, help="Check only the first N digits of the file."),
]
ClusterOpt = Annotated[
    str | None,
    typer.Option(
        "--cluster",
        metavar="ADDRESS",
        help="Run the head sums on a Dask scheduler, e.g. tcp://host:8786 (pip install 'spotcheck\\[cluster]').",
    ),
]
IgnoreLabelsOpt = Annotated[
    bool,
    typer.Option(
        "--ignore-labels",
        help="Leave out the finding of position labels that disagree with the digit count (the digits "
        "are checked either way; exit 0 when they all match).",
    ),
]
LabelsOpt = Annotated[
    str | None,
    typer.Option(
        "--labels",
        metavar="start|end|both|none",
        help="Where position labels are when the layout cannot tell: start, end, both (each end) or none.",
    ),
]
BeginsAtOpt = Annotated[
    int | None,
    typer.Option(
        "--begins-at",
        metavar="POSITION",
        click_type=_Whole(minimum=1),
        help="Position in the expansion of the file's first digit, for a stretch that begins deeper "
        "than digit 1 (default: the file's start labels say, else 1).",
    ),
]
ReferenceOpt = Annotated[
    str,
    typer.Option(
        "--reference",
        metavar="arb|mpfr",
        help="Full-computation library for scans: arb (python-flint) or mpfr (gmpy2).",
    ),
]


def _base(base: int | None) -> int | None:
    if base not in (None, 10, 16):
        raise typer.BadParameter(f"base must be 10 or 16, got {base}", param_hint="--base")
    return base


def _checkpoint_printer(silent: bool) -> Callable[[str], None]:
    """Say which checkpoint file a check keeps (as ``digits`` does)."""

    def say(path: str) -> None:
        from spotcheck.report.console import info_line

        if not silent:
            info_line(f"checkpoint: {path}")

    return say


_typed_path: list[str] = []  # the FILE argument of the running command, as the user typed it


def _as_typed(message: str) -> str:
    """Name the file as the user typed it where a library message names it otherwise."""
    names = [os.path.basename(t) for t in _typed_path]
    for typed in reversed(_typed_path):  # compare has two files: the message names one of them
        others = [str(Path(typed)), os.path.realpath(typed)]  # realpath: a symlink loop stays unresolved
        if names.count(os.path.basename(typed)) == 1:  # a base name shared by both copies names neither
            others.append(os.path.basename(typed))
        for other in others:
            if other != typed and message.startswith(other + ":"):
                return typed + message[len(other) :]
    return message


def _seconds(value: float | None) -> float | None:
    """A time budget: a finite number of seconds, zero or more (nan and inf never end or mean nothing)."""
    if value is not None and not (math.isfinite(value) and value >= 0):
        raise typer.BadParameter(f"must be a finite number of seconds, zero or more (got {value})")
    return value


def _estimate_printer(silent: bool) -> Callable[[Any], None]:
    """Say what a check's deepest window will cost, when that is worth saying."""

    def say(est: Any) -> None:
        from spotcheck.report.console import info_line
        from spotcheck.report.digits import ESTIMATE_SHOWN_SECONDS, long_run_line, window_estimate_line

        if not silent and est.cpu_seconds >= ESTIMATE_SHOWN_SECONDS:
            info_line(window_estimate_line(est))
            longer = long_run_line(est)  # a window this machine takes over a year for
            if longer is not None:
                info_line(longer)

    return say


def _hint(exc: Exception) -> str:
    """The option that resolves a library error, named the way the user types it."""
    parameter = getattr(exc, "parameter", None) or getattr(exc, "choice", None)
    value = getattr(exc, "value", None)
    hints = {
        "constant": " (--constant NAME; `spotcheck constants` lists them)",
        "limit": f" (--limit {value})",
        "windows": "; use `spotcheck verify --budget 0` or `spotcheck locate` instead",
        "at": " (--at)",
        "verify_each": "; check each with `spotcheck verify`",
        "labels": " (--labels start|end|both|none)",
        "cross_check": " (--cross-check)",
        "checkpoint": " (--checkpoint auto)",
        "full_evaluation": " (leave out --cross-check, --checkpoint and --cluster)",
        "first_position": " (--begins-at POSITION)",
        "constant_or_first_position": " (--constant NAME; `spotcheck constants` lists them). If the file is a "
        "stretch that begins deeper in the expansion, give its first digit's position with --begins-at POSITION",
    }
    if isinstance(exc, InfeasibleError):  # what would bring it within reach, if anything
        from spotcheck.report.digits import infeasible_hint

        return infeasible_hint(exc.estimate)  # type: ignore[arg-type]
    return hints.get(parameter or "", "")


def _repeat(command: str, path: str, **options: Any) -> str:
    import shlex

    parts = ["spotcheck", command, shlex.quote(str(path))]
    for name, value in options.items():
        flag = "--" + name.replace("_", "-")
        if value is None or value is False:
            continue
        if value is True:
            parts.append(flag)
        elif isinstance(value, list | tuple):
            for v in value:
                parts += [flag, shlex.quote(str(v))]
        else:
            parts += [flag, shlex.quote(str(value))]
    return " ".join(parts)


def _repeat_from(ctx: Any, command: str, path: str, **chosen: Any) -> str:
    """A command line that repeats the run: the options the user gave, plus values chosen for them.

    Built from the parsed parameters, so every option of the command is
    covered; ``chosen`` adds values decided during the run (the random seed).
    """
    options: dict[str, Any] = {}
    for param in ctx.command.params:
        name = param.name
        if name is None or param.param_type_name != "option" or name in ("as_json", "quiet"):
            continue
        source = ctx.get_parameter_source(name)
        if name in chosen:
            options[name] = chosen[name]
        elif source is not None and source.name != "DEFAULT":
            options[name] = ctx.params.get(name)
    return _repeat(command, path, **options)


def _finish(result: Any, repeat: str, as_json: bool, quiet: bool) -> None:
    from spotcheck.report.checks import show_result

    code = result.exit_code
    if result.verdict == "incomplete":
        code = 130  # interrupted before anything was established
    try:
        show_result(result, repeat, as_json=as_json, quiet=quiet)
        sys.stdout.flush()
    except BrokenPipeError:  # `spotcheck verify FILE | head -1`: the reader has what it wanted
        _silence_stdout()
    raise typer.Exit(code)


def _silence_stdout() -> None:
    """Point stdout at /dev/null so that a closed pipe ends the program quietly."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):
        pass


def _run_check(ctx: Any, command: str, file: str, given: dict[str, Any], **only: Any) -> None:
    """What ``verify``, ``locate`` and ``scan`` share: one request from the options, one library
    call under a progress bar, the report and the exit code.  ``given`` holds the command's
    parameters; ``only`` the fields of this command alone (the seed it chose among them)."""
    from spotcheck.checks import CheckRequest, locate_file, scan_file, verify_file
    from spotcheck.report.console import progress_bar

    _typed_path.append(file)
    _load_formula_files(given.get("formula_file"))
    silent = bool(given.get("quiet") or given.get("as_json"))
    checkpoint = given.get("checkpoint")
    with progress_bar(command, enabled=not silent) as cb:
        request = CheckRequest(
            base=_base(given.get("base")),
            constant=given.get("constant"),
            formula=given.get("formula"),
            labels=given.get("labels"),
            ignore_labels=bool(given.get("ignore_labels")),
            first_position=given.get("begins_at"),
            limit=given.get("limit"),
            window=given.get("window", 16),
            full_seconds=given.get("budget"),
            reference=given.get("reference", "arb"),
            workers=_workers(given.get("workers")),
            cluster=given.get("cluster"),
            checkpoint=False if checkpoint is None else True if checkpoint == "auto" else checkpoint,
            progress=cb,
            on_estimate=_estimate_printer(silent),
            on_checkpoint=_checkpoint_printer(silent),
            **only,
        )
        check = {"verify": verify_file, "locate": locate_file, "scan": scan_file}[command]
        result = check(str(file), request)
    chosen = {"seed": only["seed"]} if "seed" in only else {}
    repeat = _repeat_from(ctx, command, file, **chosen)
    _finish(result, repeat, bool(given.get("as_json")), bool(given.get("quiet")))


@app.command()
def verify(
    ctx: typer.Context,
    file: FileArg,
    samples: Annotated[
        int | None,
        typer.Option(
            "--samples", "-s", metavar="N", click_type=WHOLE, help="Random windows to check (default 8)."
        ),
    ] = None,
    seed: Annotated[
        int | None,
        typer.Option("--seed", metavar="N", help="Seed for the random windows (printed either way)."),
    ] = None,
    at: Annotated[
        list[int] | None,
        typer.Option(
            "--at",
            metavar="POSITION",
            click_type=WHOLE,
            help="Also check the window at this position (repeatable; 1e9 and 10^9 work).",
        ),
    ] = None,
    budget: Annotated[
        float,
        typer.Option(
            "--budget",
            metavar="SECONDS",
            callback=_seconds,
            help="Compare every digit with a full computation when its estimate fits SECONDS "
            "(0: windows only); beyond it, sample windows.",
        ),
    ] = 60.0,
    sample_seconds: Annotated[
        float | None,
        typer.Option(
            "--sample-seconds",
            metavar="SECONDS",
            callback=_seconds,
            help="Keep drawing random windows for this many seconds.",
        ),
    ] = None,
    reference: ReferenceOpt = "arb",
    window: WindowOpt = 16,
    constant: ConstantOpt = None,
    base: BaseOpt = None,
    formula: FormulaOpt = None,
    limit: LimitOpt = None,
    ignore_labels: IgnoreLabelsOpt = False,
    labels: LabelsOpt = None,
    begins_at: BeginsAtOpt = None,
    formula_file: FormulaFileOpt = None,
    workers: WorkersOpt = None,
    cluster: ClusterOpt = None,
    checkpoint: CheckpointOpt = None,
    as_json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Check FILE: every digit when a full comparison fits --budget, else tail, head and random windows."""
    import secrets

    seed = secrets.randbits(32) if seed is None else seed
    _run_check(
        ctx,
        "verify",
        file,
        locals(),
        samples=samples,
        seed=seed,
        at=tuple(at or ()),
        sample_seconds=sample_seconds,
    )


@app.command()
def locate(
    ctx: typer.Context,
    file: FileArg,
    budget: Annotated[
        float,
        typer.Option(
            "--budget",
            metavar="SECONDS",
            callback=_seconds,
            help="Seconds a full comparison may take when the tail matches (0: none).",
        ),
    ] = 180.0,
    reference: ReferenceOpt = "arb",
    window: WindowOpt = 16,
    constant: ConstantOpt = None,
    base: BaseOpt = None,
    formula: FormulaOpt = None,
    limit: LimitOpt = None,
    ignore_labels: IgnoreLabelsOpt = False,
    labels: LabelsOpt = None,
    begins_at: BeginsAtOpt = None,
    formula_file: FormulaFileOpt = None,
    workers: WorkersOpt = None,
    cluster: ClusterOpt = None,
    checkpoint: CheckpointOpt = None,
    as_json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Find the first wrong digit of FILE (its position), with expected and found digits."""
    _run_check(ctx, "locate", file, locals())


@app.command()
def scan(
    ctx: typer.Context,
    file: FileArg,
    reference: ReferenceOpt = "arb",
    constant: ConstantOpt = None,
    base: BaseOpt = None,
    limit: LimitOpt = None,
    ignore_labels: IgnoreLabelsOpt = False,
    labels: LabelsOpt = None,
    begins_at: BeginsAtOpt = None,
    formula_file: FormulaFileOpt = None,
    workers: WorkersOpt = None,
    as_json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Compare every digit of FILE with an independent full computation."""
    _run_check(ctx, "scan", file, locals())


@app.command()
def inspect(
    file: FileArg,
    constant: ConstantOpt = None,
    base: BaseOpt = None,
    labels: LabelsOpt = None,
    begins_at: BeginsAtOpt = None,
    formula_file: FormulaFileOpt = None,
    as_json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Show what spotcheck detects in FILE: base, constant, layout, digit count, compression."""
    _typed_path.append(file)
    from spotcheck.digitfile import inspect_file
    from spotcheck.report.checks import show_inspect
    from spotcheck.report.console import progress_bar

    _load_formula_files(formula_file)
    with progress_bar("reading", enabled=not (as_json or quiet)) as cb:
        result = inspect_file(
            str(file),
            base=_base(base),
            constant=constant,
            progress=cb,
            labels=labels,
            first_position=begins_at,
        )
    if not quiet or as_json:
        show_inspect(result, as_json=as_json)  # findings are facts about the file: exit 0


@app.command()
def schema() -> None:
    """Print the JSON schema of the --json reports of verify, locate, scan and compare."""
    from spotcheck.checks.schema import REPORT_SCHEMA
    from spotcheck.report.console import emit_json

    emit_json(REPORT_SCHEMA)


@app.command()
def compare(
    file_a: Annotated[
        str,
        typer.Argument(
            metavar="A",
            click_type=TEXT,
            help="One copy (plain, gzip, bzip2 or xz; hex or decimal); - reads standard input.",
        ),
    ],
    file_b: Annotated[
        str,
        typer.Argument(
            metavar="B", click_type=TEXT, help="The other copy (any layout; - reads standard input)."
        ),
    ],
    constant: ConstantOpt = None,
    base: BaseOpt = None,
    formula: FormulaOpt = None,
    ignore_labels: IgnoreLabelsOpt = False,
    formula_file: FormulaFileOpt = None,
    workers: WorkersOpt = None,
    as_json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Compare two copies A and B digit by digit; certified digits say which is right where they differ."""
    import shlex

    from spotcheck.checks.compare import compare_files
    from spotcheck.report.compare import show_compare
    from spotcheck.report.console import progress_bar

    _typed_path.extend([str(file_a), str(file_b)])
    if file_a == file_b == "-":
        from spotcheck.errors import UsageError

        raise UsageError("both copies are standard input (-): pipe one copy in and name the other file")
    _load_formula_files(formula_file)
    with progress_bar("compare", enabled=not (quiet or as_json)) as cb:
        result = compare_files(
            str(file_a),
            str(file_b),
            base=_base(base),
            constant=constant,
            formula=formula,
            ignore_labels=ignore_labels,
            workers=_workers(workers),
            progress=cb,
        )
    repeat = _repeat(
        "compare",
        str(file_a),
        constant=constant,
        base=base,
        formula=formula,
        ignore_labels=ignore_labels,
        formula_file=formula_file,
    ).replace(shlex.quote(str(file_a)), shlex.quote(str(file_a)) + " " + shlex.quote(str(file_b)), 1)
    show_compare(result, repeat, as_json=as_json, quiet=quiet)
    code = result.exit_code
    if code == EXIT_OK and result.interrupted:
        code = 130
    raise typer.Exit(code)


def _warn_if_no_kernel() -> None:
    from spotcheck.engine import backend

    if backend.BACKEND != "c" and "SPOTCHECK_PURE" not in os.environ:
        from spotcheck.report.console import warning_line
        from spotcheck.report.digits import slower_phrase

        warning_line(f"running on the {backend.BACKEND_NOTE}, {slower_phrase()}")


def run(argv: list[str] | None = None) -> int:
    """Run the CLI on ``argv`` and return the exit code (no ``sys.exit``)."""
    from spotcheck.report.console import error_line

    command = typer.main.get_command(app)
    _typed_path.clear()
    args = list(sys.argv[1:] if argv is None else argv)
    if not args:
        args = ["--help"]  # bare `spotcheck`: the help, exit 0
    if args and args[0] in ("digits", "verify", "locate", "scan", "compare"):
        _warn_if_no_kernel()
    previous = _sigterm_as_interrupt()
    try:
        rv: Any = command.main(args=args, prog_name="spotcheck", standalone_mode=False)
    except SpotcheckError as exc:
        text = str(exc) + _hint(exc)
        if isinstance(exc, OSError) and exc.strerror:
            text = f"{exc.filename}: {exc.strerror}" if exc.filename else exc.strerror
        error_line(_as_typed(text))
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        error_line("interrupted")
        return 130
    except BrokenPipeError:  # output closed early (`| head`): end quietly
        _silence_stdout()
        return EXIT_OK
    except Exception as exc:  # typer/click usage errors carry exit_code and format_message
        if hasattr(exc, "format_message") and hasattr(exc, "exit_code"):
            error_line(exc.format_message())
            return EXIT_BAD_INPUT
        if type(exc).__name__ == "Abort":
            error_line("aborted")
            return 130
        raise
    finally:
        if previous is not None:
            import signal

            signal.signal(signal.SIGTERM, previous)
    return rv if isinstance(rv, int) else EXIT_OK


def _sigterm_as_interrupt() -> Any:
    """SIGTERM stops a command the way Ctrl-C does (it reports what it established); returns the old handler."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None

    def on_term(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    return signal.signal(signal.SIGTERM, on_term)


def main() -> None:
    sys.exit(run())


if __name__ == "__main__":
    main()
