"""Words a user understands and options as users type them (issue 23, section 4), through the CLI:
exit codes and the exact words."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest

from spotcheck.checks.schema import COMPARE_SCHEMA, SCHEMA_VERSION
from spotcheck.cli import parse_whole, run
from spotcheck.engine import backend
from spotcheck.engine.backend import PURE_SLOWDOWN

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "samples"
README = (ROOT / "README.md").read_text()

# Internal words that must never reach a user: engine jargon, typer's raw metavars, a count of
# terms for a full evaluation (it has none), and plurals of one.
BANNED = [
    r"\btwin\b",
    r"exponent D\b",
    r"compiled\+twin",
    r"full evaluation\) kernel",
    r"\bc kernel\b",
    r"(?<![\d,])0 terms",
    r"(?<![\d,])1 evaluations",
    r"<str>",
    r"<int>",
    r"<path>",
    r"\{file\}",
    r"Python/gmpy2",
]


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


COMMAND_LINES = [
    ["--version"],
    ["constants"],
    ["digits", "pi", "--at", "1000", "-n", "10"],
    ["digits", "e", "--at", "1000", "-n", "10"],
    ["digits", "pi", "--at", "1.2e18", "-n", "4"],  # refused: the estimate line and the refusal
    ["verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1"],
    ["verify", SAMPLES / "pi-hex-clean.txt", "--seed", "1", "--budget", "0"],
    ["verify", SAMPLES / "pi-decimal.txt"],
    ["locate", SAMPLES / "pi-hex-astray.txt"],
    ["scan", SAMPLES / "pi-hex-clean.txt"],
    ["inspect", SAMPLES / "pi-decimal.txt"],
    ["compare", SAMPLES / "log2-hex.txt", SAMPLES / "log2-hex-mirror.txt.gz"],
    ["compare", SAMPLES / "pi-decimal-flipped.txt", SAMPLES / "pi-decimal.txt"],
    *[
        [c, "--help"]
        for c in ("digits", "constants", "verify", "locate", "scan", "inspect", "schema", "compare")
    ],
    ["--help"],
]


@pytest.mark.parametrize("args", COMMAND_LINES, ids=lambda a: " ".join(str(x) for x in a))
def test_no_internal_words_reach_the_user(args, capsys, monkeypatch) -> None:
    monkeypatch.setenv("COLUMNS", "200")
    code, out, err = cli(capsys, *args)
    assert code in (0, 1, 2, 3)
    for pattern in BANNED:
        assert not re.search(pattern, out + err), (pattern, out + err)


def test_no_internal_words_on_the_pure_python_path() -> None:
    env = {**os.environ, "SPOTCHECK_PURE": "1", "COLUMNS": "200"}
    for args in (["--version"], ["digits", "pi", "--at", "1000", "-n", "10"]):
        done = subprocess.run(
            [sys.executable, "-m", "spotcheck", *args], capture_output=True, text=True, env=env, cwd=ROOT
        )
        assert done.returncode == 0, done.stderr
        for pattern in BANNED:
            assert not re.search(pattern, done.stdout + done.stderr), (pattern, done.stdout + done.stderr)
    assert (
        "head-sum kernel: pure-Python path (SPOTCHECK_PURE is set)"
        in subprocess.run(
            [sys.executable, "-m", "spotcheck", "--version"],
            capture_output=True,
            text=True,
            env=env,
            cwd=ROOT,
        ).stdout
    )


def test_full_evaluation_says_so_without_terms(capsys) -> None:
    code, out, err = cli(capsys, "digits", "e", "--at", "1000", "-n", "10")
    assert code == 0
    assert out.splitlines()[0] == "9140DB1E93"
    assert "; evaluated in full in " in out and " terms" not in out and "kernel" not in out
    assert err.startswith(
        "e has no digit-extraction formula: every digit up to position 1,009 was computed (full evaluation of exp(1)"
    )


def test_compiled_kernel_is_named_in_words(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "1000", "-n", "10")
    assert code == 0
    path = "compiled kernel" if backend.BACKEND == "c" else "pure-Python path"
    assert re.search(rf"; 2,891 terms in \d+\.\d{{3}} s \({path}\)$", out.splitlines()[2])


def test_one_evaluation_is_singular(capsys) -> None:
    code, out, _ = cli(capsys, "scan", SAMPLES / "pi-hex-clean.txt")
    assert code == 0
    assert re.search(r"^1 evaluation in \d+\.\d\d s$", out, flags=re.M)


def test_one_figure_for_the_pure_python_path(capsys) -> None:
    """The estimate line, the refusal and the README give the same measured figure."""
    assert f"about {PURE_SLOWDOWN} times slower per term than the compiled kernel (measured " in README
    assert re.findall(r"about (\d+) times slower per term", README) == [str(PURE_SLOWDOWN)]
    code, _, err = cli(capsys, "digits", "pi", "--at", "1.2e18", "-n", "4")
    assert code == 2
    estimate, refusal = err.splitlines()
    if backend.BACKEND != "c":  # the suite on the pure-Python path (SPOTCHECK_PURE)
        assert estimate.endswith(
            f"path: pure-Python path (about {PURE_SLOWDOWN} times slower per term than the compiled kernel) "
            "because the compiled kernel is not in use (SPOTCHECK_PURE is set)"
        )
        assert "of CPU time on the pure-Python path; the compiled kernel is not in use" in refusal
        return
    assert estimate.endswith(
        f"path: compiled kernel, then the pure-Python path (about {PURE_SLOWDOWN} times slower per term than "
        "the compiled kernel) for 4% of the terms because from term k = 461,168,601,842,738,790 on, "
        "the moduli q (m k + j)^s reach 2^63, the compiled kernel's limit"
    )
    assert refusal.startswith("error: position 1,200,000,000,000,000,000 of pi is out of reach: about ")
    assert "of CPU time on the compiled kernel and the pure-Python path; from term k" in refusal


def test_help_shows_what_to_type(capsys, monkeypatch) -> None:
    monkeypatch.setenv("COLUMNS", "200")
    _, out, _ = cli(capsys, "verify", "--help")
    assert "Usage: spotcheck verify [OPTIONS] FILE" in out
    assert re.search(r"--at +POSITION +Also check the window at this position", out)
    assert re.search(r"--limit +N +Check only the first N digits of the file\.", out)
    assert re.search(
        r"--ignore-labels +Leave out the finding of position labels that disagree with the digit count "
        r"\(the digits are checked either way; exit 0 when they all match\)\.",
        out,
    )
    assert re.search(
        r"--quiet +-q +Print nothing: the exit code is the answer \(errors still go to stderr\)\.", out
    )
    _, out, _ = cli(capsys, "compare", "--help")
    assert "Usage: spotcheck compare [OPTIONS] A B" in out
    _, out, _ = cli(capsys, "digits", "--help")
    assert "Usage: spotcheck digits [OPTIONS] NAME" in out
    assert re.search(r"--quiet +-q +Print the digits alone \(no estimate, no progress\)\.", out)
    _, out, _ = cli(capsys, "schema", "--help")
    assert "Print the JSON schema of the --json reports of verify, locate, scan and compare." in out


def test_quiet_prints_nothing_and_the_exit_code_answers(capsys) -> None:
    assert cli(capsys, "verify", SAMPLES / "pi-hex-astray.txt", "--quiet", "--budget", "0") == (1, "", "")
    assert cli(capsys, "compare", SAMPLES / "log2-hex.txt", SAMPLES / "log2-hex-mirror.txt.gz", "-q") == (
        1,
        "",
        "",
    )
    assert (
        "(exit code only)" not in README
        and "nothing is printed but errors, the exit code is the answer" in README
    )


def test_ignore_labels_still_checks_the_digits(capsys, tmp_path) -> None:
    import mpmath

    with mpmath.workdps(120):
        digits = mpmath.nstr(mpmath.pi, 110, strip_zeros=False)[2:102]  # true digits from mpmath
    good = "\n".join(f"{1 + 20 * i:>4}: {digits[20 * i : 20 * i + 20]}" for i in range(5)) + "\n"
    bad_label = good.replace("  41: ", "  42: ")
    f = tmp_path / "labels.txt"
    f.write_text("3.\n" + bad_label)
    code, out, _ = cli(capsys, "verify", f, "--constant", "pi", "--base", "10")
    assert code == 1 and "LABELS DISAGREE" in out
    code, out, _ = cli(capsys, "verify", f, "--constant", "pi", "--base", "10", "--ignore-labels")
    assert code == 0 and out.startswith("MATCH") and "LABELS DISAGREE" not in out
    wrong = f.read_text().replace("89793", "89794")
    f.write_text(wrong)
    code, out, _ = cli(capsys, "verify", f, "--constant", "pi", "--base", "10", "--ignore-labels")
    assert code == 1 and out.startswith("MISMATCH")


def test_compare_json_has_the_one_schema_version(capsys) -> None:
    code, out, _ = cli(
        capsys, "compare", SAMPLES / "log2-hex.txt", SAMPLES / "log2-hex-mirror.txt.gz", "--json"
    )
    assert code == 1
    payload = json.loads(out)
    jsonschema.validate(payload, COMPARE_SCHEMA)
    assert payload["schema_version"] == SCHEMA_VERSION == 2
    assert f"Reports are `schema_version` {SCHEMA_VERSION} " in README
    code, out, _ = cli(capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--json")
    assert json.loads(out)["schema_version"] == payload["schema_version"]


@pytest.mark.parametrize(
    ("typed", "value"),
    [
        ("1e9", 10**9),
        ("1E9", 10**9),
        ("10^9", 10**9),
        ("1,000,000,000", 10**9),
        ("2.5e3", 2500),
        ("1000", 1000),
    ],
)
def test_whole_numbers_as_typed(typed: str, value: int) -> None:
    assert parse_whole(typed) == value


@pytest.mark.parametrize("typed", ["1e3", "10^3", "1,000", "1000.0", "1e+3"])
def test_digits_reads_positions_as_typed(typed, capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", typed, "-n", "1e1", "--quiet")
    assert (code, out) == (0, "349F1C09B0\n")


def test_verify_reads_positions_and_counts_as_typed(capsys) -> None:
    code, out, _ = cli(
        capsys, "verify", SAMPLES / "pi-hex-clean.txt", "--at", "4.5e4", "--samples", "2e0", "--budget", "0",
        "--seed", "1", "--limit", "5e4", "--window", "1.6e1",
    )  # fmt: skip
    assert code == 0
    assert out.splitlines()[-1] == (
        "repeat: spotcheck verify samples/pi-hex-clean.txt --samples 2 --seed 1 --at 45000 --budget 0.0 "
        "--window 16 --limit 50000"
    ).replace("samples/pi-hex-clean.txt", str(SAMPLES / "pi-hex-clean.txt"))
    assert re.search(r"^user +45,000 ", out, flags=re.M)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (
            ["digits", "pi", "--at", "1.5e0"],
            "error: Invalid value for '--at': 1.5e0 is 1.5, not a whole number",
        ),
        (
            ["digits", "pi", "--at", "1e-3"],
            "error: Invalid value for '--at': 1e-3 is 0.001, not a whole number",
        ),
        (
            ["digits", "pi", "-n", "2.5"],
            "error: Invalid value for '--count' / '-n': 2.5 is 2.5, not a whole number",
        ),
        (
            ["digits", "pi", "--at", "lots"],
            "error: Invalid value for '--at': 'lots' is not a whole number (write it as 1000000, 1,000,000, 1e6 or 10^6)",
        ),
        (["digits", "pi", "--at", "1e99"], "error: Invalid value for '--at': 1e99 is too large"),
        (
            ["verify", SAMPLES / "pi-hex-clean.txt", "--at", "1.5e0"],
            "error: Invalid value for '--at': 1.5e0 is 1.5, not a whole number",
        ),
        (
            ["verify", SAMPLES / "pi-hex-clean.txt", "--limit", "1e-3"],
            "error: Invalid value for '--limit': 1e-3 is 0.001, not a whole number",
        ),
        (
            ["verify", SAMPLES / "pi-hex-clean.txt", "--samples", "0.5"],
            "error: Invalid value for '--samples' / '-s': 0.5 is 0.5, not a whole number",
        ),
        (
            ["scan", SAMPLES / "pi-hex-clean.txt", "--workers", "0"],
            "error: Invalid value for '--workers' / '-w': must be 1 or more, got 0",
        ),
    ],
)
def test_a_number_that_is_not_whole_is_an_error(args, message, capsys) -> None:
    code, out, err = cli(capsys, *args)
    assert (code, out) == (2, "")
    assert err == message + "\n"


def _hex_file(path: Path, digits: str) -> Path:
    path.write_text("\n".join(digits[i : i + 80] for i in range(0, len(digits), 80)) + "\n")
    return path


def test_compare_notes_are_worded_from_codes(capsys, tmp_path) -> None:
    """The check gives codes and numbers; the report words them, on the terminal and in JSON."""
    true = "".join((SAMPLES / "log2-hex.txt").read_text().split())  # 20,000 true digits (gmpy2, make_samples)
    damaged = true[:5000] + "".join("0" if c != "0" else "1" for c in true[5000:5100]) + true[5100:]
    a = _hex_file(tmp_path / "a.txt", true[:19990])
    b = _hex_file(tmp_path / "b.txt", damaged)
    code, out, _ = cli(capsys, "compare", a, b)
    assert code == 1
    assert "note: the first 64 of the run's 100 digits were checked" in out.splitlines()
    assert (
        "B is longer: 10 extra digits from position 19,991 (" + true[19990:20000].upper() + "...): right; "
        "all 10 extra digits were checked"
    ) in out.splitlines()
    code, out, _ = cli(capsys, "compare", a, b, "--json")
    payload = json.loads(out)
    jsonschema.validate(payload, COMPARE_SCHEMA)
    (run,) = payload["runs"]
    assert run["notes"] == [{"code": "run-partly-checked", "checked": 64, "length": 100}]
    assert run["note"] == "the first 64 of the run's 100 digits were checked"
    assert payload["extra"]["notes"] == [{"code": "extra-all-checked", "checked": 10}]
    assert payload["extra"]["note"] == "all 10 extra digits were checked"
    shifted = _hex_file(tmp_path / "c.txt", true[:7000] + true[7003:])
    code, out, _ = cli(capsys, "compare", a, shifted, "--json")
    run = json.loads(out)["runs"][0]
    assert run["notes"][0] == {"code": "shifted", "missing_in": "B", "digits": 3}
    assert run["note"].startswith(
        "copy B lacks 3 digits that the other has (or the other has 3 extra) at or before this position: "
        "from here on the copies are shifted, so the comparison stops; the first 64 of the run's "
    )


def _code_strings(path: Path) -> str:
    """Every string literal of a module's code (docstrings left out), joined."""
    import ast

    tree = ast.parse(path.read_text())
    docstrings = {  # a string standing alone as a statement: a docstring, of a module, class, function or field
        id(node.value)
        for node in ast.walk(tree)
        if isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant)
    }
    return "\n".join(
        n.value
        for n in ast.walk(tree)
        if isinstance(n, ast.Constant) and isinstance(n.value, str) and id(n) not in docstrings
    )


