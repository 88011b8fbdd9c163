"""The compiled head-sum kernel against its pure-Python twin.

Contract: ``spotcheck.engine.head_py.head_sum_py`` is the reference; the C
kernel (``spotcheck.engine._kernel.head_sum``) must return exactly the same
``(value, terms)`` for every argument inside its limits, and refuse arguments
outside them with ValueError or OverflowError.
"""

from __future__ import annotations

import os
import subprocess
import sys
import threading
from collections.abc import Mapping
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.engine import backend
from spotcheck.engine.head_py import head_sum_py
from spotcheck.engine.series import Series, series_of
from spotcheck.formulas import BUILTIN_CONSTANTS

_kernel = pytest.importorskip("spotcheck.engine._kernel", reason="compiled kernel not built")

SERIES = [series_of(f) for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
SERIES_IDS = [f"{c.name}-{f.key}" for c in BUILTIN_CONSTANTS.values() for f in c.formulas]
PI_BBP = series_of(BUILTIN_CONSTANTS["pi"].formula("bbp"))

# Every interleave / doubling variant built into the extension (lanes, step).
VARIANTS = [(1, 0), (4, 0), (8, 0), (4, 1), (8, 1), (4, 2), (8, 2), (4, 3), (8, 3), (4, 4), (8, 4)]

LIMIT = 1 << 63


def series_args(series: Series, big_d: int, k0: int, k1: int, words: int) -> tuple:
    return (
        big_d,
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


def assert_same(args: tuple) -> None:
    assert _kernel.head_sum(*args) == head_sum_py(*args)


def integer_root(x: int, s: int) -> int:
    """floor(x ** (1/s)) for x >= 0, s >= 1."""
    r = int(round(x ** (1.0 / s)))
    while r**s > x:
        r -= 1
    while (r + 1) ** s <= x:
        r += 1
    return r


def kernel_k_limit(series: Series) -> int:
    """First k whose largest modulus reaches 2^63."""
    root = integer_root((LIMIT - 1) // series.q, series.s)  # q * base^s < 2^63 iff base <= root
    return (root - max(series.js)) // series.m + 1


# --- the built-in formulas ---------------------------------------------------


@st.composite
def builtin_calls(draw: st.DrawFn) -> tuple:
    series = draw(st.sampled_from(SERIES))
    big_d = draw(st.one_of(st.integers(0, 300), st.integers(0, 10**9), st.integers(0, 2**45)))
    head = min(big_d // series.e + 1, kernel_k_limit(series))
    k1 = draw(st.integers(1, head))
    k0 = draw(st.integers(max(0, k1 - 48), k1 - 1))
    words = draw(st.integers(1, 16))
    return series_args(series, big_d, k0, k1, words)


@settings(max_examples=150, deadline=None)
@given(builtin_calls())
# position 1 of pi (D = 0, the first term only)
@example(series_args(PI_BBP, 0, 0, 1, 2))
# the end of the head, where D - e*k is smaller than the moduli's power of two
@example(series_args(PI_BBP, 4 * 10**6 - 4, 10**6 - 40, 10**6, 2))
@example(series_args(PI_BBP, 4 * 10**7 + 1, 10**7 - 3, 10**7 + 1, 16))
def test_builtin_series_match_twin(args: tuple) -> None:
    assert_same(args)


@pytest.mark.parametrize("series", SERIES, ids=SERIES_IDS)
def test_every_builtin_series_whole_head(series: Series) -> None:
    """A whole head at a small offset, every variant: moduli from q upwards, E down to 0."""
    big_d = 600
    args = series_args(series, big_d, 0, series.head_length(big_d + series.shift), 3)
    want = head_sum_py(*args)
    assert want[1] > 0
    for lanes, step in VARIANTS:
        assert _kernel._head_sum_variant(*args, lanes, step) == want


@pytest.mark.parametrize("series", SERIES, ids=SERIES_IDS)
def test_every_builtin_series_at_the_modulus_limit(series: Series) -> None:
    """The last k whose moduli stay below 2^63 runs; one more k is refused."""
    k_limit = kernel_k_limit(series)
    if backend.BACKEND == "c":
        assert backend.kernel_k_limit(series) == k_limit
    big_d = series.e * k_limit + 1000
    assert_same(series_args(series, big_d, k_limit - 3, k_limit, 2))
    with pytest.raises(OverflowError):
        _kernel.head_sum(*series_args(series, big_d, k_limit - 3, k_limit + 1, 2))


@settings(max_examples=60, deadline=None)
@given(builtin_calls(), st.sampled_from(VARIANTS))
def test_variants_match_twin(args: tuple, variant: tuple[int, int]) -> None:
    assert _kernel._head_sum_variant(*args, *variant) == head_sum_py(*args)


# --- chosen moduli: near 2^31 (the 32-bit path's edge), 2^32 and 2^63 ---------


@st.composite
def moduli_calls(draw: st.DrawFn) -> tuple:
    """Arguments whose largest modulus q (m k + j)^s lands just below a target."""
    target = draw(st.sampled_from([1 << b for b in (29, 31, 32, 48, 49, 50, 51, 52, 62, 63)]))
    s = draw(st.integers(1, 3))
    q = draw(st.sampled_from([1, 3, 21, 255, 1 << 10]) | st.integers(1, 1 << 12))
    m = draw(st.integers(1, 40))
    npairs = draw(st.integers(1, 6))
    # odd offsets, even offsets, and powers of two (moduli rich in factors 2)
    js = draw(
        st.lists(
            st.integers(1, 2 * m) | st.builds(lambda a: 1 << a, st.integers(0, 6)),
            min_size=npairs,
            max_size=npairs,
        )
    )
    coefficient = st.integers(-(1 << 62) + 1, (1 << 62) - 1) | st.integers(-600, 600)
    cs = draw(st.lists(coefficient, min_size=npairs, max_size=npairs))
    base_top = integer_root((target - 1) // q, s)  # q * base^s < target
    k1 = max(1, (base_top - max(js)) // m + 1 - draw(st.integers(0, 3)))
    k0 = max(0, k1 - draw(st.integers(1, 24)))
    e = draw(st.integers(0, min(12, (2**64 - 1) // max(1, k1 - 1))))
    big_d = draw(st.integers(e * (k1 - 1), e * (k1 - 1) + 200) | st.integers(e * (k1 - 1), 2**64 - 1))
    words = draw(st.integers(1, 16))
    alternating = draw(st.booleans())
    return (big_d, k0, k1, m, s, e, q, alternating, js, cs, words)


@settings(max_examples=200, deadline=None)
@given(moduli_calls())
# N = 2^63 - 1, the largest modulus allowed (odd), at k = 2^63 - 3 (odd: negated)
@example((2**64 - 1, 2**63 - 3, 2**63 - 2, 1, 1, 0, 1, True, [2], [-(2**62) + 1], 16))
# even moduli 2^62 (odd part 1) and 3 * 2^61, with D above and below their power of two
@example((70, 0, 1, 1, 1, 1, 1, False, [1 << 62, 3 << 61], [5, -7], 4))
@example((61, 0, 1, 1, 1, 1, 1, False, [1 << 62, 3 << 61], [5, -7], 4))
# moduli 2^31 - 1 and 2^31 + 1 in one batch (both sides of the 32-bit path)
@example((12345, 0, 1, 1, 1, 0, 1, False, [2**31 - 1, 2**31 + 1, 3, 2**31 - 3], [1, -1, 2, 3], 2))
@example((2**40 + 7, 0, 1, 1, 1, 0, 1, False, [2**31 - 1, 2**31 - 3, 2**30 + 1] * 3, [-1, 5, 7] * 3, 3))
# moduli just below 2^29 (the SSE2 path's edge), alone and mixed with 2^29 + 1
@example(
    (2**33 + 5, 0, 1, 1, 1, 0, 1, False, [2**29 - 1, 2**29 - 3, 2**29 - 5, 2**29 - 7] * 2, [3, -5] * 4, 2)
)
@example((2**33 + 5, 0, 1, 1, 1, 0, 1, False, [2**29 - 1, 2**29 + 1] * 4, [3, -5] * 4, 2))
def test_chosen_moduli_match_twin(args: tuple) -> None:
    n_max = max(args[6] * (args[3] * (args[2] - 1) + j) ** args[4] for j in args[8])
    assert n_max < LIMIT
    assert_same(args)


@settings(max_examples=100, deadline=None)
@given(
    st.integers(0, 2**64 - 1),
    st.lists(st.integers(1, 2**63 - 1), min_size=1, max_size=12),
    st.lists(st.integers(-(2**62) + 1, 2**62 - 1), min_size=12, max_size=12),
    st.integers(1, 16),
    st.booleans(),
)
def test_single_terms_any_modulus(
    big_d: int, moduli: list[int], cs: list[int], words: int, alt: bool
) -> None:
    """k = 0 with m = 0, s = 1, e = 0: the moduli are exactly the j's, any size, odd or even."""
    args = (big_d, 0, 1, 0, 1, 0, 1, alt, moduli, cs[: len(moduli)], words)
    assert_same(args)


def test_empty_range() -> None:
    assert _kernel.head_sum(100, 5, 5, 8, 1, 4, 1, False, (1,), (4,), 2) == (0, 0)
    assert _kernel.head_sum(100, 7, 3, 8, 1, 4, 1, False, (1,), (4,), 2) == (0, 0)


def test_threads_give_the_same_sums() -> None:
    """The kernel releases the GIL; concurrent calls must not disturb each other."""
    calls = [series_args(PI_BBP, 4 * 10**5, k, k + 4000, 2) for k in range(0, 40000, 4000)]
    want = [head_sum_py(*a) for a in calls]
    got: dict[int, tuple[int, int]] = {}

    def work(i: int) -> None:
        got[i] = _kernel.head_sum(*calls[i])

    threads = [threading.Thread(target=work, args=(i,)) for i in range(len(calls))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert [got[i] for i in range(len(calls))] == want


# --- limits --------------------------------------------------------------------


def test_limits_match_backend() -> None:
    assert _kernel.MAX_WORDS == backend.KERNEL_MAX_WORDS
    assert _kernel.MAX_MODULUS == backend.KERNEL_MAX_MODULUS


@pytest.mark.parametrize(
    "args, error",
    [
        ((10, 0, 1, 0, 1, 0, 1, False, [2**63], [1], 2), OverflowError),  # N = 2^63
        ((10, 0, 1, 1, 3, 0, 1, False, [2**21], [1], 2), OverflowError),  # N = 2^63 via s = 3
        ((10, 0, 1, 0, 1, 0, 3, False, [2**62], [1], 2), OverflowError),  # q * 2^62
        ((10, 0, 2**62, 4, 1, 0, 1, False, [1], [1], 2), OverflowError),  # m k + j beyond 2^63
        ((2**64, 0, 1, 8, 1, 4, 1, False, [1], [1], 2), OverflowError),  # D
        ((-1, 0, 1, 8, 1, 4, 1, False, [1], [1], 2), OverflowError),  # D < 0
        ((10, 0, 1, 8, 1, 4, 1, False, [1], [2**62], 2), OverflowError),  # |c|
        ((10, 0, 1, 8, 1, 4, 1, False, [1], [-(2**62)], 2), OverflowError),
        ((10, 0, 1, 8, 1, 4, 1, False, [1], [1], 0), ValueError),  # words
        ((10, 0, 1, 8, 1, 4, 1, False, [1], [1], 17), ValueError),
        ((10, 0, 4, 8, 1, 4, 1, False, [1], [1], 2), ValueError),  # D - e (k1 - 1) < 0
        ((10, 0, 1, 8, 1, 4, 0, False, [1], [1], 2), ValueError),  # q = 0
        ((10, 0, 1, 8, 1, 4, 1, False, [0], [1], 2), ValueError),  # N = 0
        ((10, 0, 1, 8, 1, 4, 1, False, [1, 2], [1], 2), ValueError),  # lengths differ
        ((10, 0, 1, 8, 1, 4, 1, False, [1], [1.5], 2), TypeError),
    ],
)
def test_limits_are_enforced(args: tuple, error: type[Exception]) -> None:
    with pytest.raises(error):
        _kernel.head_sum(*args)


def test_limit_edges_are_accepted() -> None:
    """Just inside every limit: the kernel answers, and agrees with the twin."""
    assert_same((2**64 - 1, 0, 1, 0, 1, 0, 1, False, [2**63 - 1], [2**62 - 1], 16))
    assert_same((2**64 - 1, 0, 1, 0, 1, 0, 1, False, [2**62], [-(2**62) + 1], 1))
    assert_same((40, 0, 11, 8, 1, 4, 1, True, [1, 4, 5, 6], [4, -2, -1, -1], 2))  # E = 0 at k = 10


def test_unknown_variant_is_refused() -> None:
    with pytest.raises(ValueError):
        _kernel._head_sum_variant(10, 0, 1, 8, 1, 4, 1, False, [1], [1], 2, 3, 0)
    with pytest.raises(ValueError):
        _kernel._head_sum_variant(10, 0, 1, 8, 1, 4, 1, False, [1], [1], 2, 8, 5)


# --- the run-time chosen paths (issue 14) --------------------------------------

ALL_PATHS = ("portable", "scalar", "avx2", "avx512f", "avx512ifma", "ifma52")
OFFERED = _kernel.paths()
MISSING = _kernel.unavailable_paths()
# Where each vector path switches ladder (see _kernel.c): 32-bit lanes below
# 2^29, FMA doubles below 2^48, IFMA below 2^51, 64-bit scalar up to 2^63;
# and the portable path's own edges 2^29, 2^31, 2^32.
EDGES = (1 << 29, 1 << 31, 1 << 32, 1 << 48, 1 << 49, 1 << 50, 1 << 51, 1 << 52, 1 << 62, LIMIT)


def on_path(name: str):  # type: ignore[no-untyped-def]
    """pytest.param for a path, skipped with the reason when this CPU (or build) lacks it."""
    marks = [pytest.mark.skip(reason=f"path {name}: {MISSING[name]}")] if name in MISSING else []
    return pytest.param(name, marks=marks, id=name)


PATH_PARAMS = [on_path(p) for p in ALL_PATHS]


def test_paths_are_reported_consistently() -> None:
    assert set(OFFERED) | set(MISSING) == set(ALL_PATHS)
    assert not set(OFFERED) & set(MISSING)
    assert OFFERED[0] == "portable"  # the baseline is always there
    assert _kernel.active_path() in OFFERED
    assert all(MISSING.values())  # every missing path says why


def test_unknown_path_is_refused() -> None:
    with pytest.raises(ValueError, match="unknown kernel path"):
        _kernel.select_path("avx9000")
    with pytest.raises(ValueError, match="unknown kernel path"):
        _kernel._head_sum_path("", 10, 0, 1, 8, 1, 4, 1, False, [1], [1], 2)
    with pytest.raises(TypeError):
        _kernel.select_path(3)


@pytest.mark.parametrize("name", sorted(MISSING) or ["none"])
def test_missing_path_is_refused(name: str) -> None:
    if name == "none":
        pytest.skip("this CPU offers every path")
    with pytest.raises(ValueError, match="not available"):
        _kernel.select_path(name)


@pytest.fixture
def forced_path():  # type: ignore[no-untyped-def]
    """select_path for one test; the path in use before is restored afterwards."""
    before = _kernel.active_path()
    yield _kernel.select_path
    _kernel.select_path(before)


@pytest.mark.parametrize("name", PATH_PARAMS)
def test_select_path_switches_head_sum(name: str, forced_path) -> None:  # type: ignore[no-untyped-def]
    args = series_args(PI_BBP, 4 * 10**6, 10**5, 10**5 + 300, 2)
    forced_path(name)
    assert _kernel.active_path() == name
    assert _kernel.head_sum(*args) == _kernel._head_sum_path(name, *args) == head_sum_py(*args)


@pytest.mark.parametrize("name", PATH_PARAMS)
@pytest.mark.parametrize("series", SERIES, ids=SERIES_IDS)
def test_path_whole_head_every_series(name: str, series: Series) -> None:
    """A whole head at a small offset, then a block deep in the head (moduli near 2^31 and beyond)."""
    big_d = 900
    args = series_args(series, big_d, 0, series.head_length(big_d + series.shift), 4)
    assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)
    for target in (1 << 29, 1 << 31, 1 << 48):  # the first k whose moduli reach the target, +- a batch
        k = max(1, (integer_root(target // series.q, series.s) - max(series.js)) // series.m)
        big_d = series.e * (k + 40) + 77
        args = series_args(series, big_d, max(0, k - 40), k + 40, 2)
        assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=40, deadline=None)
@given(args=builtin_calls())
def test_path_builtin_series_match_twin(name: str, args: tuple) -> None:
    assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)


@st.composite
def edge_moduli_calls(draw: st.DrawFn) -> tuple:
    """Up to 150 moduli (k = 0, m = 0: the moduli are the j's) near one or two of the edges.

    Odd and even, below and above each edge, so that batches fall in every
    ladder and mix neighbouring ones; any D, any coefficient, 1 to 16 words.
    """
    edges = draw(st.lists(st.sampled_from(EDGES), min_size=1, max_size=2))
    offset = st.integers(-(1 << 12), 1 << 12) | st.integers(-3, 3)
    shift = st.integers(0, 4)  # a factor 2^v: even moduli
    moduli = draw(
        st.lists(
            st.builds(
                lambda e, o, v: min(LIMIT - 1, max(1, (e + o) >> v)), st.sampled_from(edges), offset, shift
            ),
            min_size=1,
            max_size=150,
        )
    )
    coefficient = st.integers(-(1 << 62) + 1, (1 << 62) - 1) | st.integers(-600, 600)
    cs = draw(st.lists(coefficient, min_size=len(moduli), max_size=len(moduli)))
    big_d = draw(st.integers(0, 300) | st.integers(0, 2**64 - 1))
    return (big_d, 0, 1, 0, 1, 0, 1, draw(st.booleans()), moduli, cs, draw(st.integers(1, 16)))


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=80, deadline=None)
@given(args=edge_moduli_calls())
@example(args=(2**64 - 1, 0, 1, 0, 1, 0, 1, True, [2**29 - 1, 2**29 + 1] * 40, [3, -5] * 40, 16))
@example(args=(2**64 - 1, 0, 1, 0, 1, 0, 1, False, [2**48 - 1] * 63 + [2**48 + 1], [-(2**62) + 1] * 64, 3))
@example(args=(12345, 0, 1, 0, 1, 0, 1, False, [2**51 - 1] * 64 + [2**51 - 3] * 64, [1, -1] * 64, 1))
@example(args=(77, 0, 1, 0, 1, 0, 1, False, [1] * 70 + [3], [1] * 71, 2))  # moduli 1 and the padding
def test_path_edge_moduli_match_twin(name: str, args: tuple) -> None:
    assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)


@st.composite
def progression_calls(draw: st.DrawFn) -> tuple:
    """Runs of consecutive k (s = 1, odd q: the vector paths' tight collection loop) whose moduli
    m k + j end just below or above an edge, with exponents D - e k that share few or many bits.

    A batch then holds terms whose exponents differ in their low bits only (the ladders test the
    shared bits once for all lanes) or in almost every bit (e up to 2^32, D up to 2^64), and
    whose moduli straddle the edges where the ladder (2^29, 2^48, 2^51) and the fraction digits
    (2^32: one product; 2^52: IFMA; beyond: three products) change.
    """
    edge = draw(st.sampled_from(EDGES))
    m = draw(st.integers(1, 64) | st.sampled_from([2, 4, 8, 20, 1 << 10]))
    count = draw(st.integers(1, 300))
    k0 = draw(st.integers(0, 1 << 20))
    k1 = k0 + count
    q = draw(st.sampled_from([1, 3, 21]))
    npairs = draw(st.integers(1, 7))
    # the largest modulus q (m (k1 - 1) + j) near the edge; even j with odd m/2 shifts a factor 2 out
    top = max(1, (edge - 1) // q + draw(st.integers(-(1 << 12), 1 << 12)) // q)
    js = draw(
        st.lists(
            st.builds(lambda d: max(1, top - m * (k1 - 1) - d), st.integers(0, 1 << 10)),
            min_size=npairs,
            max_size=npairs,
        )
    )
    if any(q * (m * (k1 - 1) + j) >= LIMIT for j in js):
        js = [max(1, (LIMIT - 1) // q - m * (k1 - 1) - 1 - i) for i in range(npairs)]
    e = draw(st.sampled_from([0, 1, 4, 10, 16, 31]) | st.integers(0, (1 << 32) - 1))
    e = min(e, (2**64 - 1) // max(1, k1 - 1))
    big_d = draw(st.integers(e * (k1 - 1), e * (k1 - 1) + 5000) | st.integers(e * (k1 - 1), 2**64 - 1))
    coefficient = st.integers(-600, 600) | st.integers(-(1 << 62) + 1, (1 << 62) - 1)
    cs = draw(st.lists(coefficient, min_size=npairs, max_size=npairs))
    words = draw(st.integers(1, 16))
    return (big_d, k0, k1, m, 1, e, q, draw(st.booleans()), js, cs, words)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=60, deadline=None)
@given(args=progression_calls())
# 300 k across 2^32 (fraction digits: one product, then three), exponents sharing their top bits
@example(
    args=(10**12, 1000, 1300, 3, 1, 10, 1, True, [2**32 - 3 * 1299 - 7, 2**32 - 3 * 1299 + 2], [5, -9], 2)
)
# moduli across 2^52 (IFMA digits, then three products), every exponent bit different
@example(args=(2**64 - 1, 0, 200, 1, 1, 2**31 + 1, 1, False, [2**52 - 150], [2**61 + 3], 16))
# exponents D - e k + 128 crossing 2^30 within a batch (lanes start their ladders from top bits of
# different lengths), moduli on the 32-bit ladders and on FMA doubles
@example(args=(2**30 - 128 + 50, 0, 200, 3, 1, 1, 1, False, [2**28 + 1, 2**30 + 7], [3, -5], 2))
@example(args=(2**30 - 128 + 50, 0, 200, 3, 1, 1, 1, True, [2**40 + 1, 2**47 - 999], [7, -1], 2))
# the largest exponent's top bits just above and at the start value the FMA ladder allows (52 << 20)
@example(args=((53 << 20) - 128, 0, 130, 5, 1, 1, 1, False, [2**40 + 3], [1], 2))
@example(args=((52 << 20) + (1 << 20) - 129, 0, 130, 5, 1, 1, 1, False, [2**30 + 3, 2**40 + 3], [1, 9], 2))
def test_path_progressions_match_twin(name: str, args: tuple) -> None:
    assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)


@pytest.mark.parametrize("name", PATH_PARAMS)
@settings(max_examples=40, deadline=None)
@given(args=moduli_calls())
@example(args=(10**6, 0, 3000, 8, 1, 4, 1, True, [1, 4, 5, 6], [4, 0, -1, 0], 2))  # zero coefficients
@example(
    args=(2**64 - 1, 0, 3000, 20, 1, 10, 3, True, [2, 5, 6], [2**62 - 1, -(2**61), 7], 3)
)  # |c| >= n, big E
def test_path_chosen_moduli_match_twin(name: str, args: tuple) -> None:
    """Real series shapes (q, m, s, alternating) with the last modulus just below an edge."""
    assert _kernel._head_sum_path(name, *args) == head_sum_py(*args)


# Bailey, Borwein, Plouffe, "On the rapid computation of various polylogarithmic
# constants", Math. Comp. 66 (1997), table of hex digits of pi: the 14 digits
# from position n in this project's convention (digit 1 is the first after the
# point), as benchmarks/deep.py also prints them.  Values as quoted in issue 14.
TABLE_1997 = {10**6: "26C65E52CB4593", 10**7: "17AF5863EFED8D", 10**8: "ECB840E21926EC"}


@pytest.mark.parametrize("name", PATH_PARAMS)
@pytest.mark.parametrize("position", [10**6, 10**7])
def test_path_1997_table(name: str, position: int, forced_path) -> None:  # type: ignore[no-untyped-def]
    from spotcheck.engine.api import extract

    if backend.BACKEND != "c":
        pytest.skip(f"the engine does not run the compiled kernel: {backend.BACKEND_NOTE}")
    forced_path(name)
    formula = "bbp" if position == 10**6 else "bellard"
    assert extract("pi", position, 14, formula=formula).digits == TABLE_1997[position]


@pytest.mark.slow
@pytest.mark.parametrize("name", PATH_PARAMS)
def test_path_1997_table_at_10_8(name: str, forced_path) -> None:  # type: ignore[no-untyped-def]
    # 2 s on a vector path, 9 to 10 s on portable and scalar
    from spotcheck.engine.api import extract

    if backend.BACKEND != "c":
        pytest.skip(f"the engine does not run the compiled kernel: {backend.BACKEND_NOTE}")
    forced_path(name)
    assert extract("pi", 10**8, 14).digits == TABLE_1997[10**8]


def run_cli(env_extra: dict[str, str], *argv: str) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k not in ("SPOTCHECK_PURE", "SPOTCHECK_KERNEL")}
    env.update(env_extra)
    return subprocess.run(
        [sys.executable, "-m", "spotcheck", *argv], env=env, capture_output=True, text=True, timeout=120
    )


def test_spotcheck_kernel_names_the_path() -> None:
    name = OFFERED[-1]
    out = run_cli({"SPOTCHECK_KERNEL": name}, "--version")
    assert out.returncode == 0, out.stderr
    assert f"path {name} (SPOTCHECK_KERNEL is set" in out.stdout
    assert all(p in out.stdout for p in OFFERED)


@pytest.mark.parametrize("value", ["avx9000", *sorted(MISSING)])
def test_spotcheck_kernel_refuses_a_path_it_cannot_run(value: str) -> None:
    out = run_cli({"SPOTCHECK_KERNEL": value}, "digits", "pi", "--at", "1000")
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:") and "SPOTCHECK_KERNEL" in lines[0]
    assert out.stdout == ""


# --- physical cores (the default of --workers) ---------------------------------


def fake_topology(root: Path, cpus: Mapping[int, tuple[int, int, str] | None]) -> Path:
    """A sysfs cpu tree: cpu -> (package, core, siblings) or None for no topology."""
    for cpu, topo in cpus.items():
        d = root / f"cpu{cpu}" / "topology"
        d.mkdir(parents=True)
        if topo is not None:
            package, core, siblings = topo
            (d / "physical_package_id").write_text(f"{package}\n")
            (d / "core_id").write_text(f"{core}\n")
            (d / "thread_siblings_list").write_text(f"{siblings}\n")
    (root / "cpufreq").mkdir()  # not a cpuN entry
    return root


def test_physical_cores_counts_siblings_once(tmp_path: Path) -> None:
    from spotcheck.engine.cpus import physical_cores

    # 2 packages x 2 cores x 2 threads; core ids repeat across packages
    topo = {c: (c // 4, (c // 2) % 2, f"{c & ~1}-{c | 1}") for c in range(8)}
    root = fake_topology(tmp_path, topo)
    assert physical_cores(root, allowed=set(range(8))) == 4
    assert physical_cores(root, allowed={0, 1}) == 1  # two siblings of one core
    assert physical_cores(root, allowed={0, 2, 5}) == 3


def test_physical_cores_from_sibling_lists_and_fallback(tmp_path: Path) -> None:
    from spotcheck.engine.cpus import physical_cores

    root = tmp_path / "a"
    for cpu, siblings in {0: "0,2", 1: "1,3", 2: "0,2", 3: "1,3"}.items():
        d = root / f"cpu{cpu}" / "topology"
        d.mkdir(parents=True)
        (d / "thread_siblings_list").write_text(siblings)
    assert physical_cores(root, allowed={0, 1, 2, 3}) == 2
    # a CPU without topology: the logical count of the allowed CPUs
    assert physical_cores(fake_topology(tmp_path / "b", {0: None, 1: None, 2: None}), allowed={0, 1, 2}) == 3
    assert physical_cores(tmp_path / "missing", allowed={0, 1, 2, 3, 4}) == 5


def test_physical_cores_here_is_sane() -> None:
    from spotcheck.engine.cpus import physical_cores

    assert 1 <= physical_cores() <= (os.cpu_count() or 1)
