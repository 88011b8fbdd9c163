"""What every check needs: the file opened, the constant settled, an engine oracle."""

from __future__ import annotations

import os
import random
import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

from spotcheck.digitfile import DigitFile, open_digit_file
from spotcheck.engine.api import (
    checkpoint_request,
    estimate_cost,
    extract,
    leading_digits,
    refuse_if_infeasible,
    resolve_formula,
)
from spotcheck.engine.journal import Journal, request_path
from spotcheck.engine.plan import CostEstimate
from spotcheck.errors import UsageError
from spotcheck.formulas import get_constant

from .request import DEFAULT_WINDOW as DEFAULT_WINDOW
from .request import CheckRequest
from .results import FileFacts, LabelFinding, LocateResult, Note, VerifyResult, WindowCheck
from .slices import START_AGAIN, Placed, settle

Progress = Callable[[int, int], None]
Plan = list[tuple[str, int]]

# --- tuning -----------------------------------------------------------------
MAX_WINDOW = 64
FINGERPRINT_BYTES = 1 << 20  # stored bytes hashed at each end of a file to name it in a journal
# ---------------------------------------------------------------------------


def open_checked(path: str, request: CheckRequest) -> tuple[DigitFile, FileFacts]:
    """Open a digit file and settle the constant and the first position (:func:`open_placed`)."""
    df, facts, _ = open_placed(path, request)
    return df, facts


def open_placed(path: str, request: CheckRequest) -> tuple[DigitFile, FileFacts, Placed]:
    """Open a digit file and settle the constant, or raise :class:`UsageError`.

    ``request.limit`` restricts every check to the first ``limit`` digits.  Position
    labels that disagree with the real digit count are damage (digits were
    lost or gained, or a label was changed): the digits are read and checked
    all the same, and the first such label becomes ``FileFacts.label_finding``
    unless ``ignore_labels``.  The file may begin deeper in the expansion
    (``request.first_position``, or its labels): :func:`spotcheck.checks.slices.settle`
    places it, and ``FileFacts.first`` is its first digit's position.
    """
    limit = request.limit
    df = open_digit_file(
        path,
        base=request.base,
        constant=request.constant,
        strict_labels=False,
        labels=request.labels,
        first_position=request.first_position,
    )
    try:
        if df.count < 1:
            raise UsageError(f"{path}: no digits after the point")
        placed = settle(df, request, str(path))
        if placed.how == START_AGAIN:
            df.close()
            df = open_digit_file(
                path,
                base=request.base,
                constant=request.constant,
                strict_labels=False,
                labels=request.labels,
                first_position=1,
            )
            placed = Placed(placed.constant, 1, "start")
        if placed.constant is None:
            if placed.how == "start" and df.integer_part is None:  # it may be a stretch from deeper in
                raise needs(f"{path}: {df.constant_how}", "constant_or_first_position")
            raise needs(f"{path}: {df.constant_how}", "constant")
    except BaseException:
        df.close()
        raise
    const = get_constant(placed.constant)
    facts = FileFacts(
        path=str(path),
        size_bytes=df.size_bytes,
        base=df.base,
        count=df.count,
        checked=min(df.count, limit) if limit else df.count,
        constant=const.name,
        constant_how=placed.constant_how or df.constant_how,
        formula=const.method_key(request.formula),
        compression=df.compression,
        integer_part=df.integer_part,
        label_finding=None if request.ignore_labels else first_label_finding(df, placed.first),
        first=placed.first,
        first_how=placed.how,
    )
    return df, facts, placed


LABEL_KINDS = ("label-mismatch", "label-missing")


def first_label_finding(df: DigitFile, first: int = 1) -> LabelFinding | None:
    """The first label finding of an opened file (by line), with the count of all of them; its
    position counted from the expansion's start (the file's first digit is digit ``first``)."""
    found = [f for f in df.findings if f.kind in LABEL_KINDS and f.line is not None]
    if not found:
        return None
    found_at = min(found, key=lambda f: f.line or 0)
    return LabelFinding(
        kind=found_at.kind,
        line=found_at.line,
        byte_offset=found_at.byte_offset,
        position=None if found_at.position is None else found_at.position + first - 1,
        expected=getattr(found_at, "expected", None),
        found=getattr(found_at, "found", None),
        total=len(found),
        end=getattr(found_at, "end", None),
    )


