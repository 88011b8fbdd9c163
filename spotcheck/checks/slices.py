"""Where a file begins, settled: its first digit's position and its constant, from engine digits there.

The digit-file layer says where a file may begin (``DigitFile.first_positions``:
digit 1, a stated position, or what its labels say, two positions when a start
label may count from 0 or from 1).  :func:`settle` decides with certified digits
where that is cheap, and refuses otherwise, naming the parameter that resolves it:

* two candidate positions: the one whose engine digits agree with the file's
  first digits (a 0- or 1-based label is never guessed);
* no constant named: the constant whose engine digits at the first position
  agree with the file's first :data:`GUESS_DIGITS` digits, when the estimated
  engine time for every candidate fits :data:`GUESS_SECONDS`.

Only hex files of constants with a digit-extraction formula can begin deeper
than digit 1 for now: a decimal stretch (or a constant evaluated in full)
needs every digit before it, and is refused with the reason.
"""

from __future__ import annotations

from dataclasses import dataclass

from spotcheck.digitfile import DigitFile
from spotcheck.engine.api import estimate_cost, extract
from spotcheck.errors import UsageError
from spotcheck.formulas import all_constants, get_constant

from .request import CheckRequest

__all__ = ["Placed", "settle", "GUESS_DIGITS", "GUESS_SECONDS"]

# --- tuning -----------------------------------------------------------------
GUESS_DIGITS = 24  # leading digits of a slice compared with engine digits at its first position
MIN_AGREE = 16  # of them, agreeing in place, for a constant and position to be taken (chance: 4e-14)
MIN_GUESS_DIGITS = 12  # a shorter file: all its digits, at least this many, must agree
GUESS_SECONDS = 5.0  # estimated engine CPU seconds the guess (every candidate together) may take
# ---------------------------------------------------------------------------


START_AGAIN = "start-again"
"""``Placed.how`` when labels placed a file deeper but its digits are the constant's from digit 1."""


@dataclass(frozen=True)
class Placed:
    """A file's constant (None when not settled here) and its first digit's position, with how."""

    constant: str | None
    first: int
    how: str
    constant_how: str | None = None
    """How the constant was recognised at ``first`` (None: as the digit-file layer says)."""
    engine_digits: str = ""
    """Certified digits of the constant from ``first`` computed to settle it (the check's head
    window is served from them instead of being computed again)."""


def agrees(head: str, digits: str) -> bool:
    """True when engine ``digits`` agree with the file's ``head`` well beyond chance: at
    :data:`MIN_AGREE` places of :data:`GUESS_DIGITS` (a few damaged digits do not hide the
    right position; the chance that unrelated hex digits agree so often is about 4e-14), or in
    every digit of a shorter head of at least :data:`MIN_GUESS_DIGITS`.

    >>> agrees("243F6A8885A308D313198A2E", "243F6A8885A308D313198A2E"), agrees("243F6A88", "243F6A88")
    (True, False)
    """
    if len(head) >= GUESS_DIGITS:
        return sum(a == b for a, b in zip(head, digits)) >= MIN_AGREE
    return len(head) >= MIN_GUESS_DIGITS and head == digits


def _needs(message: str, parameter: str) -> UsageError:
    from .common import needs

    return needs(message, parameter)


