"""Combs of windows: one pass over the terms for windows at ``D_i = D_0 + i * step``.

Contract: ``head_sum_comb_py`` returns, for each window, exactly what
``head_sum_py`` returns for that window alone over the block's ``k`` range
clipped to the window's head; the compiled ``head_sum_comb`` returns exactly
what the twin does on every path this CPU offers; the engine's comb entry
certifies each window by its own interval, with the digits of that window
evaluated alone.
"""

from __future__ import annotations

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.engine.head_py import comb_heads, head_sum_comb_py, head_sum_py
from spotcheck.engine.series import Series, series_of
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


# --- the compiled kernel against the twin, on every path this CPU offers ------

_kernel = pytest.importorskip("spotcheck.engine._kernel", reason="compiled kernel not built")

from spotcheck.engine import backend  # noqa: E402
from tests.test_kernel import (  # noqa: E402
    PATH_PARAMS,
    edge_moduli_calls,
    kernel_k_limit,
    progression_calls,
)


def as_comb(call: tuple, step: int, count: int) -> tuple:
    """A single head sum's arguments turned into a comb's whose first window is that sum."""
    big_d, k0, k1, *rest = call
    return (big_d, step, count, k0, k1, *rest)


def deepest_fits(call: tuple, step: int, count: int) -> int:
    """The largest count <= ``count`` whose deepest D stays below 2^64."""
    if step == 0:
        return count
    return max(1, min(count, (2**64 - 1 - call[0]) // step + 1))


@st.composite
def kernel_combs(draw: st.DrawFn) -> tuple:
    """builtin_combs inside the kernel's limits (k below the first k whose moduli reach 2^63, D_0 >= 0)."""
    args = draw(builtin_combs())
    series = next(
        s
        for s in SERIES
        if (s.m, s.s, s.e, s.q, s.js, s.cs) == (args[5], args[6], args[7], args[8], args[10], args[11])
    )
    limit = kernel_k_limit(series)
    k0, k1 = args[3], args[4]
    if k1 > limit:
        k1 = limit
        k0 = min(k0, k1 - 1)
    return (
        max(0, args[0]),
        *args[1:3],
        k0,
        k1,
        *args[5:],
    )  # the kernel takes D_0 >= 0 (backend peels the rest)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=60, deadline=None)
@given(args=kernel_combs())
@example(args=comb_args(PI_BBP, 400, 32, 5, 95, 112, 3))
@example(args=comb_args(PI_BBP, 4 * 10**6, 4 * 1000, 128, 10**6 - 30, 10**6 + 64 * 1000, 2))
def test_kernel_comb_matches_twin_builtin(name: str, args: tuple) -> None:
    assert _kernel._head_sum_comb_path(name, *args) == head_sum_comb_py(*args)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=60, deadline=None)
@given(
    call=edge_moduli_calls(),
    step=st.integers(0, 200) | st.integers(0, 2**40) | st.integers(0, 2**63 - 1),
    count=st.integers(1, 128),
)
@example(call=(77, 0, 1, 0, 1, 0, 1, False, [2**31 - 1, 2**31 + 1] * 40, [3, -5] * 40, 2), step=4, count=70)
@example(
    call=(2**64 - 200, 0, 1, 0, 1, 0, 1, False, [2**48 - 1, 2**48 + 1] * 40, [3, -5] * 40, 16),
    step=1,
    count=128,
)
def test_kernel_comb_matches_twin_edge_moduli(name: str, call: tuple, step: int, count: int) -> None:
    """Moduli near each ladder's and each multiply's limits (2^31, 2^48, 2^63); deepest D up to 2^64 - 1,
    where the last windows' exponents pass 64 bits (big_exponent_term) and the first ones' do not."""
    args = as_comb(call, step, deepest_fits(call, step, count))
    assert _kernel._head_sum_comb_path(name, *args) == head_sum_comb_py(*args)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=40, deadline=None)