def needs(message: str, parameter: str, value: object = None) -> UsageError:
    """A :class:`UsageError` that says which parameter would resolve it (the CLI names the option).

    >>> exc = needs("x: no constant recognised", "constant")
    >>> str(exc), exc.parameter, exc.value
    ('x: no constant recognised', 'constant', None)
    """
    exc = UsageError(message)
    exc.parameter = parameter  # type: ignore[attr-defined]
    exc.value = value  # type: ignore[attr-defined]
    return exc


def integer_part_check(facts: FileFacts) -> WindowCheck | None:
    """Compare the file's integer part (if it has one) with the constant's."""
    if facts.integer_part is None:
        return None
    expected, _ = leading_digits(facts.constant, facts.base, 1)
    found = facts.integer_part.upper().lstrip("0") or "0"
    return WindowCheck(
        kind="integer-part",
        position=0,
        expected=expected,
        found=facts.integer_part,
        match=found == expected,
        notes=(Note("integer-part"),),
        base=facts.base,
    )


def common_rows(facts: FileFacts) -> list[WindowCheck]:
    """The rows every check report starts with: the integer part's comparison, when the file has one."""
    ip = integer_part_check(facts)
    return [] if ip is None else [ip]


@dataclass
class CheckRun:
    """One check's set-up: the opened file, its facts and the engine oracle.  Closes the file on exit."""

    df: DigitFile
    facts: FileFacts
    oracle: HexOracle
    estimate: CostEstimate | None = None
    """What the deepest engine window (the tail's) costs, for hex files of a formula constant."""

    def __enter__(self) -> CheckRun:
        return self

    def __exit__(self, kind: object, *exc: object) -> None:
        self.df.close()
        if self.oracle.journal is not None:  # compacted unless an error is on its way out
            self.oracle.journal.close(compact=kind is None)


def open_run(path: str, request: CheckRequest) -> CheckRun:
    """Open a file for a check (:func:`open_checked`) with an oracle for its constant and formula.

    For a hex file the cost of its deepest window (the tail's) is estimated
    before any work and handed to ``on_estimate``; a file whose tail cannot
    be evaluated in any reasonable time is refused (:class:`InfeasibleError`).
    ``request.checkpoint`` (a file path, or True for :func:`check_checkpoint_path`)
    is one journal for every engine window of the check, opened (or refused,
    :class:`CheckpointError`) here, before any work; its path goes to
    ``request.on_checkpoint``.
    """
    df, facts, placed = open_placed(path, request)
    workers, cluster, checkpoint = request.workers, request.cluster, request.checkpoint
    journal: Journal | None = None
    try:
        estimate = tail_estimate(
            facts, workers=workers, cluster=cluster is not None, checkpoint=bool(checkpoint)
        )
        if checkpoint and get_constant(facts.constant).evaluation is None:
            keyed = check_checkpoint_request(facts)  # reads the file's ends once
            path = check_checkpoint_path(facts, keyed) if checkpoint is True else str(checkpoint)
            journal = check_journal(path, facts, keyed, create_folder=checkpoint is True)
    except BaseException:
        df.close()
        raise
    oracle = HexOracle(
        facts.constant,
        facts.formula,
        workers=workers,
        cluster=cluster,
        journal=journal,
        origin=facts.first - 1,
    )
    if placed.engine_digits:  # certified digits at the first position, computed to place the file
        oracle.held(facts.first, placed.engine_digits)
    if estimate is not None and request.on_estimate is not None:
        request.on_estimate(estimate)
    if journal is not None and request.on_checkpoint is not None:
        request.on_checkpoint(str(journal.path))
    return CheckRun(df, facts, oracle, estimate)


def file_fingerprint(path: str) -> str:
    """What names a file in a check's journal: SHA-256 (first 32 hex digits) of its size and of its
    first and last ``FINGERPRINT_BYTES`` stored bytes, read from the file as it lies on disk (read only).

    It does not change when the file is moved, renamed or copied; a journal never holds anything
    but the constant's own head-sum blocks, so the fingerprint keeps journals apart and cannot make
    a verdict wrong even where two files share it.
    """
    import hashlib

    from spotcheck.digitfile.source import local_path

    with open(local_path(path), "rb") as f:  # "-": the copy of standard input
        size = os.fstat(f.fileno()).st_size
        h = hashlib.sha256(b"%d\n" % size)
        h.update(f.read(FINGERPRINT_BYTES))
        f.seek(max(FINGERPRINT_BYTES, size - FINGERPRINT_BYTES))
        h.update(f.read(FINGERPRINT_BYTES))
    return h.hexdigest()[:32]


