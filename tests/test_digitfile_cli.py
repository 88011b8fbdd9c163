"""`spotcheck inspect` on bad input: exit code 2, one `error:` line naming the problem, file unchanged.

True digits come from gmpy2/MPFR (``const_pi``), as in ``test_digitfile.py``.
"""

from __future__ import annotations

import bz2
import gzip
import hashlib
import json
import lzma
import random
from collections.abc import Callable
from pathlib import Path

import gmpy2
import pytest

from spotcheck.cli import run


def pi_digits(base: int, n: int) -> str:
    """First n digits of pi after the point, by gmpy2/MPFR."""
    bits = 4 * n + 128
    with gmpy2.context(gmpy2.get_context(), precision=bits + 16):
        fixed = int(gmpy2.floor(gmpy2.const_pi() * gmpy2.mpfr(2) ** bits))
    return gmpy2.mpz(((fixed - (3 << bits)) * base**n) >> bits).digits(base).upper().zfill(n)


PI16 = pi_digits(16, 2000)
PI10 = pi_digits(10, 2000)


def rows(d: str, width: int = 50) -> str:
    return "\n".join(d[i : i + width] for i in range(0, len(d), width)) + "\n"


def _stray(d: str) -> bytes:
    text = "3." + rows(d)
    at = len(text) // 2
    return (text[:at] + "%" + text[at + 1 :]).encode()


def _truncated(compress: Callable[[bytes], bytes]) -> Callable[[], bytes]:
    def make() -> bytes:
        data = compress(("3." + rows(PI16 * 10)).encode())
        return data[: len(data) // 2]

    return make


BAD: dict[str, tuple[str, Callable[[], bytes], list[str], list[str]]] = {
    # name: (file name, content, extra CLI args, words the message must contain)
    "empty": ("empty.txt", lambda: b"", [], ["empty"]),
    "garbage": ("noise.dat", lambda: random.Random(1).randbytes(4000), [], ["binary content"]),
    "hex-as-decimal": (
        "pi16.txt",
        lambda: ("3." + rows(PI16)).encode(),
        ["--base", "10"],
        ["not a decimal digit"],
    ),
    "decimal-as-hex": ("pi10.txt", lambda: ("3." + rows(PI10)).encode(), ["--base", "16"], ["looks decimal"]),
    "mixed-bases": (
        "mixed.txt",
        lambda: ("3." + rows(PI10) + rows(PI16)).encode(),
        [],
        ["mixed bases", "line"],
    ),
    "stray": ("stray.txt", lambda: _stray(PI10), [], ["stray character '%'", "at byte", "line"]),
    "truncated-gzip": ("cut.txt.gz", _truncated(gzip.compress), [], ["gzip stream is truncated"]),
    "truncated-bzip2": ("cut.txt.bz2", _truncated(bz2.compress), [], ["bzip2 stream is truncated"]),
    "truncated-xz": ("cut.txt.xz", _truncated(lzma.compress), [], ["xz stream is truncated"]),
}


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize("case", list(BAD))
def test_bad_input_exits_2(case, tmp_path, capsys):
    name, make, args, words = BAD[case]
    path = tmp_path / name
    path.write_bytes(make())
    before = sha(path)
    code = run(["inspect", str(path), *args])
    out, err = capsys.readouterr()
    assert code == 2
    assert err.startswith("error: ") and err.count("\n") == 1, err
    assert "Traceback" not in err and out == ""
    for word in words:
        assert word in err, err
    assert sha(path) == before


def test_directory_and_missing_path(tmp_path, capsys):
    assert run(["inspect", str(tmp_path)]) == 2
    assert "is a directory" in capsys.readouterr().err
    assert run(["inspect", str(tmp_path / "absent.txt")]) == 2
    assert "absent.txt" in capsys.readouterr().err


def test_lying_label_is_shown(tmp_path, capsys):
    lines = [f"{i * 50:6d}: {PI16[i * 50 : i * 50 + 50]}" for i in range(40)]
    lines[9] = f"{451:6d}: {PI16[450:500]}"
    path = tmp_path / "labels.txt"
    path.write_text("\n".join(lines) + "\n")
    before = sha(path)
    code = run(["inspect", str(path), "--json"])
    out, err = capsys.readouterr()
    payload = json.loads(out)  # inspect reports findings as facts about the file (issue 11): exit 0
    assert code == 0 and "error:" not in err
    [finding] = payload["findings"]
    assert finding["kind"] == "label-mismatch" and finding["line"] == 10
    assert "label 451" in finding["message"]
    assert sha(path) == before


def test_inspect_json(tmp_path, capsys):
    path = tmp_path / "pi.txt.xz"
    path.write_bytes(lzma.compress(("# pi in hex\n3." + rows(PI16, 64)).encode()))
    assert run(["inspect", str(path), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert (d["base"], d["constant"], d["count"], d["compression"]) == (16, "pi", 2000, "xz")
    assert d["layout"]["line_width"] == 64 and d["layout"]["header_lines"] == 1
    assert d["first_digits"] == PI16[:64] and d["last_digits"] == PI16[-64:]
