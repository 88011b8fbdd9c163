"""verify and locate say what their deepest window costs before any work (issue 13)."""

from __future__ import annotations

import json

import pytest

from spotcheck.cli import run
from spotcheck.engine import plan

from .reference import pi_hex

N = 20_000


@pytest.fixture(scope="module")
def pi_file(tmp_path_factory: pytest.TempPathFactory) -> str:
    path = tmp_path_factory.mktemp("estimate") / "pi.txt"
    path.write_text("3." + pi_hex(N) + "\n")  # true digits from MPFR (tests/reference.py)
    return str(path)


@pytest.mark.parametrize("command", ["verify", "locate"])
def test_the_tail_window_estimate_is_said_and_in_json(
    command: str, pi_file: str, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    from spotcheck.report import digits

    monkeypatch.setattr(digits, "ESTIMATE_SHOWN_SECONDS", 0.0)  # say it even for a cheap window
    assert run([command, pi_file, "--budget", "0"]) in (0, 3)
    err = capsys.readouterr().err
    line = next(ln for ln in err.splitlines() if ln.startswith("deepest window"))
    assert f"position {N - 15:,}" in line and "head terms" in line
    assert "path: compiled kernel" in line or "path: pure-Python path" in line
    assert run([command, pi_file, "--budget", "0", "--json"]) in (0, 3)
    est = json.loads(capsys.readouterr().out)["tail_estimate"]
    assert est["position"] == N - 15 and est["count"] == 16 and est["terms"] > 0 and est["feasible"]


@pytest.mark.parametrize("command", ["verify", "locate"])
def test_a_tail_beyond_reach_is_refused_before_any_work(
    command: str, pi_file: str, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(plan, "MAX_LOCAL_CPU_SECONDS", 1e-9)  # as if the file were of record size
    assert run([command, pi_file]) == 2
    captured = capsys.readouterr()
    errors = [ln for ln in captured.err.splitlines() if ln.startswith("error:")]
    assert captured.out == "" and len(errors) == 1
    assert "--cluster" in errors[0] and "Traceback" not in captured.err


@pytest.mark.parametrize("command", ["verify", "locate"])
@pytest.mark.parametrize("value", ["nan", "inf", "-inf", "-1"])
def test_budget_takes_only_finite_seconds(
    command: str, value: str, pi_file: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert run([command, pi_file, "--budget", value]) == 2
    err = capsys.readouterr().err
    assert "finite number of seconds" in err and "Traceback" not in err
