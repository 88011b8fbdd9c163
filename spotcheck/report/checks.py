"""Rendering of verify, locate, scan and inspect results: rich for people, JSON for pipelines."""

from __future__ import annotations

import math
from typing import Any

from spotcheck.checks.results import LabelFinding, LocateResult, ScanResult, VerifyResult, WindowCheck
from spotcheck.digitfile import InspectResult
from spotcheck.report.console import (
    STYLE_BAD,
    STYLE_DIM,
    STYLE_OK,
    STYLE_WARN,
    emit_json,
    plural,
    stdout_console,
    warning_line,
)

CheckResult = VerifyResult | LocateResult | ScanResult

# Characters of the one-line file map.
MAP_UNCHECKED = "·"
MAP_MATCH = "■"
MAP_MISMATCH = "✗"
MAP_DAMAGE = "━"
MAP_FIRST = "▲"
MAX_TABLE_ROWS = 40


def result_payload(result: CheckResult, repeat: str) -> dict[str, Any]:
    """The JSON report: the result's fields, its warnings in words (``warnings``) beside their codes
    (``warning_codes``), and the repeat line."""
    from spotcheck.report.notes import note_sentence

    out = result.to_dict()
    out["warnings"] = [note_sentence(w, "check") for w in result.warnings]
    for row, check in zip(out["checks"], result.checks, strict=True):
        row["note"] = "; ".join(note_sentence(n, "check") for n in check.notes)
    out["repeat"] = repeat
    out["notes"] = report_notes(result)
    return out


def report_notes(result: CheckResult) -> list[str]:
    """What the run did otherwise than asked, in words (printed as ``note:`` lines, ``notes`` in JSON)."""
    from spotcheck.report.notes import note_sentence

    return [note_sentence(n, "check") for n in getattr(result, "notes", [])]


def windows_phrase(result: CheckResult) -> str:
    """The windows compared, by kind: ``18 windows (head, tail and 16 random; 288 digits)``.

    Random windows are named apart: they alone back the damage bound.
    """
    rows = [c for c in result.checks if c.position >= 1]
    kinds = [c.kind for c in rows]
    parts: list[str] = [k for k in ("head", "tail") if k in kinds]
    if kinds.count("user"):
        parts.append(f"{kinds.count('user'):,} at the positions asked for")
    if kinds.count("sample"):
        parts.append(f"{kinds.count('sample'):,} random")
    other = len(kinds) - sum(kinds.count(k) for k in ("head", "tail", "user", "sample"))
    if other and parts:
        parts.append(f"{other:,} more")
    detail = ", ".join(parts[:-1]) + " and " + parts[-1] if len(parts) > 1 else "".join(parts)
    inside = f"{detail}; " if detail and len(rows) > 1 else ""
    return f"{plural(len(rows), 'window')} ({inside}{result.covered_digits:,} digits)"


def coverage_phrase(result: CheckResult) -> str:
    """What was compared: every digit, or which windows (with the damage bound and what backs it)."""
    if (
        isinstance(result, VerifyResult)
        and result.file.base == 10
        and result.exhaustive
        and not result.full_through
    ):
        return "every digit covered by radix conversion of the whole file"
    if result.full_through and result.exhaustive:
        ref = getattr(result, "reference", None) or "a full computation"
        return f"every digit compared with {ref}"
    if result.exhaustive:
        return f"every digit compared in {windows_phrase(result)}"
    how = "compared" if isinstance(result, LocateResult) else "checked"
    text = windows_phrase(result).replace(" (", f" {how} (", 1)
    if isinstance(result, VerifyResult) and result.scattered_bound is not None:
        text += (
            f"; damaged fraction below {result.scattered_bound:.2%} at 95% "
            f"from the {plural(result.random_windows, 'random window')}"
        )
    return text


def established_phrase(result: CheckResult) -> str:
    """What an interrupted check had established (no wrong digit so far), for its verdict line."""
    if not result.covered:
        return "interrupted before any digit was compared"
    windows = sum(c.position >= 1 for c in result.checks)
    agree = "matches" if windows == 1 else "match"
    if result.full_through:
        done = (
            f"the first {result.full_through - result.file.first + 1:,} digits agree with a full computation"
        )
        if windows:
            done += f", and {plural(windows, 'window')} {agree}"
    else:
        done = f"{windows_phrase(result)} {agree}"
    return f"interrupted before the check finished; no wrong digit so far: {done}"


