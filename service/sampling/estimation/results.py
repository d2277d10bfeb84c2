"""The answer of an estimation sizing: one row per method, and the plan that holds them."""

from __future__ import annotations

from dataclasses import dataclass

from service.sampling.estimation.limits import Guarantee


@dataclass(frozen=True)
class EstimationRow:
    """One method's answer.

    Attributes
    ----------
    method : str
        Method name (``exact``, ``wilson``, ``normal``, ``chebyshev``, ``hoeffding``).
    sample_size : int
        Sample size the method asks for, never more than the population size.
    guarantee : {"exact", "approximate", "distribution_free_bound"}
        What the size guarantees about the miss probability.
    miss_probability : float or None
        Exact miss probability ``P(|X/n − p| > e)`` at ``sample_size`` (binomial, or
        hypergeometric when a population size is given); with no anticipated rate, the
        supremum over all rates.  ``None`` when the computation is too large.
    ratio_to_exact : float or None
        ``sample_size`` divided by the exact method's size, when the exact method was run.
    finite_population_correction : bool
        Whether the method's finite-population form was used.
    """

    method: str
    sample_size: int
    guarantee: Guarantee
    miss_probability: float | None
    ratio_to_exact: float | None
    finite_population_correction: bool


@dataclass(frozen=True)
class EstimationPlan:
    """Sample sizes from several methods for one estimation goal.

    Attributes
    ----------
    margin, confidence : float
        The requested margin ``e`` and confidence ``c``.
    anticipated_rate : float or None
        The anticipated rate, or ``None`` for the worst case over all rates.
    population_size : int or None
        The population size, or ``None`` for an unlimited population.
    rows : tuple of EstimationRow
        One row per method, in the order requested.
    recommended : str
        The method with the smallest size among those whose guarantee is ``exact`` or
        ``distribution_free_bound`` (the first such row on a tie); when only approximate
        methods were requested, the smallest of those.
    """

    margin: float
    confidence: float
    anticipated_rate: float | None
    population_size: int | None
    rows: tuple[EstimationRow, ...]
    recommended: str
