"""Combs of windows: one pass over the terms for windows at ``D_i = D_0 + i * step``.

Contract: ``head_sum_comb_py`` returns, for each window, exactly what
``head_sum_py`` returns for that window alone over the block's ``k`` range
clipped to the window's head; the compiled ``head_sum_comb`` returns exactly
what the twin does on every path this CPU offers (tests/test_comb_kernel.py); the engine's comb entry
certifies each window by its own interval, with the digits of that window
evaluated alone.
"""

from __future__ import annotations

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.engine import backend
from spotcheck.engine.api import extract, extract_comb
from spotcheck.engine.comb import comb_window_digits
from spotcheck.engine.evaluate import frac_interval, words_for
from spotcheck.engine.head_py import comb_heads, head_sum_comb_py, head_sum_py
from spotcheck.engine.series import Series, series_of
from spotcheck.errors import UsageError
from spotcheck.formulas import BUILTIN_CONSTANTS

SERIES = [series_of(f) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
SERIES_IDS = [f"{c.name}-{f.key}" for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
PI_BBP = series_of(BUILTIN_CONSTANTS["pi"].formula("bbp"))


def comb_args(series: Series, big_d0: int, step: int, count: int, k0: int, k1: int, words: int) -> tuple:
    return (
        big_d0,
        step,
        count,
        k0,
        k1,
        series.m,
        series.s,
        series.e,
        series.q,
        series.alternating,
        series.js,
        series.cs,
        words,
    )


def separate_windows(args: tuple) -> list[tuple[int, int]]:
    """The reference: each window alone, ``head_sum_py`` over its clipped k range."""
    big_d0, step, count, k0, k1, m, s, e, q, alt, js, cs, words = args
    out = []
    for i in range(count):
        big_d = big_d0 + i * step
        end = k1 if e == 0 else min(k1, big_d // e + 1) if big_d >= 0 else k0
        out.append(head_sum_py(big_d, k0, end, m, s, e, q, alt, js, cs, words))
    return out


@st.composite
def builtin_combs(draw: st.DrawFn, most_k: int = 24, most_windows: int = 128) -> tuple:
    """A comb over a short block of k of a built-in series: the block's start or end near some
    window's head end (the block edges), or anywhere below the deepest window's head."""
    series = draw(st.sampled_from(SERIES))
    big_d0 = draw(st.integers(-8, 300) | st.integers(0, 10**9) | st.integers(0, 2**45))
    step = draw(
        st.sampled_from([0, 4, 8, 64]) | st.integers(0, 400) | st.integers(0, 10**7).map(lambda g: 4 * g)
    )
    count = draw(st.integers(1, most_windows))
    last = big_d0 + (count - 1) * step
    top = last // series.e + 1 if last >= 0 else 1
    where = draw(st.sampled_from(["edge", "anywhere"]))
    if where == "edge":  # around the head end of one window
        i = draw(st.integers(0, count - 1))
        end = max(1, (big_d0 + i * step) // series.e + 1)
        k1 = max(1, end + draw(st.integers(-3, 3)))
    else:
        k1 = draw(st.integers(1, max(1, top)))
    k0 = draw(st.integers(max(0, k1 - most_k), k1 - 1))
    words = draw(st.integers(1, 16))
    return comb_args(series, big_d0, step, count, k0, k1, words)


@settings(max_examples=150, deadline=None)
@given(builtin_combs())
# one window: the single head sum
@example(comb_args(PI_BBP, 4 * 10**6 - 4, 0, 1, 10**6 - 40, 10**6, 2))
# windows 8 hex digits apart across the end of the first window's head
@example(comb_args(PI_BBP, 400, 32, 5, 95, 112, 3))
# the deepest window's head ends inside the block, the first's before it starts
@example(comb_args(PI_BBP, 40, 400, 3, 50, 300, 2))
# a negative D_0 (a scale with a factor 2^-shift at position 1)
@example(comb_args(PI_BBP, -5, 4, 6, 0, 5, 2))
def test_twin_comb_is_separate_windows(args: tuple) -> None:
    assert head_sum_comb_py(*args) == separate_windows(args)


@pytest.mark.parametrize("series", SERIES, ids=SERIES_IDS)
def test_twin_comb_whole_heads_every_series(series: Series) -> None:
    """Every k of the deepest head, 7 windows: moduli from q up, exponents down to 0 in each window."""
    args = comb_args(series, 500, 36, 7, 0, series.head_length(500 + 6 * 36 + series.shift), 3)
    want = separate_windows(args)
    assert [t for _, t in want] == [
        series.head_length(500 + 36 * i + series.shift) * len(series.js) for i in range(7)
    ]
    assert head_sum_comb_py(*args) == want


def test_comb_heads_clip_each_window() -> None:
    # e = 2: window i's head is k <= (10 + 3 i) // 2
    assert comb_heads(10, 3, 4, 4, 9, 2) == [6, 7, 9, 9]
    assert comb_heads(10, 3, 4, 7, 9, 2) == [7, 7, 9, 9]  # window 0 has no k in [7, 9)
    assert comb_heads(-7, 3, 4, 0, 9, 2) == [0, 0, 0, 2]  # D < 0: no head
    assert comb_heads(5, 1, 3, 0, 9, 0) == [9, 9, 9]  # e = 0: every k


@pytest.mark.parametrize("bad", [(0, 4), (-1, 4), (3, -4)])
def test_twin_refuses_a_bad_comb(bad: tuple[int, int]) -> None:
    count, step = bad
    with pytest.raises(ValueError):
        head_sum_comb_py(*comb_args(PI_BBP, 100, step, count, 0, 3, 2))


# --- the engine: each window certified by its own interval ---------------------

FORMULAS = [(c.name, f.key) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
# Bailey, Borwein, Plouffe (1997), table of hex digits of pi, as tests/test_kernel.py quotes it.
TABLE_1997 = {10**6: "26C65E52CB4593", 10**7: "17AF5863EFED8D", 10**8: "ECB840E21926EC"}


@settings(max_examples=25, deadline=None)
@given(
    formula=st.sampled_from(FORMULAS),
    position=st.integers(1, 20_000),
    gap=st.integers(1, 3000) | st.integers(1, 8),
    count=st.integers(1, 128),
    digits=st.integers(1, 30),
)
@example(formula=("pi", "bbp"), position=1, gap=1, count=128, digits=1)
def test_comb_digits_are_the_windows_alone(
    formula: tuple[str, str], position: int, gap: int, count: int, digits: int
) -> None:
    if backend.BACKEND != "c":  # the twin alone: test_comb_digits_are_the_windows_alone_on_the_twin
        pytest.skip(f"the engine does not run the compiled kernel: {backend.BACKEND_NOTE}")
    comb_matches_windows_alone(formula, position, gap, count, digits)


@settings(max_examples=12, deadline=None)
@given(
    formula=st.sampled_from(FORMULAS),
    position=st.integers(1, 2000),
    gap=st.integers(1, 100),
    count=st.integers(1, 24),
    digits=st.integers(1, 30),
)
def test_comb_digits_are_the_windows_alone_on_the_twin(
    formula: tuple[str, str], position: int, gap: int, count: int, digits: int
) -> None:
    """Every term on the twin (the kernel not in use), smaller combs."""
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(backend, "BACKEND", "python")
        patch.setattr(backend, "_PURE_WHY", "the twin forced by a test", raising=False)
        comb_matches_windows_alone(formula, position, gap, count, digits)


def comb_matches_windows_alone(
    formula: tuple[str, str], position: int, gap: int, count: int, digits: int
) -> None:
    constant, key = formula
    series = series_of(BUILTIN_CONSTANTS[constant].formula(key))
    windows = comb_window_digits(series, position, gap, count, digits)
    assert [w.position for w in windows] == [position + i * gap for i in range(count)]
    words = words_for(series, 4 * (position + (count - 1) * gap - 1), digits)
    for w in windows:
        assert w.digits == extract(constant, w.position, digits, formula=key).digits
        if not w.alone:  # the very interval frac_interval gives the window alone at that precision
            alone = frac_interval(series, 4 * (w.position - 1), words)
            assert (w.interval.lo, w.interval.hi, w.interval.bits, w.interval.terms) == (
                alone.lo,
                alone.hi,
                alone.bits,
                alone.terms,
            )


@pytest.mark.parametrize("position", [10**6, 10**7])
def test_comb_holds_the_1997_table(position: int) -> None:
    """The table's entry is window 3 of a comb of 6 windows 12,345 positions apart (kernel, threads)."""
    if backend.BACKEND != "c":
        pytest.skip(f"the engine does not run the compiled kernel: {backend.BACKEND_NOTE}")
    gap = 12_345
    windows = comb_window_digits(PI_BBP, position - 3 * gap, gap, 6, 14, workers=2)
    assert windows[3].position == position
    assert windows[3].digits == TABLE_1997[position]
    assert not windows[3].alone


@pytest.mark.slow
def test_comb_holds_the_1997_table_at_10_8() -> None:
    if backend.BACKEND != "c":
        pytest.skip(f"the engine does not run the compiled kernel: {backend.BACKEND_NOTE}")
    gap = 10**6 + 7
    windows = comb_window_digits(PI_BBP, 10**8 - 5 * gap, gap, 8, 14, workers=2)
    assert windows[5].digits == TABLE_1997[10**8]


def test_extract_comb() -> None:
    result = extract_comb("pi", 10**4, 1000, 5, 12, formula="bbp")
    assert result.positions == (10**4, 11_000, 12_000, 13_000, 14_000)
    assert result.digits == tuple(extract("pi", p, 12, formula="bbp").digits for p in result.positions)
    assert result.alone == 0 and result.fraction_bits == 128


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (("pi", 1, 0, 3), "gap"),
        (("pi", 1, 5, 0), "count"),
        (("e", 1, 5, 3), "no digit-extraction formula"),
        (("pi", 1, 5, 3, 500), "digits exceed"),
    ],
)
def test_extract_comb_refuses(args: tuple, words: str) -> None:
    with pytest.raises(UsageError, match=words):
        extract_comb(*args)
