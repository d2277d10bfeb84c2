"""Sample sizes for estimating a rate within a margin.

An auditor who wants to *estimate* a deviation rate (rather than test it against a
tolerable rate) asks: how many items must be drawn so that the sample rate lands within
``margin`` of the true rate with probability at least ``confidence``?  This module answers
with several methods side by side, each labelled with the kind of guarantee it gives:

``exact``
    The smallest sample size from which on the exact probability that the sample rate
    misses the rate by more than the margin is at most ``1 - confidence`` at every larger
    size too (see :func:`_size_exact` for this lattice rule).  Binomial sampling (with
    replacement, or an unlimited population); hypergeometric when a population size is
    given.  With no anticipated rate, the miss probability is its supremum over all
    rates (binomial) or its maximum over all populations of the given size
    (hypergeometric).
    Guarantee: ``"exact"``.
``wilson``
    The smallest size whose Wilson score interval (Wilson 1927) has half-width at most the
    margin.  Guarantee: ``"approximate"``.
``normal``
    The textbook (Wald) size ``z² p(1−p)/e²`` with Cochran's finite population correction
    (Cochran 1977, §4.4).  Guarantee: ``"approximate"``.
``chebyshev``
    The size at which Chebyshev's inequality bounds the miss probability by
    ``1 - confidence``.  Guarantee: ``"distribution_free_bound"``.
``hoeffding``
    The size at which Hoeffding's inequality (Hoeffding 1963) bounds the miss probability
    by ``1 - confidence``.  Guarantee: ``"distribution_free_bound"``.

Definitions
-----------
For a sample of ``n`` items with ``X`` deviations, the sample rate is ``X/n``.  Given the
rate ``p`` and the margin ``e``, the *miss probability* is ``P(|X/n − p| > e)``, the chance
that the sample rate falls strictly outside ``[p − e, p + e]``.  The planning condition is
``miss probability ≤ α`` with ``α = 1 − confidence``.

Exactness
---------
Margins, confidences and rates are turned into fractions from the shortest decimal form of
the float given (``Fraction(repr(x))``), so ``0.05`` is exactly ``1/20``.  Closed-form sizes
are computed in rational arithmetic and rounded up once, so ``1/(4·0.05·0.05²)`` gives
2,000 and not 2,001 (the irrational factors ``z`` and ``ln(2/α)`` enter as the exact value
of their double-precision approximation).  Which outcomes count as misses is decided in
exact integer
arithmetic (``|x − n p| > n e``); the probabilities themselves are floats (full double
precision), and a comparison with ``α`` within the error band of
:mod:`service.sampling.ties` is redone on exact fractions.

References
----------
.. [1] Chebyshev's inequality ``P(|Y − E Y| ≥ k) ≤ Var(Y)/k²`` (I.-J. Bienaymé 1853,
       P. L. Chebyshev 1867), in any probability text.
.. [2] W. Hoeffding, "Probability inequalities for sums of bounded random variables",
       Journal of the American Statistical Association 58 (1963) 13–30.
.. [3] E. B. Wilson, "Probable inference, the law of succession, and statistical
       inference", Journal of the American Statistical Association 22 (1927) 209–212.
.. [4] W. G. Cochran, *Sampling Techniques*, 3rd ed., Wiley (1977), §4.4.
.. [5] C. Loader, "Fast and accurate computation of binomial probabilities" (2000), for
       writing the hypergeometric probability as a ratio of binomial probabilities.

Examples
--------
>>> plan = size_for_estimation(0.05, 0.95, methods=["chebyshev", "hoeffding", "normal"])
>>> [(row.method, row.sample_size) for row in plan.rows]
[('chebyshev', 2000), ('hoeffding', 738), ('normal', 385)]
>>> plan.recommended
'hoeffding'
>>> size_for_estimation(0.05, 0.95, population_size=4200, methods=["normal"]).rows[0].sample_size
353
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from functools import partial
from typing import NamedTuple

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.estimation.closed_forms import (
    _size_chebyshev,
    _size_hoeffding,
    _size_normal,
    _size_wilson,
)
from service.sampling.estimation.exact import (
    _exact_miss_at_rate,
    _miss,
    _miss_feasible,
    _size_exact,
    _within,
    exact_miss_probability,
)
from service.sampling.estimation.inputs import _exact, _open_unit, _population, _Problem, _Sized
from service.sampling.estimation.limits import (
    EXACT_SIZE_LIMIT,
    MAX_CONFIDENCE,
    MAX_POPULATION_SIZE,
    MIN_CONFIDENCE,
    MIN_MARGIN,
    Guarantee,
)
from service.sampling.estimation.results import EstimationPlan, EstimationRow

__all__ = [
    "EXACT_SIZE_LIMIT",
    "MAX_CONFIDENCE",
    "MAX_POPULATION_SIZE",
    "METHODS",
    "MIN_CONFIDENCE",
    "MIN_MARGIN",
    "EstimationPlan",
    "EstimationRow",
    "Guarantee",
    "exact_miss_probability",
    "size_for_estimation",
]


class _Method(NamedTuple):
    size: Callable[[_Problem], _Sized]
    guarantee: Guarantee


_METHODS: Mapping[str, _Method] = {
    "exact": _Method(_size_exact, "exact"),
    "wilson": _Method(_size_wilson, "approximate"),
    "normal": _Method(_size_normal, "approximate"),
    "chebyshev": _Method(_size_chebyshev, "distribution_free_bound"),
    "hoeffding": _Method(_size_hoeffding, "distribution_free_bound"),
}

#: Method names in their default order.
METHODS: tuple[str, ...] = tuple(_METHODS)

_PROVEN: frozenset[Guarantee] = frozenset({"exact", "distribution_free_bound"})


def _method_names(methods: Sequence[str] | None) -> tuple[str, ...]:
    if methods is None:
        return METHODS
    if isinstance(methods, str):
        methods = (methods,)
    names = tuple(dict.fromkeys(methods))
    if not names:
        raise InvalidInput("methods", "at least one method is required; got none")
    for name in names:
        if name not in _METHODS:
            raise InvalidInput(
                "methods", f"unknown method {name!r}; known methods: {', '.join(METHODS)}"
            )
    return names


def size_for_estimation(margin: float, confidence: float = 0.95,
                        anticipated_rate: float | None = None,
                        population_size: int | None = None,
                        methods: Sequence[str] | None = None, *,
                        max_sample_size: int = 10_000_000) -> EstimationPlan:
    """Sample sizes to estimate a rate within ``margin`` with probability ``confidence``.

    Parameters
    ----------
    margin : float
        Margin ``e``, ``0 < e < 0.5``: the largest acceptable distance between the sample
        rate and the rate.
    confidence : float
        Confidence ``c``, ``0 < c < 1``; the miss probability may be at most ``1 − c``.
    anticipated_rate : float or None
        Anticipated rate ``p``, ``0 < p < 1``; ``None`` plans for the worst case over all
        rates (``p = 1/2`` in the closed forms, the supremum over ``p`` for ``exact``).
    population_size : int or None
        Population size ``N ≥ 1``; given, the sample is drawn without replacement, the
        methods that allow it use their finite-population form, and no size exceeds ``N``.
    methods : sequence of str or None
        Methods to run, in the order of the rows; ``None`` runs all of
        ``exact, wilson, normal, chebyshev, hoeffding``.  Repeated names count once.
    max_sample_size : int
        Largest size any method may return.

    Returns
    -------
    EstimationPlan
        One row per method and the recommended method.

    Raises
    ------
    InvalidInput
        With field ``margin``, ``confidence``, ``anticipated_rate``, ``population.size`` or
        ``methods`` for an input outside its domain.
    ComputationTooLarge
        When a method needs more than ``max_sample_size`` items, or the exact computation
        is above its limits (:data:`EXACT_SIZE_LIMIT`).

    Notes
    -----
    ``exact`` returns the plain smallest size meeting the condition; see
    :func:`_size_exact` for the lattice effect and :func:`_binomial_supremum` and
    :func:`_hypergeometric_maximum` for the worst case.

    Examples
    --------
    >>> plan = size_for_estimation(0.1, 0.9, anticipated_rate=0.2, methods=["normal", "chebyshev"])
    >>> [(row.sample_size, row.guarantee) for row in plan.rows]
    [(44, 'approximate'), (160, 'distribution_free_bound')]
    """
    e = _open_unit(margin, "margin", 0.5)
    if e < _exact(MIN_MARGIN):
        raise InvalidInput("margin", f"must be at least {MIN_MARGIN:g}; got {float(margin)!r}")
    c = _open_unit(confidence, "confidence")
    if not _exact(MIN_CONFIDENCE) <= c <= _exact(MAX_CONFIDENCE):
        raise InvalidInput(
            "confidence",
            f"must be from {MIN_CONFIDENCE:g} to {MAX_CONFIDENCE:g}; got {float(confidence)!r}",
        )
    rate = None if anticipated_rate is None else _open_unit(anticipated_rate, "anticipated_rate")
    population = _population(population_size)
    names = _method_names(methods)
    if isinstance(max_sample_size, bool) or not isinstance(max_sample_size, int) or (
        max_sample_size < 1
    ):
        raise InvalidInput(
            "max_sample_size", f"must be a whole number ≥ 1; got {max_sample_size!r}"
        )
    problem = _Problem(e, 1 - c, rate, population, max_sample_size)

    sized: dict[str, _Sized] = {}
    for name in names:
        result = _METHODS[name].size(problem)
        if result.sample_size > max_sample_size:
            raise ComputationTooLarge(
                "margin",
                f"method {name!r} needs {result.sample_size:,} items, above the limit of "
                f"{max_sample_size:,}",
            )
        sized[name] = result

    exact_size = sized["exact"].sample_size if "exact" in sized else None
    rows = []
    for name in names:
        result = sized[name]
        miss = result.miss_probability
        if miss is None and _miss_feasible(result.sample_size, rate, population):
            miss = _miss(result.sample_size, rate, e, population)
            if rate is not None:
                miss = _within(result.sample_size, miss, problem.alpha, partial(
                    _exact_miss_at_rate, rate=rate, margin=e, population=population))[1]
        ratio = None if exact_size is None else result.sample_size / exact_size
        rows.append(EstimationRow(
            method=name,
            sample_size=int(result.sample_size),
            guarantee=_METHODS[name].guarantee,
            miss_probability=None if miss is None else float(miss),
            ratio_to_exact=ratio,
            finite_population_correction=result.finite_population_correction,
        ))

    proven = [row for row in rows if row.guarantee in _PROVEN] or rows
    recommended = min(proven, key=lambda row: row.sample_size).method
    return EstimationPlan(
        margin=float(margin),
        confidence=float(confidence),
        anticipated_rate=None if anticipated_rate is None else float(anticipated_rate),
        population_size=population,
        rows=tuple(rows),
        recommended=recommended,
    )
