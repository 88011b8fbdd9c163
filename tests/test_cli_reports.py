"""Reports never contradict themselves (issue 23, section 3): each item at the CLI, exit code and words.

True digits come from gmpy2/MPFR (``tests/reference.py``) and, for the files rounded at the last
digit, from mpmath (``mpmath.nstr`` rounds to nearest; the digit after the end, from mpmath at a
higher precision, says whether it rounded up).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import jsonschema
import mpmath
import pytest
from hypothesis import example, given
from hypothesis import strategies as st

from spotcheck.checks import verify_file
from spotcheck.checks.common import Sampler
from spotcheck.checks.schema import REPORT_SCHEMA
from spotcheck.cli import run
from spotcheck.engine import plan
from spotcheck.report.checks import MAP_MATCH, MAP_UNCHECKED, file_map

from .reference import pi_decimal, pi_hex

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
MAP_CHARS = set("·■✗━▲")


def cli(capsys: pytest.CaptureFixture[str], *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def as_json(capsys: pytest.CaptureFixture[str], *args: object) -> tuple[int, dict]:
    code, out, _ = cli(capsys, *args, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, REPORT_SCHEMA)
    return code, payload


def map_line(out: str) -> str:
    return next(ln for ln in out.splitlines() if len(ln) >= 20 and set(ln) <= MAP_CHARS)


def write(path: Path, text: str) -> Path:
    path.write_text(text)
    return path


# -- the map draws what `covered` says -------------------------------------------------------------


@pytest.mark.parametrize("n", [1, 10, 30, 79])
@pytest.mark.parametrize("budget", ["60", "0"])
def test_a_short_file_compared_in_full_is_checked_on_the_whole_map(capsys, tmp_path, n, budget) -> None:
    path = write(tmp_path / "short.txt", "3." + pi_hex(n) + "\n")
    # One digit names no constant by itself (it agrees with some constant by chance).
    named = ["--constant", "pi", "--base", "16"] if n == 1 else []
    code, out, _ = cli(capsys, "verify", path, "--budget", budget, "--seed", "1", *named)
    assert code == 0
    assert "every digit compared" in out.splitlines()[0]
    assert set(map_line(out)) == {MAP_MATCH}


def test_a_decimal_file_covered_by_radix_conversion_is_checked_on_the_whole_map(capsys) -> None:
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-decimal.txt", "--seed", "1")
    assert code == 0
    assert out.splitlines()[0] == (
        "MATCH  all 20 checks agree; every digit covered by radix conversion of the whole file "
        "(pi in base 10, 30,000 digits)"
    )
    assert set(map_line(out)) == {MAP_MATCH}


@pytest.mark.parametrize("width", [20, 77, 200])
def test_each_map_cell_is_checked_exactly_when_covered_reaches_into_it(tmp_path, width) -> None:
    path = write(tmp_path / "pi.txt", "3." + pi_hex(5000) + "\n")
    result = verify_file(str(path), full_seconds=0, samples=30, seed=3)
    line, _ = file_map(result, width)
    n = result.file.checked
    for i, char in enumerate(line):
        # cell i holds the digits p with floor((p - 1) * width / n) == i
        lo, hi = -(-i * n // width) + 1, -(-(i + 1) * n // width)
        touched = any(a <= hi and b >= lo for a, b in result.covered)
        assert char == (MAP_MATCH if touched else MAP_UNCHECKED), (i, lo, hi)


# -- the count of windows and the damage bound describe the same windows ---------------------------


def test_the_bound_is_that_of_the_random_windows_counted(capsys) -> None:
    args = ("verify", SAMPLES / "pi-hex-clean.txt", "--budget", "0", "--samples", "16", "--seed", "1")
    code, out, _ = cli(capsys, *args)
    assert code == 0
    bound = 1 - 0.05 ** (1 / 16)  # Clopper-Pearson, zero failures in 16
    assert f"{bound:.2%}" == "17.07%"
    assert out.splitlines()[0] == (
        "MATCH  all 19 checks agree; 18 windows checked (head, tail and 16 random; 288 digits); "
        "damaged fraction below 17.07% at 95% from the 16 random windows (pi in base 16, 50,000 digits)"
    )
    assert "Scattered-damage model: 16 clean random windows bound the damaged fraction below 17.07%" in out
    code, payload = as_json(capsys, *args)
    sampled = [c for c in payload["checks"] if c["kind"] == "sample"]
    assert payload["random_windows"] == len(sampled) == payload["samples_asked"] == 16
    assert payload["scattered_bound"] == pytest.approx(bound)


# -- sampled windows are distinct; a short file says it has fewer ----------------------------------


def test_a_ten_digit_file_has_one_window_and_says_so(capsys, tmp_path) -> None:
    path = write(tmp_path / "ten.txt", "3." + pi_hex(10) + "\n")
    code, out, _ = cli(capsys, "verify", path, "--budget", "0", "--seed", "1")
    assert code == 0
    lines = out.splitlines()
    assert (
        lines[0]
        == "MATCH  all 2 checks agree; every digit compared in 1 window (10 digits) (pi in base 16, 10 digits)"
    )
    assert lines[1] == "note: no random window was drawn: the file has no window besides those checked anyway"
    assert out.count("243F6A8885  243F6A8885") == 1
    code, payload = as_json(capsys, "verify", path, "--budget", "0", "--seed", "1", "--samples", "8")
    assert payload["random_windows"] == 0 and payload["sample_room"] == 0 and payload["samples_asked"] == 8
    assert payload["notes"] == [
        "no random window was drawn (--samples 8): the file has no window besides those checked anyway"
    ]


def test_a_short_file_draws_every_distinct_window_and_counts_them(capsys, tmp_path) -> None:
    path = write(tmp_path / "thirty.txt", "3." + pi_hex(30) + "\n")
    args = ("verify", path, "--budget", "0", "--samples", "20", "--seed", "4")
    code, out, _ = cli(capsys, *args)
    assert code == 0
    lines = out.splitlines()
    assert lines[0] == (
        "MATCH  all 16 checks agree; every digit compared in 15 windows (head, tail and 13 random; 30 digits) "
        "(pi in base 16, 30 digits)"
    )
    assert (
        lines[1]
        == "note: 13 random windows drawn, not 20 (--samples 20): the file has no other distinct window"
    )
    code, payload = as_json(capsys, *args)
    positions = [c["position"] for c in payload["checks"] if c["position"] >= 1]
    assert sorted(positions) == list(range(1, 16))  # head 1, tail 15, and 2..14 once each
    assert payload["random_windows"] == payload["sample_room"] == 13


def test_a_ten_digit_decimal_file_draws_no_prefix_twice(capsys, tmp_path) -> None:
    path = write(tmp_path / "ten.txt", "3." + pi_decimal(10) + "\n")
    code, out, _ = cli(capsys, "verify", path, "--seed", "1", "--samples", "8")
    assert code == 0
    lines = out.splitlines()
    assert lines[0] == (
        "MATCH  all 3 checks agree; every digit covered by radix conversion of the whole file (pi in base 10, 10 digits)"
    )
    assert (
        lines[1]
        == "note: no random prefix was drawn (--samples 8): the file has no prefix besides those checked anyway"
    )
    assert not any(ln.startswith("sample") for ln in out.splitlines())


@given(
    first=st.integers(1, 50),
    size=st.integers(0, 60),
    fixed=st.lists(st.integers(1, 120), max_size=4),
    count=st.integers(0, 80),
    more=st.integers(0, 10),
    seed=st.integers(0, 2**32 - 1),
)
@example(first=1, size=0, fixed=[1], count=8, more=3, seed=0)  # a 10-digit file: no room at all
def test_sampled_positions_are_distinct_and_avoid_the_fixed_ones(
    first, size, fixed, count, more, seed
) -> None:
    import random

    last = first + size
    s = Sampler(random.Random(seed), first, last, fixed=fixed)
    room = len(set(range(first, last + 1)) - set(fixed))
    assert s.room == room
    drawn = s.batch(count)
    drawn += [p for p in (s.draw() for _ in range(more)) if p is not None]
    assert len(drawn) == len(set(drawn)) == min(room, count + more)
    assert all(first <= p <= last and p not in fixed for p in drawn)


# -- --samples is not dropped without a word ---------------------------------------------------------


def test_samples_asked_for_but_not_drawn_when_every_digit_is_compared(capsys) -> None:
    args = ("verify", SAMPLES / "pi-hex-clean.txt", "--samples", "5", "--seed", "1")
    code, out, _ = cli(capsys, *args)
    assert code == 0
    lines = out.splitlines()
    assert (
        lines[0] == "MATCH  all 3 checks agree; every digit compared with arb (pi in base 16, 50,000 digits)"
    )
    note = "no random window was drawn (--samples 5): every digit was compared with arb instead (--budget 0 checks windows only)"
    assert lines[1] == f"note: {note}"
    code, payload = as_json(capsys, *args)
    assert payload["notes"] == [note]
    assert payload["note_codes"] == [
        {"code": "samples-not-drawn", "asked": 5, "reference": "arb", "compared": True}
    ]
    assert payload["samples_asked"] == 5 and payload["sample_room"] is None and payload["random_windows"] == 0
    # not asked: nothing to say
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1")
    assert code == 0 and "note:" not in out


# -- an interrupted check says what it established -----------------------------------------------


def test_verify_interrupted_in_its_full_comparison_says_the_windows_that_match(capsys, monkeypatch) -> None:
    from spotcheck.checks import scan

    def ctrl_c(*args: object, **kwargs: object) -> tuple[str, str]:
        raise KeyboardInterrupt  # as Ctrl-C during the reference computation

    monkeypatch.setattr(scan, "reference_digits", ctrl_c)
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1")
    assert code == 130
    assert out.splitlines()[0] == (
        "INCOMPLETE  interrupted before the check finished; no wrong digit so far: 2 windows "
        "(head and tail; 32 digits) match (pi in base 16, 50,000 digits)"
    )
    code, payload = as_json(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1")
    assert code == 130 and payload["verdict"] == "incomplete" and payload["interrupted"]
    assert payload["covered"] == [[1, 16], [49985, 50000]]


def test_verify_interrupted_before_any_window_says_nothing_was_compared(capsys, monkeypatch) -> None:
    from spotcheck.checks.common import HexOracle

    def ctrl_c(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(HexOracle, "compare", ctrl_c)
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1", "--budget", "0")
    assert code == 130
    assert out.splitlines()[0] == (
        "INCOMPLETE  interrupted before any digit was compared (pi in base 16, 50,000 digits)"
    )


# -- locate lists each comparison once ---------------------------------------------------------------


def test_locate_lists_each_comparison_once(capsys) -> None:
    code, out, _ = cli(capsys, "locate", SAMPLES / "pi-decimal-flipped.txt")
    assert code == 1
    assert (
        out.splitlines()[0] == "MISMATCH  first wrong digit at position 12,345 (pi in base 10, 30,000 digits)"
    )
    assert out.count("hex 10,235 ") == 1
    rows = [ln.split() for ln in out.splitlines() if re.match(r"^(tail|bisection|confirm)", ln)]
    keys = [tuple(r[1:]) if r[1] != "(hex)" else tuple(r[2:]) for r in rows]
    assert len(keys) == len(set(keys))


@pytest.mark.parametrize("flip", [7, 1500, 2990, 3000])
def test_locate_on_a_3000_digit_file_lists_each_comparison_once(capsys, tmp_path, flip) -> None:
    digits = list(pi_decimal(3000))
    digits[flip - 1] = str((int(digits[flip - 1]) + 5) % 10)
    path = write(tmp_path / "flip.txt", "3." + "".join(digits) + "\n")
    code, payload = as_json(capsys, "locate", path)
    assert code == 1 and payload["first_mismatch"] == flip
    keys = [(c["base"], c["position"], c["expected"], c["found"]) for c in payload["checks"]]
    assert len(keys) == len(set(keys))


# -- a last digit rounded up is named by every check -------------------------------------------------


def rounded(constant: str, significant: int) -> tuple[str, str]:
    """``nstr`` of the constant (rounded to nearest) and its true digits one further (mpmath)."""
    with mpmath.workdps(significant + 40):
        value = getattr(mpmath, constant)
        return (
            mpmath.nstr(+value, significant, strip_zeros=False),
            mpmath.nstr(+value, significant + 30, strip_zeros=False)[: significant + 2],
        )


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_pi_rounded_at_its_last_digit_is_named_by_verify_and_locate(capsys, tmp_path, seed) -> None:
    text, truth = rounded("pi", 3001)
    assert text[:-1] == truth[:-2] and int(truth[-1]) >= 5  # mpmath: digit 3,001 is 5 or more
    path = write(tmp_path / "pi-rounded.txt", text + "\n")
    code, out, _ = cli(capsys, "verify", path, "--seed", seed)
    assert code == 1
    assert out.splitlines()[0] == (
        "MISMATCH  the last digit is the true expansion rounded up (digit 3,000), not a truncation "
        "(pi in base 10, 3,000 digits)"
    )
    code, payload = as_json(capsys, "verify", path, "--seed", seed)
    assert payload["rounded_from"] == 3000 and payload["first_wrong_bracket"] == [3000, 3000]
    code, out, _ = cli(capsys, "locate", path)
    assert code == 1
    assert out.splitlines()[0] == (
        "MISMATCH  first wrong digit at position 3,000 (pi in base 10, 3,000 digits): "
        "the last digit is the true expansion rounded up (digit 3,000), not a truncation"
    )


def test_e_rounded_at_its_last_digit_is_named_by_verify_locate_and_scan(capsys, tmp_path) -> None:
    text, truth = rounded("e", 5000)
    assert text[:-1] == truth[:-2] and int(truth[-1]) >= 5  # mpmath: it was rounded up
    path = write(tmp_path / "e-rounded.txt", text + "\n")
    words = "the last digit is the true expansion rounded up (digit 4,999), not a truncation"
    for command in ("verify", "scan"):
        code, out, _ = cli(capsys, command, path)
        assert code == 1 and out.splitlines()[0] == f"MISMATCH  {words} (e in base 10, 4,999 digits)"
        code, payload = as_json(capsys, command, path)
        assert payload["rounded_from"] == 4999
    code, out, _ = cli(capsys, "locate", path)
    assert code == 1
    assert (
        out.splitlines()[0]
        == f"MISMATCH  first wrong digit at position 4,999 (e in base 10, 4,999 digits): {words}"
    )


def test_a_carry_through_the_last_digits_is_named_too(capsys, tmp_path) -> None:
    # pi to 181 significant digits (mpmath) rounds ...9|5 up: the last two digits change
    text, truth = rounded("pi", 181)
    assert text[-2:] != truth[-3:-1] and text[-3] == truth[-4]
    path = write(tmp_path / "carry.txt", text + "\n")
    for command in ("verify", "locate"):
        code, payload = as_json(capsys, command, path)
        assert code == 1 and payload["rounded_from"] == 179
    code, out, _ = cli(capsys, "verify", path)
    assert "digits 179 to 180 are the true ones rounded up at the last digit, not a truncation" in out


@pytest.mark.parametrize("change", [+2, -1])
def test_a_last_digit_wrong_otherwise_is_not_called_rounded(capsys, tmp_path, change) -> None:
    digits = pi_decimal(3000)
    last = (int(digits[-1]) + change) % 10
    path = write(tmp_path / "last.txt", "3." + digits[:-1] + str(last) + "\n")
    for command in ("verify", "locate"):
        code, payload = as_json(capsys, command, path)
        assert code == 1 and payload["rounded_from"] is None
    code, payload = as_json(capsys, "verify", write(tmp_path / "true.txt", "3." + digits + "\n"))
    assert code == 0 and payload["rounded_from"] is None


# -- digits: the estimate before a long run, and a cluster named only with a size that reaches ------


def test_a_long_digits_run_says_its_estimate_and_the_cluster_size_that_would_finish_in_a_year(
    capsys, monkeypatch
) -> None:
    from spotcheck.engine import api

    def ctrl_c(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt  # stop before any block: what matters is what was said first

    monkeypatch.setattr(
        plan, "MAX_LOCAL_CPU_SECONDS", math.inf
    )  # let it start, whatever this machine's speed
    monkeypatch.setattr(api, "extract", ctrl_c)
    code, _, err = cli(capsys, "digits", "pi", "--at", 10**16, "--count", "8", "--workers", "2")
    assert code == 130
    lines = err.splitlines()
    assert lines[0].startswith("estimate [bellard]: ") and "years of CPU time" in lines[0]
    m = re.fullmatch(
        r"this run would take about ([\d.]+) years on 2 workers; a Dask cluster of about ([\d,]+) cores "
        r"\(--cluster ADDRESS\) would finish the head sum in about ([\d.]+) days",
        lines[1],
    )
    assert m, lines[1]
    years, cores, days = float(m[1]), int(m[2].replace(",", "")), float(m[3])
    assert cores <= 1024 and days <= 365.25 and years * 2 <= cores * 1.01  # cores x 1 year >= CPU time


def test_a_refusal_names_a_cluster_only_with_the_cores_that_bring_it_within_a_year(
    capsys, monkeypatch
) -> None:
    code, _, err = cli(capsys, "digits", "pi", "--at", 10**18, "--count", "8")
    assert code == 2
    last = err.splitlines()[-1]
    assert re.fullmatch(
        r"error: position 1,000,000,000,000,000,000 of pi is out of reach: about [\d.e+]+ core-years of CPU "
        r"time on the (compiled kernel|pure-Python path; the compiled kernel is not in use \(SPOTCHECK_PURE is set\)) "
        r"\(the limit is 100 core-years\); no option makes it feasible \(a Dask "
        r"cluster keeps at most 1,024 cores busy: about [\d.]+ years\)",
        last,
    ), last
    assert "would make it feasible" not in err
    # Within reach of a cluster of a size the estimate computes: ten years' reach makes 10^17 so.
    monkeypatch.setattr(plan, "CLUSTER_REACH_SECONDS", 10 * 365.25 * 86400)
    code, _, err = cli(capsys, "digits", "pi", "--at", 10**17, "--count", "8")
    assert code == 2
    m = re.search(
        r"; a Dask cluster of about ([\d,]+) cores \(--cluster ADDRESS\) would finish the head sum in about ([\d.]+) years$",
        err.splitlines()[-1],
    )
    assert m, err
    assert int(m[1].replace(",", "")) <= 1024 and float(m[2]) <= 10.0


def test_a_digits_run_on_a_cluster_is_never_offered_a_cluster(capsys) -> None:
    code, _, err = cli(
        capsys, "digits", "pi", "--at", 10**22, "--count", "8", "--cluster", "tcp://127.0.0.1:1"
    )
    assert code == 2
    assert "Dask cluster of about" not in err and "no option makes it feasible" in err.splitlines()[-1]