def check_checkpoint_request(facts: FileFacts) -> dict[str, Any]:
    """What a check's journal is keyed by: the constant, its formula (with its coefficients) and the file.

    The file is named by its fingerprint (:func:`file_fingerprint`), size in bytes
    and the digits under check, so a journal made for another file (or a ``digits``
    journal) is refused, never mixed in, and a moved or renamed file resumes its own.
    """
    request = _formula_request(facts)
    request["file"] = {
        "fingerprint": file_fingerprint(facts.path),
        "size_bytes": facts.size_bytes,
        "checked": facts.checked,
    }
    return request


def _formula_request(facts: FileFacts) -> dict[str, Any]:
    name, f = resolve_formula(facts.constant, facts.formula)
    request = checkpoint_request(name, f, 1, 1)
    del request["position"], request["count"]
    return request


def _legacy_request(facts: FileFacts) -> dict[str, Any]:
    """The request journals written before 2026-12-03 carry: the file named by its absolute path."""
    request = _formula_request(facts)
    request["file"] = {
        "path": os.path.abspath(facts.path),
        "size_bytes": facts.size_bytes,
        "checked": facts.checked,
    }
    return request


def check_checkpoint_path(facts: FileFacts, request: dict[str, Any] | None = None) -> str:
    """The journal ``checkpoint=True`` (``--checkpoint auto``) uses for a check: the cache-directory rule of
    :func:`spotcheck.engine.journal.request_path`, labelled by constant, formula and the digits under check
    (not the file's name, so that a renamed file finds its journal).  A journal an earlier version made
    for this file under its own name is used when there is no other.  ``request``: the check's
    :func:`check_checkpoint_request`, when the caller has it."""
    label = f"{facts.constant}-{facts.formula}-n{facts.checked}"
    path = request_path(label, request if request is not None else check_checkpoint_request(facts))
    if not os.path.exists(path):  # never raises: a path that cannot be looked at is the journal's to refuse
        old = _legacy_auto_path(facts)
        if os.path.exists(old):
            return str(old)
    return str(path)


def _legacy_auto_path(facts: FileFacts) -> Path:
    """Where ``--checkpoint auto`` kept a check's journal before 2026-12-03 (named after the file)."""
    label = f"{facts.constant}-{facts.formula}-{os.path.basename(facts.path)}-n{facts.checked}"
    return request_path(label, _legacy_request(facts))


def check_journal(
    path: str, facts: FileFacts, request: dict[str, Any] | None = None, *, create_folder: bool = False
) -> Journal:
    """The one journal of a check's engine windows (opened, or refused before any work); a journal
    written by an earlier version for this same file, under its path, is taken too.  ``create_folder``:
    make a missing folder (the cache folder of ``checkpoint=True``); else a missing folder is refused."""
    from spotcheck.engine.series import series_of

    _, f = resolve_formula(facts.constant, facts.formula)
    if request is None:
        request = check_checkpoint_request(facts)
    return Journal(path, series_of(f), request, also=(_legacy_request(facts),), create_folder=create_folder)


ResultT = TypeVar("ResultT", VerifyResult, LocateResult)


def with_run_facts(run: CheckRun, result: ResultT) -> ResultT:
    """``result`` with what the run itself knows: the tail-window estimate (hex files, for the
    JSON report) and the checkpoint journal's warnings (damaged records skipped, a failed write)."""
    if run.estimate is not None and hasattr(result, "tail_estimate"):
        result.tail_estimate = run.estimate.to_dict()
    facts = run.facts
    if (
        facts.first_how == "start"
        and facts.integer_part is None
        and run.estimate is not None  # a hex file of a formula constant: the windows are engine windows
        and result.checks
        and not any(c.match for c in result.checks)
        and any(c.first_difference == facts.first for c in result.checks)
    ):  # nothing said where the file begins, and nothing agrees from its first digit on
        result.warnings.append(Note("maybe-stretch", {"constant": facts.constant}))
    journal = run.oracle.journal
    if journal is not None:
        if journal.damaged:
            result.warnings.append(
                Note("checkpoint-damaged", {"records": journal.damaged, "checkpoint": str(journal.path)})
            )
        if journal.failure:
            result.warnings.append(Note("checkpoint-failed", {"reason": journal.failure}))
    return result