@given(call=progression_calls(), step=st.integers(0, 5000) | st.integers(0, 2**62), count=st.integers(1, 40))
def test_kernel_comb_matches_twin_progressions(name: str, call: tuple, step: int, count: int) -> None:
    """Runs of k with moduli across the edges; windows whose heads end inside the run."""
    args = as_comb(call, step, deepest_fits(call, step, count))
    assert _kernel._head_sum_comb_path(name, *args) == head_sum_comb_py(*args)


@pytest.mark.parametrize(
    ("change", "error"),
    [
        ({2: 0}, ValueError),  # no window
        ({2: 4097}, ValueError),  # beyond MAX_COMB
        ({1: 2**63}, OverflowError),  # step
        ({0: 2**64 - 10, 1: 8}, OverflowError),  # the deepest D passes 2^64
        ({4: 2**62}, OverflowError),  # a modulus reaches 2^63
        ({12: 17}, ValueError),  # words
    ],
)
def test_kernel_comb_limits_are_enforced(change: dict[int, int], error: type[Exception]) -> None:
    args = list(comb_args(PI_BBP, 2**62, 4, 3, 0, 5, 2))
    for i, v in change.items():
        args[i] = v
    with pytest.raises(error):
        _kernel.head_sum_comb(*args)


def test_kernel_comb_limits_match_backend() -> None:
    assert backend.KERNEL_MAX_COMB == _kernel.MAX_COMB == 4096
    assert backend.KERNEL_MAX_COMB_STEP == _kernel.MAX_COMB_STEP == 2**63 - 1
    # a step the kernel refuses goes to the twin
    assert backend.head_block_comb(PI_BBP, 0, 2**63, 2, 0, 3, 2) == head_sum_comb_py(
        *comb_args(PI_BBP, 0, 2**63, 2, 0, 3, 2)
    )
    # the largest comb and the last D below 2^64 are accepted
    assert len(_kernel.head_sum_comb(*comb_args(PI_BBP, 100, 4, 4096, 0, 3, 2))) == 4096
    args = comb_args(PI_BBP, 2**64 - 1 - 2 * 7, 7, 3, 0, 3, 2)
    assert _kernel.head_sum_comb(*args) == head_sum_comb_py(*args)


@settings(max_examples=40, deadline=None)
@given(
    args=builtin_combs(most_k=200, most_windows=40),
    cut=st.sampled_from([0, 1, 2, 5]),
)
def test_backend_comb_is_separate_blocks(args: tuple, cut: int) -> None:
    """head_block_comb (kernel below the split, twin above, combs cut at MAX_COMB) is head_block per window."""
    big_d0, step, count, k0, k1, m, s, e, q, alt, js, cs, words = args
    series = next(x for x in SERIES if (x.m, x.s, x.e, x.q, x.js, x.cs) == (m, s, e, q, tuple(js), tuple(cs)))
    got = backend.head_block_comb(series, big_d0, step, count, k0, k1, words)
    want = []
    for i in range(count):
        big_d = big_d0 + i * step
        end = min(k1, big_d // e + 1) if big_d >= 0 else k0
        want.append(backend.head_block(series, big_d, k0, end, words) if end > k0 else (0, 0))
    assert got == want
    assert got == head_sum_comb_py(*args)


# --- the engine: each window certified by its own interval ---------------------

from spotcheck.engine.api import extract, extract_comb  # noqa: E402
from spotcheck.engine.comb import comb_window_digits  # noqa: E402
from spotcheck.engine.evaluate import frac_interval, words_for  # noqa: E402
from spotcheck.errors import UsageError  # noqa: E402

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
    gap = 12_345
    windows = comb_window_digits(PI_BBP, position - 3 * gap, gap, 6, 14, workers=2)
    assert windows[3].position == position
    assert windows[3].digits == TABLE_1997[position]
    assert not windows[3].alone


@pytest.mark.slow
def test_comb_holds_the_1997_table_at_10_8() -> None:
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
