"""`spotcheck digits`, `spotcheck constants` and the CLI's error contract."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from spotcheck.cli import run
from spotcheck.engine import backend

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


# --- deep positions: the estimate, refusals, faults (issue 13) ---------------------------

ENV = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1])}


def rss_mib(pid: int) -> float:
    with open(f"/proc/{pid}/status", encoding="ascii") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    raise AssertionError("no VmRSS")


@pytest.mark.skipif(backend.BACKEND != "c", reason="the start-up promise is the compiled kernel's")
def test_position_1e15_starts_at_once_in_bounded_memory() -> None:
    # The head has 4 * 10^14 values of k; nothing may be built up front.
    t0 = time.monotonic()
    proc = subprocess.Popen(
        [sys.executable, "-m", "spotcheck", "digits", "pi", "--at", "1000000000000000", "--count", "8"],
        env=ENV,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        assert proc.stderr is not None
        first = proc.stderr.readline()
        started_in = time.monotonic() - t0
        assert first.startswith("estimate [bellard]: "), first
        assert "2,800,000,000,000,000 head terms" in first and "CPU time" in first
        if backend.BACKEND == "c":
            assert "path: compiled kernel" in first
            time.sleep(1.0)  # running: its memory stays small
            assert proc.poll() is None
            assert rss_mib(proc.pid) < 200
        else:  # the twin's estimate for 10^15 is close to the refusal limit; either is an answer
            proc.wait(timeout=30)
        assert started_in < 2.0 + 1.0  # 2 s, with room for a loaded machine's process start
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
            proc.wait(timeout=30)
    if backend.BACKEND == "c":
        assert proc.returncode == 130
        rest = proc.stderr.read()
        assert "interrupted: " in rest and "Traceback" not in rest


@pytest.mark.parametrize("position", [str(2**63), "1" + "0" * 30])
def test_position_beyond_reach_is_refused_with_the_estimate(capsys, position: str) -> None:
    code, out, err = cli(capsys, "digits", "pi", "--at", position, "--count", "8")
    assert code == 2 and out == ""
    lines = err.splitlines()
    assert lines[0].startswith("estimate [bellard]: ") and "years of CPU time" in lines[0]
    # the path taken, and why
    if backend.BACKEND == "c":
        assert "the position is beyond the reach of the compiled kernel's 64-bit arithmetic" in lines[0]
    else:
        assert "compiled kernel is not in use" in lines[0]
    errors = [ln for ln in lines if ln.startswith("error:")]
    assert len(errors) == 1 and errors[0] == lines[-1] and "out of reach" in errors[0]
    assert "core-years" in errors[0] and "Traceback" not in err


def test_refusal_names_the_cluster_when_it_would_help(capsys, monkeypatch) -> None:
    from spotcheck.engine import plan

    # 10^17 takes about 10^3 core-years: a cluster that keeps up to 1,024 cores busy finishes it
    # within ten years (more in tests/test_cli_reports.py)
    monkeypatch.setattr(plan, "CLUSTER_REACH_SECONDS", 10 * 365.25 * 86400)
    code, _, err = cli(capsys, "digits", "pi", "--at", str(10**17), "--count", "8")
    assert code == 2
    assert "cores (--cluster ADDRESS) would finish the head sum in about" in err.splitlines()[-1]


def test_estimate_in_json(capsys) -> None:
    code, out, _ = cli(capsys, "digits", "pi", "--at", "100000", "--count", "8", "--json")
    assert code == 0
    est = json.loads(out)["estimate"]
    assert est["path"] in ("compiled", "twin") and est["cpu_seconds"] > 0 and est["feasible"] is True
    # bellard: scale 2^-6, base 2^10, 7 non-zero coefficients: k <= (4 (p - 1) - 6) / 10
    assert est["terms"] == 7 * ((4 * (100000 - 1) - 6) // 10 + 1)


def test_cluster_unreachable_is_one_line_and_nothing_after() -> None:
    pytest.importorskip("distributed")
    t0 = time.monotonic()
    proc = subprocess.run(
        [sys.executable, "-m", "spotcheck", "digits", "pi", "--at", "100", "--cluster", "not-an-address"],
        env=ENV,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 2 and proc.stdout == ""
    assert proc.stderr.splitlines() == [proc.stderr.splitlines()[0]]  # exactly one line
    assert proc.stderr.startswith("error: cannot reach the Dask scheduler at not-an-address")
    assert time.monotonic() - t0 < 15  # no late traceback after a 20 s close timeout


def test_resumed_summary_counts_computed_and_loaded_apart(capsys, tmp_path) -> None:
    ckpt = tmp_path / "run.journal"
    code, out, _ = cli(capsys, "digits", "pi", "--at", "200000", "--count", "14", "--checkpoint", str(ckpt))
    assert code == 0 and "loaded" not in out
    lines = ckpt.read_bytes().split(b"\n")
    blocks = [i for i, line in enumerate(lines) if line.startswith(b'{"block"')]
    del lines[blocks[0]]  # forget one block: it is computed again, the others loaded
    ckpt.write_bytes(b"\n".join(lines))
    code, out, _ = cli(capsys, "digits", "pi", "--at", "200000", "--count", "14", "--checkpoint", str(ckpt))
    assert code == 0 and out.splitlines()[0] == hex_digits_reference(200_000, 14)
    summary = out.splitlines()[2]
    assert " computed in " in summary and " loaded from the checkpoint " in summary
    code, out, _ = cli(
        capsys, "digits", "pi", "--at", "200000", "--count", "14", "--checkpoint", str(ckpt), "--json"
    )
    payload = json.loads(out)
    assert payload["terms_loaded"] == payload["terms"] - payload["terms_computed"] > 0
    assert payload["blocks_computed"] == 0 and payload["checkpoint"] == str(ckpt)
