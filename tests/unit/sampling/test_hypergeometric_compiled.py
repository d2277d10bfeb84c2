"""The compiled scalar tails give the bits the Python code gives, or decline.

``service/sampling/_hypergeometric_tails.c`` repeats the operations of
``hypergeometric._lower_one``; the accuracy of those bits is checked against exact
fractions and scipy.stats in ``test_hypergeometric.py``, which runs through the compiled
module. Here the two are compared with each other: wherever the compiled module answers,
its answer must be the Python answer to the last bit.
"""

from __future__ import annotations

import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.sampling import hypergeometric
from service.sampling.hypergeometric import cdf, sf

try:
    from service.sampling import _hypergeometric_tails as compiled
except ImportError:  # an install without a C compiler: the first test fails
    compiled = None

#: 2^53: the populations the module accepts stay below it.
LIMIT = 2**53


def test_the_compiled_tails_are_built() -> None:
    # `make test` installs with a C compiler at hand; the module is optional only for
    # installs without one, where the Python code gives the same bits more slowly.
    assert compiled is not None, "service/sampling/_hypergeometric_tails.c was not built"
    assert hypergeometric._compiled_lower is compiled.lower


def _support(total: int, marked: int, drawn: int) -> tuple[int, int]:
    return max(0, drawn - (total - marked)), min(drawn, marked)


def _python(k: int, total: int, marked: int, drawn: int) -> tuple[float, float]:
    return hypergeometric._lower_one(k, total, marked, drawn)


def _cases(count: int, seed: int) -> list[tuple[int, int, int, int]]:
    """Arguments inside the support, from tiny populations to 2^53 − 1 items."""
    rng = random.Random(seed)
    cases = []
    while len(cases) < count:
        total = rng.choice([rng.randint(1, 300), rng.randint(1, 300_000),
                            rng.randint(1, 10**12), rng.randint(1, LIMIT - 1)])
        marked = (rng.randint(0, total) if rng.random() < 0.5
                  else min(total, int(total * rng.random() * 0.2)))
        drawn = rng.randint(0, min(total, rng.choice([30, 300, 3000, 10**6])))
        low, high = _support(total, marked, drawn)
        if low < high:
            cases.append((rng.randint(low, high - 1), total, marked, drawn))
    return cases


@pytest.mark.skipif(compiled is None, reason="the compiled tails are not built")
def test_every_answer_is_the_python_answer_to_the_bit() -> None:
    answered = 0
    for k, total, marked, drawn in _cases(20_000, seed=20261203):
        tails = compiled.lower(k, total, marked, drawn)
        if tails is not None:
            answered += 1
            assert tails == _python(k, total, marked, drawn), (k, total, marked, drawn)
    # most of these are short tails with exact products: the compiled module answers them
    assert answered > 12_000


@pytest.mark.skipif(compiled is None, reason="the compiled tails are not built")
@settings(max_examples=400, deadline=None)
@given(
    total=st.integers(1, LIMIT - 1),
    marked_share=st.floats(0, 1),
    drawn=st.integers(0, 5000),
    position=st.floats(0, 1),
)
def test_any_answer_is_the_python_answer(total: int, marked_share: float, drawn: int,
                                         position: float) -> None:
    marked = min(total, int(total * marked_share))
    drawn = min(drawn, total)
    low, high = _support(total, marked, drawn)
    if low >= high:
        assert compiled.lower(low, total, marked, drawn) is None
        return
    k = min(high - 1, low + int((high - low) * position))
    tails = compiled.lower(k, total, marked, drawn)
    if tails is not None:
        assert tails == _python(k, total, marked, drawn)


@pytest.mark.skipif(compiled is None, reason="the compiled tails are not built")
@pytest.mark.parametrize(
    ("k", "total", "marked", "drawn", "why"),
    [
        (-1, 100, 5, 10, "below the support"),
        (5, 100, 5, 10, "at the top of the support"),
        (0, 0, 0, 0, "an empty population"),
        (0, LIMIT, 5, 10, "a population beyond exact doubles"),
        (0, 10**30, 5, 10, "a population beyond 64 bits"),
        (10**30, 100, 5, 10, "a count beyond 64 bits"),
        (1, 100, 101, 10, "more deviant items than items"),
        # the upper tail from 25,001 runs for thousands of terms: numpy blocks in Python
        (25_000, 10**6, 5 * 10**5, 5 * 10**4, "a tail longer than the scalar loop"),
        # (M − x)(n − x) is about 10^21: Python divides those integers exactly
        (2, 10**15, 10**14, 10**7, "a ratio of integers beyond 2^53"),
    ],
)
def test_declines_where_the_python_code_must_decide(k: int, total: int, marked: int,
                                                     drawn: int, why: str) -> None:
    assert compiled.lower(k, total, marked, drawn) is None, why


def test_the_public_tails_are_the_same_with_and_without_the_compiled_module(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    cases = _cases(3000, seed=7)
    cases += [(25_000, 10**6, 5 * 10**5, 5 * 10**4), (2, 10**15, 10**14, 10**7),
              (-1, 100, 5, 10), (5, 100, 5, 10), (0, 10**30, 5, 10)]
    with_module = [(cdf(*case), sf(*case)) for case in cases]
    monkeypatch.setattr(hypergeometric, "_compiled_lower", None)
    without = [(cdf(*case), sf(*case)) for case in cases]
    assert [repr(pair) for pair in with_module] == [repr(pair) for pair in without]


@pytest.mark.skipif(compiled is None, reason="the compiled tails are not built")
def test_configure_takes_sixteen_stirling_errors() -> None:
    with pytest.raises(ValueError, match="16 values"):
        compiled.configure([0.0] * 15)
    with pytest.raises(TypeError):
        compiled.configure([None] * 16)
    with pytest.raises(TypeError):
        compiled.lower(1.5, 100, 5, 10)
    # the table the module was given is still the one in use
    assert compiled.lower(1, 100, 5, 10) == _python(1, 100, 5, 10)