def settle(df: DigitFile, request: CheckRequest, name: str) -> Placed:
    """The file's constant and first position (``name`` is the file's name for messages)."""
    positions, how = df.first_positions, df.first_how
    if positions == (1,):
        return Placed(df.constant, 1, how)
    shown = " or ".join(f"{p:,}" for p in positions)
    if df.integer_part is not None:
        raise _needs(
            f"{name}: the file has an integer part ({df.integer_part}.), so its first digit is digit 1, "
            f"not {shown}",
            "first_position",
        )
    if df.base != 16:
        raise UsageError(
            f"{name}: the file begins at digit {shown} of a decimal expansion; a decimal stretch from "
            "deeper in the expansion cannot be linked to certified hex digits without the digits before "
            "it, and is not checked yet"
        )
    if request.constant is not None:
        const = get_constant(request.constant)
        if const.evaluation is not None:
            raise UsageError(
                f"{name}: {const.name} is evaluated in full, not by digit extraction; a stretch that "
                f"begins at digit {shown} is not checked yet"
            )
        names = [const.name]
    else:
        names = [c.name for c in all_constants() if c.evaluation is None]
    head = df.read(1, min(GUESS_DIGITS, df.count))
    if how == "given" and request.constant is not None:
        return Placed(names[0], positions[0], how)  # the caller's word; the check compares the digits
    if request.constant is None:
        return _guess(df, head, names, positions, how, request, name, shown)
    computed = _windows(names[0], positions, len(head), request.workers)
    agree = [p for p in positions if agrees(head, computed[p])]
    if len(agree) == 1:
        settled = how if len(positions) == 1 else "labels and engine digits"
        return Placed(names[0], agree[0], settled, engine_digits=computed[agree[0]])
    if not agree and agrees(head, extract(names[0], 1, len(head), workers=request.workers).digits):
        # The digits are the constant's from digit 1: the labels are off, not the file's place
        # (read again from digit 1, where they are findings, as in any file).
        return Placed(names[0], 1, START_AGAIN)
    if len(positions) == 1:
        return Placed(names[0], positions[0], how)  # the labels' word; the check compares the digits
    # A named constant, two candidate positions, and the engine's digits settle neither.
    raise _needs(
        f"{name}: the labels say the file begins at digit {positions[0]:,} (counted from 1) or "
        f"{positions[-1]:,} (counted from 0), and certified digits of {names[0]} at "
        + ("neither" if not agree else "both")
        + " agree with its first digits beyond chance: state the position of its first digit",
        "first_position",
    )


def _guess(
    df: DigitFile,
    head: str,
    names: list[str],
    positions: tuple[int, ...],
    how: str,
    request: CheckRequest,
    name: str,
    shown: str,
) -> Placed:
    """The one constant (and position) whose engine digits agree with the file's first digits,
    the cheapest candidates first, within :data:`GUESS_SECONDS` of estimated engine time."""
    if len(head) < MIN_GUESS_DIGITS:
        raise _needs(f"{name}: too few digits ({len(head)}) to tell the constant of a stretch", "constant")
    order = {n: i for i, n in enumerate(names)}
    span = len(head) + positions[-1] - positions[0]  # one window covers every candidate position
    costs = sorted(
        (estimate_cost(n, positions[0], span, workers=request.workers).cpu_seconds, order[n], n)
        for n in names
    )
    spent, skipped = 0.0, []
    agree: list[tuple[str, int]] = []
    computed: dict[tuple[str, int], str] = {}
    for seconds, _, n in costs:
        if spent + seconds > GUESS_SECONDS:
            skipped.append((seconds, n))
            continue
        spent += seconds
        for p, digits in _windows(n, positions, len(head), request.workers).items():
            computed[n, p] = digits
            if agrees(head, digits):
                agree.append((n, p))
    agree.sort(key=lambda np: order[np[0]])
    if len({p for _, p in agree}) == 1:
        # One place; several names only for one expansion (a formula file's copy of a built-in
        # constant): the first registered, built-ins first, is checked.
        const_name, first = agree[0]
        return Placed(
            const_name,
            first,
            how if len(positions) == 1 else "labels and engine digits",
            f"recognised: its first digits agree with certified digits of {const_name} at {first:,}",
            computed[const_name, first],
        )
    if agree:
        raise _needs(
            f"{name}: the first {len(head)} digits agree with "
            + " and ".join(f"{n} at {p:,}" for n, p in agree)
            + "; name the constant or the first digit's position",
            "constant",
        )
    if how == "labels":
        from spotcheck.digitfile.guess import match_constant

        at_start = match_constant(df.read(1, 64), None, df.base, df.count)
        if at_start.name is not None:  # the constant's digits from digit 1: the labels are off
            return Placed(at_start.name, 1, START_AGAIN)
    if skipped:
        dearest = max(skipped)
        raise _needs(
            f"{name}: the file begins at digit {shown}; no constant whose digits there cost under "
            f"{GUESS_SECONDS:g} s agrees with its first {len(head)} digits, and telling "
            f"{', '.join(sorted({n for _, n in skipped}))} would take about {dearest[0]:.0f} s more: "
            "name the constant",
            "constant",
        )
    raise _needs(
        f"{name}: the file begins at digit {shown}, and no known constant's digits there agree "
        f"with its first {len(head)} digits",
        "constant",
    )


def _windows(constant: str, positions: tuple[int, ...], count: int, workers: int) -> dict[int, str]:
    """Certified digits ``count`` long from each candidate position, from one engine window
    (the candidates lie a digit or two apart)."""
    low = positions[0]
    window = extract(constant, low, count + positions[-1] - low, workers=workers).digits
    return {p: window[p - low : p - low + count] for p in positions}