def tail_estimate(facts: FileFacts, *, workers: int, cluster: bool, checkpoint: bool) -> CostEstimate | None:
    """The cost of a hex file's deepest engine window (its tail), or None where no engine window runs.

    Raises :class:`InfeasibleError` (carrying the estimate) when that window
    cannot finish.
    """
    if facts.base != 16 or get_constant(facts.constant).evaluation is not None:
        return None
    est = estimate_cost(
        facts.constant,
        max(facts.first, facts.last - 15),
        16,
        formula=facts.formula,
        workers=workers,
        cluster=cluster,
        checkpoint=checkpoint,
    )
    refuse_if_infeasible(est, facts.constant)
    return est


def first_difference(expected: str, found: str, position: int) -> int | None:
    for i, (a, b) in enumerate(zip(expected, found)):
        if a != b:
            return position + i
    if len(found) < len(expected):
        return position + len(found)
    return None


@dataclass
class HexOracle:
    """Certified hex digits from the engine, with a count of evaluations."""

    constant: str
    formula: str
    workers: int = 1
    cluster: Any = None
    """A Dask scheduler address (or Client) for the head sums of deep windows."""
    journal: Journal | None = None
    """The check's one checkpoint journal: every window's finished head-sum blocks."""
    origin: int = 0
    """Digits of the expansion before the file's first digit (``FileFacts.first - 1``): positions
    here count from the expansion's start, the file's own from its first digit."""
    evaluations: int = 0
    engine_seconds: float = 0.0
    _cache: dict[tuple[int, int], str] = field(default_factory=dict)

    def digits(self, position: int, count: int) -> str:
        """Certified hex digits ``position .. position + count - 1``; a window already computed
        that covers them serves them (certified digits do not depend on the window)."""
        key = (position, count)
        if key not in self._cache:
            for (p0, c0), held in self._cache.items():
                if p0 <= position and position + count <= p0 + c0:
                    return held[position - p0 : position - p0 + count]
            t0 = time.perf_counter()
            r = extract(
                self.constant,
                position,
                count,
                formula=self.formula,
                workers=self.workers,
                cluster=self.cluster,
                checkpoint=self.journal,
            )
            self.engine_seconds += time.perf_counter() - t0
            self.evaluations += 1
            self._cache[key] = r.digits
        return self._cache[key]

    def held(self, position: int, digits: str) -> None:
        """Keep certified ``digits`` from ``position`` (computed elsewhere) to serve windows inside them."""
        self._cache[position, len(digits)] = digits

    def read(self, df: DigitFile, position: int, count: int) -> str:
        """The file's digits at ``position ..`` (counted from the expansion's start)."""
        return df.read(position - self.origin, count)

    def compare(
        self, df: DigitFile, kind: str, position: int, count: int, notes: tuple[Note, ...] = ()
    ) -> WindowCheck:
        count = min(count, df.count + self.origin - position + 1)
        if count < 1 or position <= self.origin:
            raise ValueError(f"window at {position} lies outside the file")
        expected = self.digits(position, count)
        found = self.read(df, position, count)
        diff = first_difference(expected, found, position)
        return WindowCheck(
            kind=kind,
            position=position,
            expected=expected,
            found=found,
            match=diff is None,
            first_difference=diff,
            notes=notes,
        )


def distinct_rows(rows: list[WindowCheck]) -> list[WindowCheck]:
    """``rows`` with each comparison once: of the rows that compare the same digits at the same place
    (two prefixes of a decimal file that determine the same hex window, a confirmation of a window
    bisection or the head already compared), the last is kept, in its place: its role (``confirm``)
    is the conclusion the earlier ones led to.

    >>> a, b = WindowCheck("bisection", 5, "AB", "AB", True), WindowCheck("confirm", 5, "AB", "AB", True)
    >>> [c.kind for c in distinct_rows([a, WindowCheck("tail", 9, "C", "C", True), b])]
    ['tail', 'confirm']
    """
    last = {(c.base, c.position, c.expected, c.found): i for i, c in enumerate(rows)}
    return [c for i, c in enumerate(rows) if last[(c.base, c.position, c.expected, c.found)] == i]


def clamp_window(window: int, count: int) -> int:
    if not 1 <= window <= MAX_WINDOW:
        raise UsageError(f"window must be between 1 and {MAX_WINDOW} digits, got {window}")
    return min(window, count)


def _part(progress: Progress, done: int, weight: int, total: int) -> Callable[[float], None]:
    """The bar's callback inside one planned check of ``weight`` units, ``done`` before it."""

    def say(fraction: float) -> None:
        progress(done + int(weight * min(max(fraction, 0.0), 0.99)), total)

    return say