def _rounded_phrase(result: CheckResult) -> str | None:
    """Where the file's last digits are the true ones rounded up (not a truncation), or None."""
    first = getattr(result, "rounded_from", None)
    if first is None:
        return None
    last = result.file.last
    if first == last:
        return f"the last digit is the true expansion rounded up (digit {last:,}), not a truncation"
    return f"digits {first:,} to {last:,} are the true ones rounded up at the last digit, not a truncation"


def _verdict_line(result: CheckResult) -> tuple[str, str]:
    f = result.file
    what = f"{f.constant} in base {f.base}, {f.checked:,} digits"
    if f.checked != f.count:
        what += f" of {f.count:,}"
    if f.first != 1:
        what += f" from position {f.first:,}"
    stop = "; interrupted" if result.interrupted else ""
    if result.verdict == "mismatch":
        if isinstance(result, LocateResult) and result.first_mismatch is not None:
            if result.interrupted and not result.first_is_certain:
                return (
                    f"MISMATCH  wrong digit at position {result.first_mismatch:,}, not confirmed as the first "
                    f"({what}); interrupted",
                    STYLE_BAD,
                )
            rounded_at = _rounded_phrase(result)
            rounding = f": {rounded_at}" if rounded_at is not None else ""
            return (
                f"MISMATCH  first wrong digit at position {result.first_mismatch:,} ({what}){rounding}{stop}",
                STYLE_BAD,
            )
        rounded = _rounded_phrase(result)
        wrong_digits = getattr(result, "wrong_digits", None)
        if rounded is not None and not isinstance(result, LocateResult):
            return f"MISMATCH  {rounded} ({what}){stop}", STYLE_BAD
        if wrong_digits:
            runs = (
                result.runs_total if isinstance(result, ScanResult) else getattr(result, "wrong_runs", None)
            )
            first = result.first_mismatch if isinstance(result, ScanResult) else None
            if first is None:
                first = next((c.position for c in result.checks if c.kind == "full"), None)
            in_runs = f" in {plural(runs, 'run')}" if runs else ""
            at = f", the first at position {first:,}" if first else ""
            span = (
                "every digit compared" if result.exhaustive else f"{result.covered_digits:,} digits compared"
            )
            return (
                f"MISMATCH  {plural(wrong_digits, 'wrong digit')}{in_runs}{at}, {span} ({what}){stop}",
                STYLE_BAD,
            )
        if isinstance(result, VerifyResult) and result.first_wrong_bracket is not None:
            lo, hi = result.first_wrong_bracket
            if lo == hi:
                where = f"the first wrong decimal digit is at position {lo:,}"
            else:
                where = f"the first wrong decimal digit lies between positions {lo:,} and {hi:,}"
            return f"MISMATCH  {where} ({what}){stop}", STYLE_BAD
        if isinstance(result, LocateResult) and result.first_wrong_bracket is not None:
            lo, hi = result.first_wrong_bracket
            return (
                f"MISMATCH  the first wrong decimal digit lies between positions {lo:,} and {hi:,} ({what}){stop}",
                STYLE_BAD,
            )
        wrong = sum(not c.match for c in result.checks)
        return (
            f"MISMATCH  {wrong} of {plural(len(result.checks), 'check')} differ; {coverage_phrase(result)} "
            f"({what}){stop}",
            STYLE_BAD,
        )
    if result.verdict == "incomplete":
        return f"INCOMPLETE  {established_phrase(result)} ({what})", STYLE_WARN
    if result.verdict == "unconfirmed":
        return (
            f"NOT RULED OUT  no wrong digit found, but isolated damage is not ruled out: "
            f"{coverage_phrase(result)} ({what})",
            STYLE_WARN,
        )
    if isinstance(result, ScanResult):
        return f"MATCH  every one of {result.digits_compared:,} digits agrees ({what})", STYLE_OK
    if isinstance(result, LocateResult):
        return f"NO WRONG DIGIT  {coverage_phrase(result)} ({what})", STYLE_OK
    return (
        f"MATCH  all {plural(len(result.checks), 'check')} agree; {coverage_phrase(result)} ({what}){stop}",
        STYLE_OK,
    )


def label_sentence(result: CheckResult) -> str | None:
    """One line on the first position label that disagrees with the digits, or None."""
    return label_finding_sentence(result.file.label_finding)