def test_checks_hold_no_sentences_for_notes() -> None:
    """The notes of compare and the warnings of verify/locate are built in the report layer."""
    compare_strings = _code_strings(ROOT / "spotcheck" / "checks" / "compare.py")
    common_strings = _code_strings(ROOT / "spotcheck" / "checks" / "common.py")
    for phrase in ("not arbitrated", "converted to hex", "were checked", "lacks"):
        assert phrase not in compare_strings, phrase
    for phrase in ("damaged record", "went on without it"):
        assert phrase not in common_strings, phrase


def test_check_rows_are_worded_from_codes(capsys) -> None:
    code, out, _ = cli(capsys, "locate", SAMPLES / "pi-hex-astray.txt", "--json")
    assert code == 1
    confirm = [c for c in json.loads(out)["checks"] if c["kind"] == "confirm"]
    assert [(c["note"], c["notes"]) for c in confirm] == [
        ("the window just before the first wrong digit", [{"code": "window-before-first-wrong"}])
    ]
    code, out, _ = cli(capsys, "verify", SAMPLES / "e-decimal.txt", "--json")
    assert code == 0
    full = [c for c in json.loads(out)["checks"] if c["kind"] == "full"]
    assert [(c["note"], c["notes"]) for c in full] == [
        (
            "all 20,000 digits compared with a full evaluation (Arb)",
            [{"code": "full-evaluation-compared", "digits": 20000}],
        )
    ]


@pytest.mark.parametrize(
    ("module", "phrases"),
    [
        ("locate.py", ["the window just before the first wrong digit"]),
        ("full.py", ["digits compared with a full evaluation (Arb)"]),
        ("radix.py", ["hex digits determined by", "recomputed from the verified"]),
        ("verify.py", ["wrong runs found by"]),
        ("common.py", ["digits before the point"]),
    ],
)
def test_check_rows_hold_no_sentences(module: str, phrases: list[str]) -> None:
    strings = _code_strings(ROOT / "spotcheck" / "checks" / module)
    for phrase in phrases:
        assert phrase not in strings, phrase
