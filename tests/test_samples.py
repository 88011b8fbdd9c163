"""The shipped samples are exactly what samples/make_samples.py makes."""

from __future__ import annotations

import importlib.util
from pathlib import Path

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def test_samples_match_their_script() -> None:
    spec = importlib.util.spec_from_file_location("make_samples", SAMPLES / "make_samples.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    made = module.files()
    assert made, "the script makes no files"
    for name, data in made.items():
        assert (SAMPLES / name).read_bytes() == data, name