def label_finding_sentence(lf: LabelFinding | None, copy: str = "") -> str | None:
    """One line on a file's first disagreeing position label (``copy`` names the copy, for ``compare``)."""
    if lf is None:
        return None
    where = f"line {lf.line:,}" if lf.line is not None else "a line"
    if copy:
        where = f"copy {copy}, {where}"
    lost = lf.kind == "label-missing" and lf.found is not None
    if lost:
        what = f"{where}: the position label {lf.found} has lost its separator (read as the label, not as digits)"
    elif lf.kind == "label-missing":
        what = f"{where}: no position label, unlike the lines around it"
    elif lf.found is not None and lf.expected is not None and lf.end == "end":
        what = f"{where}: its end label says {lf.found}, but the digits through it imply {lf.expected:,}"
    elif lf.found is not None and lf.expected is not None:
        what = f"{where}: labelled {lf.found}, but the digits before it imply {lf.expected:,}"
    else:
        what = f"{where}: its position label disagrees with the digit count"
    if lf.position is not None:
        what += f" (its first digit is digit {lf.position:,})"
    more = f"; {lf.total:,} label findings in all" if lf.total > 1 else ""
    cause = (
        "a character was lost there"
        if lost
        else "the file may have been cut short there, or the label removed"
        if lf.kind == "label-missing"
        else "digits were lost or gained before it, or a label was changed"
    )
    return f"LABELS DISAGREE  {what}{more}: {cause} (--ignore-labels drops this finding)"


