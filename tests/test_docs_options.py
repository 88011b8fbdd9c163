"""Every option of every command is in README.md beside that command, and every option the README
names for a command exists (the help and the README describe one program)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest
import typer

from spotcheck.cli import app

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text()
PARAGRAPHS = [p for p in re.split(r"\n\s*\n", README) if p.strip()]
OPTIONS_PARAGRAPH = next(p for p in PARAGRAPHS if p.startswith("**Options.**"))
COMMANDS = typer.main.get_command(app).commands  # type: ignore[attr-defined]


def options_of(command: str) -> set[str]:
    return {o for p in COMMANDS[command].params for o in p.opts if o.startswith("--")} - {"--help"}


def _names_command(paragraph: str, command: str) -> bool:
    return f"`{command}`" in paragraph or f"spotcheck {command} " in paragraph or f"`{command} " in paragraph


def _scoped_in_options_paragraph() -> dict[str, set[str]]:
    """``--option`` -> the commands the Options paragraph names for it in the parentheses after it."""
    scoped: dict[str, set[str]] = {}
    for m in re.finditer(r"`(--[a-z-]+)[^`]*`(?:/`[^`]*`)? \(([^()]*)\)", OPTIONS_PARAGRAPH):
        names = set(re.findall(r"`([a-z]+)`", m.group(2)))
        if "every checking command" in m.group(2):
            names |= {"verify", "locate", "scan", "compare"}
        if names & set(COMMANDS):
            scoped[m.group(1)] = names & set(COMMANDS)
    return scoped


SCOPED = _scoped_in_options_paragraph()
PAIRS = [(c, o) for c in sorted(COMMANDS) for o in sorted(options_of(c))]


@pytest.mark.parametrize(("command", "option"), PAIRS)
def test_every_option_is_documented_with_its_command(command: str, option: str) -> None:
    if re.search(re.escape(option) + r"\b", OPTIONS_PARAGRAPH):  # "means the same thing everywhere"
        return
    beside = [p for p in PARAGRAPHS if re.search(re.escape(option) + r"\b", p) and _names_command(p, command)]
    assert beside, f"README.md does not document {option} of `spotcheck {command}`"


def test_options_paragraph_names_only_options_that_exist() -> None:
    assert SCOPED, "the Options paragraph names no command for any option"
    for option, commands in SCOPED.items():
        for command in commands:
            assert option in options_of(command), f"README says `{command}` takes {option}; it does not"


EXAMPLES = [
    shlex.split(line.strip().split("#", 1)[0])
    for block in re.findall(r"```(?:sh|console)\n(.*?)```", README, flags=re.S)
    for line in block.splitlines()
    if "spotcheck " in line
]


@pytest.mark.parametrize("words", EXAMPLES, ids=[" ".join(w) for w in EXAMPLES])
def test_every_option_in_an_example_exists(words: list[str]) -> None:
    words = words[next(i for i, w in enumerate(words) if w.endswith("spotcheck")) :]
    command = words[1]
    for word in words[2:]:
        if word.startswith("--"):
            assert word in options_of(command), f"README example uses {word}, which `{command}` does not take"
