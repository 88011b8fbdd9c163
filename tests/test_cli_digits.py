"""`spotcheck digits`, `spotcheck constants` and the CLI's error contract."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from spotcheck.cli import run

from .reference import pi_hex


def hex_digits_reference(position: int, count: int) -> str:
    return pi_hex(position + count)[position - 1 : position - 1 + count]  # gmpy2/MPFR


def cli(capsys, *args: str) -> tuple[int, str, str]:
    code = run(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def test_digits_plain(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "1000", "--count", "14")
    assert code == 0
    assert out.splitlines()[0] == pi_hex(1013)[999:1013]


def test_digits_quiet_prints_only_digits(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "1", "--count", "8", "--quiet")
    assert (code, out) == (0, "243F6A88\n")


def test_digits_json_and_cross_check(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "500", "--count", "20", "--json", "--cross-check")
    assert code == 0
    payload = json.loads(out)
    assert payload["digits"] == pi_hex(519)[499:519]
    assert payload["position"] == 500 and payload["constant"] == "pi"
    assert payload["formula"] in ("bbp", "bellard")
    assert payload["cross_check"]["agree"] is True
    assert set(payload["cross_check"]["formulas"]) == {"bbp", "bellard"}


def test_digits_formula_choice(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "7", "--count", "10", "--formula", "bbp", "--json")
    assert code == 0 and json.loads(out)["formula"] == "bbp"


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["digits", "tau"], "unknown constant"),
        (["digits", "pi", "--at", "0"], "position must be at least 1"),
        (["digits", "pi", "--at", "-3"], "position"),
        (["digits", "pi", "--count", "0"], "count must be at least 1"),
        (["digits", "pi", "--count", "100000000"], "too large"),
        (["digits", "pi", "--at", "1.5"], "--at"),
        (["digits", "pi", "--formula", "zzz"], "no formula"),
        (["digits", "log2", "--cross-check"], "only one formula"),
        (["frobnicate"], "No such command"),
    ],
)
def test_bad_input_is_one_line_exit_2(capsys, args, needle) -> None:
    code, out, err = cli(capsys, *args)
    assert code == 2
    lines = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert len(lines) == 1 and needle in lines[0]
    assert "Traceback" not in err


def test_constants_lists_sources(capsys) -> None:
    code, out, _ = cli(capsys, "constants", "--json")
    assert code == 0
    names = {c["name"]: c for c in json.loads(out)["constants"]}
    assert {"pi", "log2", "catalan"} <= set(names)
    pi = names["pi"]
    assert {f["key"] for f in pi["formulas"]} == {"bbp", "bellard"}
    assert pi["default_formula"] == "bellard"  # fewer terms per bit
    assert all("1997" in f["source"] for f in pi["formulas"])


def test_constants_table(capsys) -> None:
    code, out, _ = cli(capsys, "constants")
    assert code == 0 and "bellard (default)" in out and "Bellard" in out


def test_version_names_kernel(capsys) -> None:
    code, out, _ = cli(capsys, "--version")
    assert code == 0 and "spotcheck" in out and "kernel" in out


def test_console_script_subprocess() -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "spotcheck", "digits", "pi", "--count", "8", "--quiet"],
        capture_output=True,
        text=True,
        check=False,
    )
    assert proc.returncode == 0 and proc.stdout == "243F6A88\n"


def test_import_is_light() -> None:
    code = "import sys, spotcheck; spotcheck.hex_digits('pi', 1, 4); print('rich' in sys.modules, 'typer' in sys.modules)"
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert proc.stdout.strip() == "False False"


def test_checkpoint_for_another_request_is_refused(capsys, tmp_path) -> None:
    ckpt = tmp_path / "run.json"
    code, out, _ = cli(
        capsys, "digits", "pi", "--at", "200000", "--count", "14", "--checkpoint", str(ckpt), "--quiet"
    )
    assert code == 0 and ckpt.exists()
    assert out.strip() == hex_digits_reference(200_000, 14)
    before = ckpt.read_bytes()
    code, _, err = cli(capsys, "digits", "pi", "--at", "300000", "--count", "14", "--checkpoint", str(ckpt))
    lines = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert code == 2 and len(lines) == 1 and "checkpoint" in lines[0]
    assert ckpt.read_bytes() == before  # refused, never rewritten


def test_cluster_without_dask_says_how_to_install(capsys, monkeypatch) -> None:
    import builtins

    real_import = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name == "distributed" or name.startswith("distributed."):
            raise ImportError("no dask here")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    code, _, err = cli(capsys, "digits", "pi", "--at", "1000", "--cluster", "tcp://127.0.0.1:9")
    assert code == 2 and "spotcheck[cluster]" in err
