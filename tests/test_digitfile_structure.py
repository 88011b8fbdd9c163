"""The digit-file layer's structure: each layout rule in one place, no import circle, one choice of loops.

* the modules of ``spotcheck/digitfile/`` import each other without a circle
  (read from their source with ``ast``, imports inside functions included);
* the label rule (``syntax.LabelMeaning``) agrees with itself in every form the
  passes ask (one line, a chunk of lines, a step between lines);
* separator patterns are written once (``syntax.SEPARATORS``);
* the loops' layout record reads back what it writes, for every reading detection makes;
* ``open_stream`` accepts what ``open_digit_file`` accepts (``labels="both"``) and reads the same;
* ``engine.backend`` chooses the digit-file loops, and ``--version`` names both compiled extensions.
"""

from __future__ import annotations

import ast
import dataclasses
import os
import subprocess
import sys
from itertools import accumulate
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

import spotcheck.digitfile
from spotcheck.cli import run
from spotcheck.digitfile import loops, open_digit_file, open_stream
from spotcheck.digitfile.syntax import BOTH_SYNTAXES, MEANINGS, SYNTAXES, LabelMeaning
from spotcheck.engine import backend
from spotcheck.errors import UsageError

PACKAGE = Path(spotcheck.digitfile.__file__).parent
PREFIX = "spotcheck.digitfile"


def _imports(path: Path, modules: set[str]) -> set[str]:
    """The modules of the package that ``path`` imports (at any depth of its code)."""
    out: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module is not None and node.level == 0:
            # ``from spotcheck.digitfile import loops`` imports the module loops;
            # ``from spotcheck.digitfile.loops import X`` imports loops.
            names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
        else:
            continue
        for name in names:
            if name.startswith(PREFIX + "."):
                mod = name[len(PREFIX) + 1 :].split(".")[0]
                if mod in modules:
                    out.add(mod)
    return out


def _graph() -> dict[str, set[str]]:
    modules = {p.stem for p in PACKAGE.glob("*.py") if p.stem != "__init__"}
    return {m: _imports(PACKAGE / f"{m}.py", modules) - {m} for m in modules}


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}
    path: list[str] = []

    def visit(m: str) -> list[str] | None:
        state[m] = 1
        path.append(m)
        for n in sorted(graph[m]):
            if state.get(n) == 1:
                return path[path.index(n) :] + [n]
            if n not in state and (found := visit(n)):
                return found
        path.pop()
        state[m] = 2
        return None

    for m in sorted(graph):
        if m not in state and (found := visit(m)):
            return found
    return None


def test_no_module_of_the_digit_file_layer_imports_another_in_a_circle() -> None:
    graph = _graph()
    assert {"syntax", "loops", "passrules", "index", "onepass", "opening", "file", "reader", "stream"} <= set(
        graph
    )
    assert _cycle(graph) is None, " -> ".join(_cycle(graph) or [])
    # the finder finds a circle when there is one (the check can fail)
    assert _cycle({**graph, "syntax": graph["syntax"] | {"stream"}}) is not None


def test_the_layout_vocabulary_depends_on_no_pass() -> None:
    graph = _graph()
    assert graph["syntax"] <= {"charsets"}
    assert graph["loops"] <= {"charsets", "syntax", "detect"}  # detect: the Detection type only


def test_separator_patterns_are_written_once() -> None:
    """The label separator patterns live in ``syntax.SEPARATORS``; no other module writes one."""
    for path in PACKAGE.glob("*.py"):
        if path.stem == "syntax":
            continue
        text = path.read_text()
        assert "[:|]" not in text, path.name


@given(
    st.sampled_from(MEANINGS),
    st.integers(0, 10**6),
    st.lists(st.integers(0, 200), min_size=1, max_size=30),
)
def test_the_label_rule_is_one_rule_in_every_form(
    meaning: LabelMeaning, start: int, sizes: list[int]
) -> None:
    """A chunk's expected labels, a line's, and a step between lines say the same thing."""
    ends = list(accumulate(sizes, initial=start))
    lines = [(ends[i], sizes[i]) for i in range(len(sizes))]
    one_by_one = [meaning.expect(b, n) for b, n in lines]
    at_once = meaning.expect_all(ends)
    if None in one_by_one:
        assert at_once is None
        return
    assert at_once == one_by_one
    for (b, n), want in zip(lines, one_by_one, strict=True):
        assert meaning.agrees(want, b, n) and not meaning.agrees(want + 1, b, n)
    for (ba, na), (bc, nc), va, vc in zip(lines, lines[1:], one_by_one, one_by_one[1:], strict=False):
        assert meaning.step_ok(va, ba, na, vc, bc, nc) == (vc > va)
        assert not meaning.step_ok(va, ba, na, vc + 1, bc, nc)


