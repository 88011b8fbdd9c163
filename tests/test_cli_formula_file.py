"""--formula-file through the CLI: digits, constants and checks for a user-defined constant."""

from __future__ import annotations

import json
from pathlib import Path

from spotcheck.cli import run

from .reference import pi_hex

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
PI_FILE = SAMPLES / "formulas" / "pi-bbp.toml"


def cli(capsys, *args: object) -> tuple[int, str, str]:
    code = run([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def test_digits_from_formula_file(capsys) -> None:
    code, out, _ = cli(
        capsys, "digits", "pi-from-file", "--at", "5000", "--count", "20", "--formula-file", PI_FILE, "--json"
    )
    assert code == 0
    payload = json.loads(out)
    assert payload["digits"] == pi_hex(5019)[4999:5019]  # reference: gmpy2/MPFR const_pi
    code, out, _ = cli(
        capsys, "digits", "pi-file", "--count", "12", "--cross-check", "--formula-file", PI_FILE
    )
    assert code == 0 and "agree" in out


def test_constants_lists_the_file(capsys) -> None:
    code, out, _ = cli(capsys, "constants", "--json", "--formula-file", PI_FILE)
    names = {c["name"]: c for c in json.loads(out)["constants"]}
    assert code == 0 and names["pi-from-file"]["origin"].endswith("pi-bbp.toml")


def test_verify_with_a_user_constant(capsys, tmp_path) -> None:
    path = tmp_path / "pi.txt"
    path.write_text("3." + pi_hex(3000) + "\n")
    code, out, _ = cli(
        capsys, "verify", path, "--constant", "pi-from-file", "--formula-file", PI_FILE, "--json"
    )
    assert code == 0 and json.loads(out)["file"]["constant"] == "pi-from-file"
    # scan needs an independent full computation, which a user formula does not have
    code, _, err = cli(capsys, "scan", path, "--constant", "pi-from-file")
    assert code == 2 and "no independent full computation" in err


def test_malformed_formula_file_is_exit_2(capsys, tmp_path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(
        '[constant]\nname = "x"\n[[constant.formula]]\ns = 1\nb = 10\nm = 1\ncoefficients = [1]\nscale = 1\nsource = "none"\n'
    )
    code, _, err = cli(capsys, "constants", "--formula-file", bad)
    lines = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert code == 2 and len(lines) == 1 and "power of two" in lines[0]


def test_locate_with_a_user_constant_explains_no_scan(capsys, tmp_path) -> None:
    digits = list(pi_hex(3000))
    digits[1000] = "0" if digits[1000] != "0" else "1"  # isolated damage; the tail matches
    path = tmp_path / "pi.txt"
    path.write_text("3." + "".join(digits) + "\n")
    code, out, _ = cli(
        capsys, "locate", path, "--constant", "pi-from-file", "--formula-file", PI_FILE, "--json"
    )
    payload = json.loads(out)
    assert code == 3 and payload["verdict"] == "unconfirmed"  # isolated damage not ruled out (issue 12)
    assert payload["first_mismatch"] is None  # nothing certain was found...
    assert "no independent full computation" in payload["explanation"]  # ...and it says why
    code, out, _ = cli(capsys, "locate", path, "--json")  # the built-in pi has Arb: found
    assert code == 1 and json.loads(out)["first_mismatch"] == 1001
