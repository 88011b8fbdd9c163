"""The compiled comb (``_kernel.head_sum_comb``) against its twin, on every path this CPU offers.

Contract: ``head_sum_comb_py`` is the reference; ``head_sum_comb`` returns
exactly the same per-window ``(value, terms)`` inside its limits (those of
``head_sum`` for the deepest window, at most ``MAX_COMB`` windows, a step
below 2^63) and refuses arguments outside them; ``backend.head_block_comb``
(kernel below the split, twin above, long combs cut) is ``head_block`` per
window.
"""

from __future__ import annotations

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from spotcheck.engine import backend
from spotcheck.engine.head_py import head_sum_comb_py
from tests.test_comb import PI_BBP, SERIES, builtin_combs, comb_args
from tests.test_kernel import (  # skips this module too when the kernel is not built
    PATH_PARAMS,
    edge_moduli_calls,
    kernel_k_limit,
    progression_calls,
)

_kernel = pytest.importorskip("spotcheck.engine._kernel", reason="compiled kernel not built")


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
    # the kernel takes D_0 >= 0 (backend.head_block_comb peels the windows with D_i < 0)
    return (max(0, args[0]), args[1], args[2], k0, k1, *args[5:])


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