def test_the_loops_layout_record_reads_back_what_it_writes() -> None:
    from spotcheck.digitfile.detect import Detection

    blank = {f.name: None for f in dataclasses.fields(Detection)}
    for syntax in SYNTAXES + BOTH_SYNTAXES:
        for meaning in MEANINGS:
            end = next(m for m in MEANINGS if m.kind == "through" and m.unit == meaning.unit)
            plan = Detection(**{**blank, "syntax": syntax, "meaning": meaning, "end_meaning": end})
            record = loops.LoopLayout.for_plan(plan)
            assert record is not None
            assert loops.LoopLayout.from_codes(record.codes()) == record
            assert [c.meaning for c in record.columns] == (
                [meaning, end] if syntax.where == "both" else [meaning]
            )
            assert [c.sep for c in record.columns] == [e.sep for e in syntax.ends]
    with pytest.raises(ValueError):
        loops.LoopLayout.from_codes((0, 0, 10, 19, 0, 1))  # a decimal label has at most 18 characters


def _both_file(path: Path) -> str:
    digits = "".join(str((i * 7 + i // 13) % 10) for i in range(3000))
    lines = [f"{i:>5} {digits[i : i + 60]} {i + 60}" for i in range(0, 3000, 60)]
    lines[10] = lines[10].replace(" 660", " 661")  # one end label lies
    path.write_text("3.\n" + "\n".join(lines) + "\n")
    return digits


def test_open_stream_takes_labels_both_as_open_digit_file_does(tmp_path: Path) -> None:
    path = tmp_path / "both.txt"
    digits = _both_file(path)
    with open_digit_file(path, labels="both") as df:
        want = (df.read(1, df.count), df.count, df.findings, df.layout)
    with open_stream(path, labels="both") as s:
        got_digits = b"".join(s.chunks()).decode()
        sf = s.finish()
    with sf:
        got = (got_digits, sf.count, sf.findings, sf.layout)
    assert got == want
    assert got_digits == digits and sf.layout.labels == "both"
    assert [(f.line, f.end, f.found) for f in sf.findings] == [(12, "end", "661")]
    for opener in (open_digit_file, open_stream):
        with pytest.raises(UsageError, match="labels must be start, end, both or none, got 'sideways'"):
            opener(path, labels="sideways")


def test_backend_chooses_the_digit_file_loops() -> None:
    choice = backend.digitfile_loops()
    assert (loops.LOOPS, loops.LOOPS_NOTE) == (choice.backend, choice.note)
    want = choice.module.extract if choice.module is not None else loops.extract_py
    assert loops.extract is want
    if not backend.pure_requested():
        try:
            import spotcheck.digitfile._index  # noqa: F401
        except ImportError:
            pytest.skip("the compiled loops were not built")
        assert choice.backend == "c" and "spotcheck.digitfile._index" in choice.note


def test_version_names_both_compiled_extensions(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["--version"]) == 0
    out = capsys.readouterr().out
    assert f"head-sum kernel: {backend.BACKEND_NOTE}\n" in out
    assert f"digit-file loops: {backend.digitfile_loops().note}\n" in out


def test_spotcheck_pure_forces_the_twins_of_both() -> None:
    env = {**os.environ, "SPOTCHECK_PURE": "1"}
    code = (
        "from spotcheck.cli import run; from spotcheck.digitfile import loops, index; "
        "print(loops.LOOPS, index.USE_STREAM_LOOPS, loops.extract is loops.extract_py); run(['--version'])"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True)
    lines = proc.stdout.splitlines()
    assert lines[0] == "python False True"
    assert any(line.startswith("head-sum kernel: ") and "SPOTCHECK_PURE is set" in line for line in lines)
    assert "digit-file loops: Python twins (SPOTCHECK_PURE is set)" in lines
