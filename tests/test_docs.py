"""Every `spotcheck ...` example in README.md runs (exit code 0 or 1, never a usage error)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from spotcheck.cli import run

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text()
EXAMPLES = [
    line.strip()
    for block in re.findall(r"```sh\n(.*?)```", README, flags=re.S)
    for line in block.splitlines()
    if line.strip().startswith("spotcheck ")
]


def test_readme_has_examples() -> None:
    assert len(EXAMPLES) >= 10


@pytest.mark.parametrize("example", EXAMPLES)
def test_readme_example_runs(example, capsys, monkeypatch) -> None:
    monkeypatch.chdir(ROOT)
    code = run(shlex.split(example)[1:])
    out, err = capsys.readouterr()
    assert code in (0, 1), err
    assert out.strip()


def test_quick_start_is_two_commands() -> None:
    quick = README.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    commands = [ln for ln in re.findall(r"```sh\n(.*?)```", quick, flags=re.S)]
    assert len(commands) == 2
    assert "spotcheck verify samples/" in commands[0]
    assert "pytest" in commands[1]
    ci = (ROOT / ".ci" / "run").read_text()
    assert "pip\" install -e '.[test]'" in ci and "-m pytest" in ci


@pytest.mark.parametrize("command", ["digits", "constants", "verify", "locate", "scan", "inspect"])
def test_every_command_is_documented(command, capsys) -> None:
    assert f"spotcheck {command}" in README or f"`{command}`" in README
    assert run([command, "--help"]) == 0
    assert capsys.readouterr().out.strip()
