"""Rendering of ``compare`` results: rich for people, JSON for pipelines."""

from __future__ import annotations

from typing import Any

from spotcheck.checks.compare import CompareResult
from spotcheck.report.checks import label_finding_sentence, plural
from spotcheck.report.console import STYLE_BAD, STYLE_DIM, STYLE_OK, STYLE_WARN, emit_json, stdout_console
from spotcheck.report.notes import notes_sentence

MAX_TABLE_ROWS = 40

_RIGHT = {"A": "A is right", "B": "B is right", "both wrong": "both wrong", None: "not arbitrated"}


def compare_payload(result: CompareResult, repeat: str) -> dict[str, Any]:
    """The JSON report: the result's fields, each run's and the extra digits' ``note`` in words
    beside their ``notes`` codes, and the repeat line."""
    out = result.to_dict()
    for run, facts in zip(out["runs"], result.runs, strict=True):
        run["note"] = notes_sentence(facts.notes)
    if result.extra is not None:
        out["extra"]["note"] = notes_sentence(result.extra.notes, "extra")
    out["repeat"] = repeat
    return out


def keep_sentence(result: CompareResult) -> str:
    """The verdict in one sentence: which copy to keep."""
    keep = result.keep
    if result.verdict == "identical":
        return (
            f"IDENTICAL  all {result.digits_compared:,} digits agree; keep either copy "
            "(both may still be wrong in the same places: `spotcheck verify` one of them)"
        )
    if result.verdict == "incomplete":
        return f"INCOMPLETE  interrupted after {result.digits_compared:,} digits; no difference found so far"
    what = (
        f"{plural(result.runs_total, 'differing run')}, {plural(result.differing_digits, 'differing digit')}"
    )
    if result.extra is not None:
        what += f"; {result.extra.longer} has {plural(result.extra.length, 'more digit')}"
    if keep in ("A", "B"):
        path = result.a.path if keep == "A" else result.b.path
        return f"DIFFER  keep {keep} ({path}): it agrees with the certified digits wherever the copies differ ({what})"
    if keep == "either":
        return f"DIFFER  keep either copy: both agree with the certified digits where they differ ({what})"
    if keep == "neither":
        return f"DIFFER  keep neither as it is: each copy is wrong somewhere the other is right or both are wrong ({what})"
    if result.constant is None:
        return f"DIFFER  cannot say which copy is right: the constant is unknown, name it with --constant ({what})"
    if result.interrupted:
        return f"DIFFER  interrupted before every difference was arbitrated ({what})"
    return f"DIFFER  not every difference could be arbitrated; see the notes below ({what})"


def show_compare(result: CompareResult, repeat: str, *, as_json: bool, quiet: bool) -> None:
    if as_json:
        emit_json(compare_payload(result, repeat))
        return
    if quiet:
        return
    from rich import box
    from rich.table import Table

    con = stdout_console()
    line = keep_sentence(result)
    style = (
        STYLE_OK
        if result.verdict == "identical"
        else STYLE_WARN
        if result.verdict == "incomplete"
        else STYLE_BAD
    )
    con.print(line, style=style)
    for tag, f in (("A", result.a), ("B", result.b)):
        labels = label_finding_sentence(f.label_finding, tag)
        if labels:
            con.print(labels, style=STYLE_BAD)
    for tag, f in (("A", result.a), ("B", result.b)):
        comp = f", {f.compression}" if f.compression else ""
        con.print(f"{tag}: {f.path}: {f.count:,} digits{comp}; {f.layout}", style=STYLE_DIM)
    con.print(
        f"base {result.base}; constant {result.constant or 'unknown'} ({result.constant_how}); "
        f"arbitration: {result.method}",
        style=STYLE_DIM,
    )
    if result.shift is not None:
        sh = result.shift
        con.print(
            f"shifted copies: {sh['missing_in']} lacks {plural(sh['digits'], 'digit')} that the other has (or the other "
            f"has extra ones) at or before position {sh['position']:,}; the comparison stops there",
            style=STYLE_WARN,
        )
    if result.integer_parts is not None:
        ip = result.integer_parts
        con.print(
            f"integer parts differ: A {ip['a']}, B {ip['b']}, certified {ip['certified']}: {_RIGHT[ip['right']]}"
        )
    if result.runs:
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False, collapse_padding=True)
        for col in ("start", "length", "A", "B", "certified", "result"):
            table.add_column(col, no_wrap=True)
        for r in result.runs[:MAX_TABLE_ROWS]:
            table.add_row(
                f"{r.start:,}",
                f"{r.length:,}",
                r.a[:16],
                r.b[:16],
                (r.certified or "")[:16],
                _RIGHT[r.right],
            )
        con.print(table)
        if result.runs_total > min(len(result.runs), MAX_TABLE_ROWS):
            con.print(
                f"(showing {min(len(result.runs), MAX_TABLE_ROWS)} of {result.runs_total:,} runs)",
                style=STYLE_DIM,
            )
        notes = sorted({notes_sentence(r.notes) for r in result.runs if r.notes})
        for n in notes:
            con.print(f"note: {n}", style=STYLE_DIM)
    e = result.extra
    if e is not None:
        state = "right" if e.right else "wrong" if e.right is False else "not arbitrated"
        con.print(
            f"{e.longer} is longer: {plural(e.length, 'extra digit')} from position {e.start:,} ({e.digits}...): {state}"
            + (f"; {notes_sentence(e.notes, 'extra')}" if e.notes else "")
        )
    if result.verdict != "identical":
        con.print(
            "Only the digits where the copies differ were checked; where they agree both may be wrong "
            "(`spotcheck verify` the copy you keep).",
            style=STYLE_DIM,
        )
    timing = ""
    if result.arbitration_seconds:
        timing = f", arbitration {sum(result.arbitration_seconds):.2f} s for {plural(len(result.arbitration_seconds), 'run')}"
    con.print(
        f"{plural(result.evaluations, 'evaluation')} in {result.seconds:.2f} s{timing}", style=STYLE_DIM
    )
    con.print(f"repeat: {repeat}", style=STYLE_DIM)