def file_map(result: CheckResult, width: int) -> tuple[str, list[tuple[int, int, str]]]:
    """The file drawn as ``width`` cells: which parts were checked, matched, or are damaged.

    Drawn from ``result.covered`` (one source of truth with the verdict): a
    cell is checked when a compared range reaches into it, so a file compared
    in full is checked from end to end however short it is.  Differing checks
    and wrong runs are drawn over it.  Returns the line and ``(start, end, style)``
    spans for colouring.
    """
    n = max(result.file.checked, 1)
    shift = result.file.first - 1  # positions count from the expansion's start; cells from the file's
    cells = [MAP_UNCHECKED] * width
    styles = [STYLE_DIM] * width

    def first_cell(position: int) -> int:
        return min(width - 1, max(0, (position - shift - 1) * width // n))

    def last_cell(position: int) -> int:  # a digit of a short file spans several cells
        return max(first_cell(position), min(width - 1, (position - shift) * width // n - 1))

    def paint(first: int, last: int, char: str, style: str) -> None:
        for i in range(first_cell(first), last_cell(last) + 1):
            cells[i], styles[i] = char, style

    for first, last in result.covered:
        paint(first, last, MAP_MATCH, STYLE_OK)
    damage_from: int | None = None
    damage_to = result.file.last
    if isinstance(result, LocateResult) and result.first_mismatch is not None:
        damage_from = result.first_mismatch
        if result.rest != "wrong":
            damage_to = damage_from
    if damage_from is not None:
        paint(damage_from, damage_to, MAP_DAMAGE, STYLE_BAD)
    if isinstance(result, ScanResult):
        wrong = [(run.start, run.start + run.length - 1) for run in result.runs]
    else:
        wrong = getattr(result, "wrong_spans", [])
    for first, last in wrong:
        paint(first, last, MAP_MISMATCH, STYLE_BAD)
    for c in result.checks:
        if c.position < 1 or c.match:
            continue
        # A hex window of a decimal file is evidence about the decimal prefix it was converted from.
        if c.base == result.file.base:
            paint(c.first_difference or c.position, c.first_difference or c.position, MAP_MISMATCH, STYLE_BAD)
        elif c.prefix is not None:
            paint(c.prefix, c.prefix, MAP_MISMATCH, STYLE_BAD)
        else:
            at = round(c.position * math.log(c.base, result.file.base))
            paint(at, at, MAP_MISMATCH, STYLE_BAD)
    if damage_from is not None:
        paint(damage_from, damage_from, MAP_FIRST, STYLE_BAD)
    spans: list[tuple[int, int, str]] = []
    for i, st in enumerate(styles):
        if spans and spans[-1][2] == st and spans[-1][1] == i:
            spans[-1] = (spans[-1][0], i + 1, st)
        else:
            spans.append((i, i + 1, st))
    return "".join(cells), spans


def _meaning(result: CheckResult) -> list[str]:
    lines: list[str] = []
    if isinstance(result, VerifyResult):
        w = result.window
        by_evaluation = result.method.startswith("full evaluation")
        if result.file.base == 10 and not by_evaluation:
            lines.append(
                "Radix conversion: each decimal prefix checked (the whole file for the tail) was converted "
                "to hexadecimal; the hex digits it determines were compared with certified engine digits "
                "(rows marked hex: the engine's evidence, in hex positions), and its last decimal digits were "
                "recomputed exactly (the other rows, in decimal positions)."
            )
            if result.any_mismatch:
                lines.append(
                    "A differing hex row means that some decimal digit of the prefix it was converted from is "
                    "wrong; the verdict line brackets the first wrong decimal digit from the prefixes that "
                    "pass and fail, and `spotcheck locate` finds it exactly."
                )
        tail = next((c for c in result.checks if c.kind == "tail"), None)
        if tail is not None and tail.match:
            lines.append(
                f"Persistent-error model: the matching tail rules out any error before it that stayed wrong "
                f"to the end (chance of an accidental match {result.false_match_chance:.1e}, 16^-{w})."
            )
        if by_evaluation:
            lines.append(
                f"Full evaluation: {result.file.constant} has no digit-extraction formula, so all "
                f"{result.full_through - result.file.first + 1:,} digits were compared, in the file's own base, with certified digits "
                f"of a full evaluation ({result.reference}); `spotcheck scan --reference mpfr` checks them "
                "against a second, independent library."
            )
        elif result.reference is not None and result.full_through:
            lines.append(
                f"Full comparison: {result.full_through - result.file.first + 1:,} digits compared with an independent computation "
                f"({result.reference}), which shares nothing with the digit-extraction engine."
            )
        if result.scattered_bound is not None:
            lines.append(
                f"Scattered-damage model: {result.random_windows} clean random windows bound the damaged "
                f"fraction below {result.scattered_bound:.2%} at 95% confidence."
            )
    elif isinstance(result, LocateResult):
        lines.append(result.explanation[0].upper() + result.explanation[1:] + ".")
        estimate = result.scan_estimate_seconds
        if (
            not result.exhaustive
            and not result.first_is_certain
            and estimate is not None
            and estimate != math.inf
        ):
            upto = result.first_mismatch - 1 if result.first_mismatch else None
            limit = f" --limit {upto}" if upto else ""
            took = "under 1 s" if estimate < 1 else f"about {estimate:.0f} s"
            lines.append(f"To settle it: `spotcheck scan{limit}` ({took}), or raise --budget.")
        if result.first_mismatch is not None and result.expected:
            lines.append(f"expected from {result.first_mismatch:,}: {result.expected}")
            lines.append(f"found    from {result.first_mismatch:,}: {result.found}")
    elif isinstance(result, ScanResult):
        lines.append(f"Compared with an independent full computation ({result.reference}).")
        if result.runs_total > len(result.runs):
            lines.append(f"Showing the first {len(result.runs)} of {result.runs_total:,} runs.")
    return lines


def _row_result(c: WindowCheck, file_base: int) -> str:
    if c.match:
        return f"[{STYLE_OK}]match[/]"
    hex_row = c.base != file_base
    where = f" at {'hex ' if hex_row else ''}{c.first_difference:,}" if c.first_difference else ""
    return f"[{STYLE_BAD}]✗{where}[/]"


def _row_cells(c: WindowCheck, file_base: int) -> tuple[str, str]:
    """The check and position cells; hex rows of a decimal file are labelled as the engine's evidence."""
    if c.base == file_base:
        return c.kind, f"{c.position:,}"
    return f"{c.kind} (hex)", f"hex {c.position:,}"


def show_result(result: CheckResult, repeat: str, *, as_json: bool, quiet: bool) -> None:
    if as_json:
        emit_json(result_payload(result, repeat))
        return
    if not quiet:
        from spotcheck.report.notes import note_sentence

        for message in result.warnings:
            warning_line(note_sentence(message, "check"))
    if quiet:
        return
    from rich import box
    from rich.table import Table
    from rich.text import Text

    con = stdout_console()
    line, style = _verdict_line(result)
    con.print(line, style=style)
    labels = label_sentence(result)
    if labels is not None:
        con.print(labels, style=STYLE_BAD)
    for note in report_notes(result):
        con.print(f"note: {note}", style=STYLE_WARN)
    f = result.file
    con.print(
        f"{f.path}: {f.size_bytes:,} bytes{', ' + f.compression if f.compression else ''}; "
        f"constant {f.constant} ({f.constant_how}); method: {result.method}",
        style=STYLE_DIM,
    )
    if isinstance(result, ScanResult) and result.runs:
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False, collapse_padding=True)
        for col in ("start", "length", "wrong", "expected", "found"):
            table.add_column(col)
        for r in result.runs[:MAX_TABLE_ROWS]:
            table.add_row(f"{r.start:,}", f"{r.length:,}", f"{r.wrong:,}", r.expected, r.found)
        con.print(table)
    elif result.checks:
        mixed = False  # hex rows of a decimal file say "hex" in their check and position cells
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False, collapse_padding=True)
        table.add_column("check", no_wrap=True)
        if mixed:
            table.add_column("base", no_wrap=True)
        table.add_column("position", justify="right", no_wrap=True)
        table.add_column("expected", no_wrap=True)
        table.add_column("found", no_wrap=True)
        table.add_column("result", no_wrap=True)
        shown = result.checks
        if len(shown) > MAX_TABLE_ROWS:
            bad = [c for c in shown if not c.match]
            shown = (bad + [c for c in shown if c.match])[:MAX_TABLE_ROWS]
        for c in shown:
            base_cell = [str(c.base)] if mixed else []
            kind_cell, position_cell = _row_cells(c, f.base)
            table.add_row(kind_cell, *base_cell, position_cell, c.expected, c.found, _row_result(c, f.base))
        con.print(table)
        if len(shown) < len(result.checks):
            con.print(f"({len(result.checks) - len(shown)} more matching checks not shown)", style=STYLE_DIM)
    width = max(20, min(con.width, 200) - 2)
    cells, spans = file_map(result, width)
    text = Text(cells)
    for a, b, st in spans:
        text.stylize(st, a, b)
    left, right = f"{f.first:,}", f"{f.last:,}"
    con.print(
        Text(left, style=STYLE_DIM)
        + Text(" " * max(1, width - len(left) - len(right)))
        + Text(right, style=STYLE_DIM)
    )
    con.print(text)
    con.print(
        f"{MAP_MATCH} checked, matches   {MAP_MISMATCH} differs   {MAP_DAMAGE} wrong   "
        f"{MAP_FIRST} first wrong digit   {MAP_UNCHECKED} not checked",
        style=STYLE_DIM,
    )
    for m in _meaning(result):
        con.print(m)
    con.print(f"{plural(result.evaluations, 'evaluation')} in {result.seconds:.2f} s", style=STYLE_DIM)
    con.print(f"repeat: {repeat}", style=STYLE_DIM)


def _first_position_text(result: InspectResult) -> str:
    """Where the file begins in the expansion, and how that was learnt."""
    positions = result.first_positions
    if result.first_how == "start":
        return "1 (nothing in the file says otherwise)"
    if result.first_how == "given":
        return f"{positions[0]:,} (given)"
    if len(positions) == 1:
        return f"{positions[0]:,} (from the position labels)"
    return (
        f"{positions[0]:,} or {positions[1]:,} (from the position labels, counted from 1 or from 0; "
        "verify and locate settle it with certified digits)"
    )


def show_inspect(result: InspectResult, *, as_json: bool) -> None:
    if as_json:
        emit_json(result.to_dict())
        return
    from rich.table import Table

    lay = result.layout
    layout_bits = [lay.kind]
    if lay.line_width:
        layout_bits.append(f"{lay.line_width} digits per line")
    if lay.group_size:
        layout_bits.append(f"groups of {lay.group_size}")
    if lay.labels:
        layout_bits.append(
            {
                "both": "position labels at both line ends",
                "first-line": "a position label on the first digit line only",
            }.get(lay.labels, f"position labels at line {lay.labels}")
        )
    if lay.header_lines:
        layout_bits.append(f"{lay.header_lines} header lines")
    layout_bits.append(f"{lay.access} access")
    table = Table(show_header=False, show_edge=False)
    table.add_column(style="bold")
    table.add_column()
    rows = [
        ("file", result.path),
        ("size", f"{result.size_bytes:,} bytes"),
        ("compression", result.compression or "none"),
        ("base", f"{result.base} ({result.base_how})"),
        ("constant", f"{result.constant or 'unknown'} ({result.constant_how})"),
        ("integer part", result.integer_part if result.integer_part is not None else "none"),
        ("digits after the point", f"{result.count:,}"),
        ("first digit's position", _first_position_text(result)),
        ("layout", ", ".join(layout_bits)),
        ("first digits", result.first_digits),
        ("last digits", result.last_digits),
    ]
    con = stdout_console()
    room = max(16, con.width - 30)  # the value column's width, about
    for k, v in rows:
        if k == "last digits" and len(v) > room:
            v = "…" + v[-(room - 1) :]  # the end of the file is what "last" means
        table.add_row(k, v)
    con.print(table)
    for finding in result.findings:
        where = f" (line {finding.line})" if finding.line else ""
        con.print(f"finding: {finding.message}{where}", style=STYLE_WARN)
