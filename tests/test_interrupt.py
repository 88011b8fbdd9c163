"""Ctrl-C keeps what was learned: SIGINT to a running check gives its report within 2 s.

Each case starts ``python -m spotcheck`` on a file of 4*10^6 hex digits of pi
(true digits from Arb via ``reference_digits``, a method independent of the
engine, with damage added), waits until the run is inside its full comparison
(several seconds of MPFR in a child process), sends SIGINT and times the report.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import jsonschema
import pytest

from spotcheck.checks.reference import reference_digits
from spotcheck.checks.schema import REPORT_SCHEMA

from .reference import pi_decimal

pytestmark = pytest.mark.slow

N = 4_000_000
SETTLE = 3.5  # seconds after start: past start-up and the engine windows, inside the full comparison


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> dict[str, Path]:
    whole, digits = reference_digits("pi", 16, N)
    assert whole == "3"
    d = tmp_path_factory.mktemp("interrupt")
    out = {}
    isolated = list(digits)
    isolated[2_345_677] = "0" if isolated[2_345_677] != "0" else "1"  # digit 2,345,678
    out["isolated"] = d / "isolated.txt"
    out["isolated"].write_text("3." + "".join(isolated) + "\n")
    astray = digits[:1_000_000] + digits[1_000_000:][::-1]  # every digit from 1,000,001 on moved
    out["astray"] = d / "astray.txt"
    out["astray"].write_text("3." + astray + "\n")
    return out


N_DECIMAL = 40_000_000  # its radix conversion takes about 6 s on this project's machine


@pytest.fixture(scope="module")
def decimal_file(tmp_path_factory) -> Path:
    """pi's first 1,000 decimal digits (MPFR), then seeded random ones: the conversion costs the same."""
    import random

    table = bytes(48 + i % 10 for i in range(256))
    rest = random.Random(12).randbytes(N_DECIMAL - 1000).translate(table).decode("ascii")
    body = pi_decimal(1000) + rest
    path = tmp_path_factory.mktemp("interrupt-decimal") / "pi-then-random.txt"
    with open(path, "w") as fh:
        fh.write("3.\n")
        for i in range(0, N_DECIMAL, 100):
            fh.write(body[i : i + 100] + "\n")
    return path


def interrupted_run(*args: str, sig: signal.Signals = signal.SIGINT) -> tuple[int, dict, float]:
    proc = subprocess.Popen(
        # one worker and MPFR (slower than Arb): the full computation surely lasts past the SIGINT
        [sys.executable, "-m", "spotcheck", *args, "--json", "--workers", "1", "--reference", "mpfr"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ},
    )
    time.sleep(SETTLE)
    assert proc.poll() is None, "the run ended before it could be interrupted"
    t0 = time.perf_counter()
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=30)
    elapsed = time.perf_counter() - t0
    assert "Traceback" not in err, err
    payload = json.loads(out)
    jsonschema.validate(payload, REPORT_SCHEMA)
    return proc.returncode, payload, elapsed


def test_scan_interrupted_in_the_reference_computation(files) -> None:
    code, payload, elapsed = interrupted_run("scan", str(files["isolated"]))
    assert elapsed < 2.0
    assert payload["interrupted"] and payload["verdict"] == "incomplete" and code == 130
    assert payload["digits_compared"] == 0  # nothing was established


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_verify_interrupted_after_a_wrong_tail(files, sig: signal.Signals) -> None:
    code, payload, elapsed = interrupted_run("verify", str(files["astray"]), "--seed", "1", sig=sig)
    assert elapsed < 2.0
    assert payload["interrupted"] and payload["verdict"] == "mismatch" and code == 1
    tail = next(c for c in payload["checks"] if c["kind"] == "tail")
    assert not tail["match"]  # what was established before Ctrl-C
    assert not payload["exhaustive"]


def test_locate_interrupted_in_its_full_comparison(files) -> None:
    code, payload, elapsed = interrupted_run("locate", str(files["isolated"]))
    assert elapsed < 2.0
    assert payload["interrupted"] and payload["verdict"] == "incomplete" and code == 130
    kinds = {c["kind"]: c["match"] for c in payload["checks"]}
    assert kinds["tail"] and kinds["head"]  # the windows compared before Ctrl-C are reported


def test_verify_interrupted_in_the_radix_conversion(decimal_file) -> None:
    # The conversion of 4*10^7 decimal digits is one long GMP call; it runs in a child process,
    # so Ctrl-C reaches the parent at once and the report keeps the decimal head it checked.
    code, payload, elapsed = interrupted_run("verify", str(decimal_file), "--samples", "0", "--seed", "1")
    assert elapsed < 2.0
    assert payload["interrupted"] and payload["verdict"] == "incomplete" and code == 130
    kinds = {c["kind"]: c for c in payload["checks"]}
    assert kinds["head"]["match"] and "tail" not in kinds  # the head was established, the tail not reached