class Sampler:
    """Random window positions in ``first..last``, each drawn once and none at a ``fixed`` position.

    The random windows of a check are distinct and avoid the windows it checks
    anyway (head, tail, positions asked for), so each adds evidence.  ``room``
    is how many positions there are to draw from; ``draw()`` returns None once
    every one was drawn.  When the room is plenty, the positions are those of
    ``rng.randint(first, last)`` with repeats skipped.

    Drawing without replacement from positions other than the clean fixed ones
    keeps :func:`spotcheck.checks.stats.scattered_damage_bound` valid: the
    chance that ``n`` distinct windows all miss a damaged fraction ``f`` is at
    most ``(1 - f)^n``, and the clean fixed windows only lower the damaged
    fraction among the positions drawn from below that of the whole file.

    >>> import random
    >>> s = Sampler(random.Random(1), 1, 5, fixed=(1, 5))
    >>> s.room, sorted(s.batch(8)), s.draw()
    (3, [2, 3, 4], None)
    """

    def __init__(self, rng: random.Random, first: int, last: int, fixed: Iterable[int] = ()) -> None:
        self.rng, self.first, self.last = rng, first, last
        self.taken = {p for p in fixed if first <= p <= last}
        self.room = max(0, last - first + 1 - len(self.taken))

    def draw(self) -> int | None:
        if self.room <= 0:
            return None
        while True:  # expected tries: positions / room left
            p = self.rng.randint(self.first, self.last)
            if p not in self.taken:
                break
        self.taken.add(p)
        self.room -= 1
        return p

    def batch(self, count: int) -> list[int]:
        """``min(count, room)`` positions, sorted (all that are left when ``count`` reaches the room)."""
        if count >= self.room:
            out = [p for p in range(self.first, self.last + 1) if p not in self.taken]
            self.taken.update(out)
            self.room = 0
            return out
        return sorted(p for p in (self.draw() for _ in range(count)) if p is not None)


def sample_notes(
    given: int | None, sought: int, room: int | None, unit: str, *, reference: str | None, compared: bool
) -> list[Note]:
    """What a check's random windows came to, when not what was asked: none drawn because every digit
    was compared (``samples-not-drawn``, said only when the number was ``given``), or fewer than
    ``sought`` because the file has only ``room`` distinct ones (``samples-fewer``).  ``unit``:
    ``window`` or ``prefix``."""
    if room is None:
        if given and reference is not None:
            return [Note("samples-not-drawn", {"asked": given, "reference": reference, "compared": compared})]
        return []
    if room < sought:
        return [
            Note(
                "samples-fewer",
                {"asked": sought, "drawn_from": room, "unit": unit, "given": given is not None},
            )
        ]
    return []


def run_plan(
    plan: Plan,
    check: Callable[[str, int], None],
    draw: Callable[[], int | None],
    sample_seconds: float | None,
    progress: Progress | None,
    *,
    within: list[Callable[[float], None] | None] | None = None,
) -> tuple[int, bool]:
    """Run ``check(kind, where)`` for each planned check, then random draws while ``sample_seconds`` allow.

    Ctrl-C stops cleanly.  Returns ``(random windows checked, interrupted)``.
    ``within``, if given, is a one-item list that holds, during each planned
    check, a callable taking the fraction of that check done (so a long check
    can move the bar); None between checks.
    """
    t0 = time.perf_counter()
    random_windows = 0
    # Progress in units of work: a window's cost grows with its position (a prefix's with its
    # length), so counting checks would make the ETA far too short when deep windows come last.
    weights = [max(where, 1_000) for _, where in plan]
    total, done = sum(weights), 0
    try:
        for (kind, where), weight in zip(plan, weights):
            if within is not None and progress is not None:
                within[0] = _part(progress, done, weight, total)
            check(kind, where)
            if within is not None:
                within[0] = None
            random_windows += kind == "sample"
            done += weight
            if progress:
                progress(done, total)
        if sample_seconds is not None:
            # Keep drawing while the next check is expected to fit.
            per = (time.perf_counter() - t0) / max(1, len(plan))
            while time.perf_counter() - t0 + per < sample_seconds:
                t1 = time.perf_counter()
                drawn = draw()
                if drawn is None:  # every position was drawn
                    break
                check("sample", drawn)
                random_windows += 1
                per = max(per, time.perf_counter() - t1)
    except KeyboardInterrupt:
        return random_windows, True
    return random_windows, False
