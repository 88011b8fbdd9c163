"""Rendering of `spotcheck digits` and `spotcheck constants`."""

from __future__ import annotations

from typing import Any

from spotcheck.engine.api import DigitResult, fast_path_position
from spotcheck.formulas import Constant
from spotcheck.report.console import STYLE_BAD, STYLE_DIGITS, STYLE_DIM, STYLE_OK, emit_json, stdout_console


def group(digits: str, size: int = 8) -> str:
    return " ".join(digits[i : i + size] for i in range(0, len(digits), size))


def digits_payload(result: DigitResult, cross: list[DigitResult] | None) -> dict[str, Any]:
    out = result.to_dict()
    if cross is not None:
        out["cross_check"] = {
            "agree": all(r.digits == result.digits for r in cross),
            "formulas": {r.formula: r.digits for r in cross},
        }
    return out


def show_digits(result: DigitResult, cross: list[DigitResult] | None, *, as_json: bool, quiet: bool) -> None:
    if as_json:
        emit_json(digits_payload(result, cross))
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
        f"{result.terms:,} terms in {result.seconds:.3f} s ({result.backend} kernel)",
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
            reach = f"compiled kernel up to position {fast:.3g}" if fast else "pure Python path only"
            con.print(f"  {label}: {f.notation()}")
            con.print(f"    [{STYLE_DIM}]{f.cost_per_bit:.2f} terms per bit; {reach}[/]")
            con.print(f"    [{STYLE_DIM}]source: {f.source}[/]")
