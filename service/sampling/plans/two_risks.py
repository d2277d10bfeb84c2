"""A plan that bounds both risks: overreliance and underreliance.

With tolerable rate ``t``, expected rate ``e``, confidence ``1 − α`` and a limit ``β`` on
the risk of underreliance, the plan is the smallest sample size ``n`` for which some
number of allowed deviations ``k`` satisfies both

    P(X ≤ k | rate t) ≤ α      (risk of overreliance)
    P(X > k | rate e) ≤ β      (risk of underreliance),

X following the chosen model (:mod:`service.sampling.distributions`). At that ``n`` the
allowed deviations are the largest such ``k``: it is the same ``k`` up to which
:func:`service.sampling.attributes.evaluate_sample` says a result supports reliance, and
it gives the smallest risk of underreliance at that ``n``.

For a fixed ``n`` the first condition holds for ``k ≤ K(n)`` (the lower tail grows with
``k``) and the second for ``k`` from some point on, so the plan exists at ``n`` exactly
when ``P(X > K(n) | e) ≤ β``. Only the first ``n`` of each run of equal ``K(n)`` can be
the first feasible one, so the search scans ``k`` upward (see :func:`_search`).

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 (risk of overreliance and risk of
underreliance). Dodge, H. F. & Romig, H. G. (1959). *Sampling Inspection Tables*, 2nd ed.,
Wiley: single sampling plans chosen from two points of the operating characteristic.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np
from numpy.typing import NDArray
from scipy import special

from service.sampling.attributes import (
    DEFAULT_MAX_SAMPLE_SIZE,
    MAX_ALLOWED_DEVIATIONS,
    SampleSizePlan,
    size_sample,
)
from service.sampling.distributions import Model, deviant_items, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput, NoFeasiblePlan
from service.sampling.rates import exact_rate


@dataclass(frozen=True)
class TwoRiskPlan(SampleSizePlan):
    """A plan bounding both risks: a :class:`SampleSizePlan` with the limit it met and
    the classical plan (allowing ``ceil(e n)`` deviations) beside it."""

    underreliance_risk: float | None = None
    classical_sample_size: int | None = None
    classical_allowed_deviations: int | None = None


def _largest_allowed(
    model: Model, ns: NDArray[np.int64], tolerable: Fraction, alpha: float, size: int | None
) -> NDArray[np.int64]:
    """For each n, the largest k with P(X ≤ k | t) ≤ α (−1 when even k = 0 fails)."""
    low = np.full(ns.shape, -1, dtype=np.int64)  # P(X ≤ −1) = 0 ≤ α
    high = ns.copy()  # P(X ≤ n) = 1 > α
    while np.any(high - low > 1):
        mid = (low + high) // 2
        ok = np.asarray(model.lower_tail(mid, ns, tolerable, size)) <= alpha
        low = np.where(ok, mid, low)
        high = np.where(ok, high, mid)
    return low


def size_two_risks(
    tolerable_rate: float,
    expected_rate: float,
    confidence: float,
    underreliance_risk: float,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> TwoRiskPlan:
    """Smallest plan whose risks of overreliance and underreliance both meet their limits.

    Parameters
    ----------
    tolerable_rate, expected_rate, confidence, population_size, method, max_sample_size
        As for :func:`service.sampling.attributes.size_sample`.
    underreliance_risk : float
        Largest acceptable risk of underreliance at the expected rate, in (0, 1).

    Returns
    -------
    TwoRiskPlan

    Examples
    --------
    >>> plan = size_two_risks(0.05, 0.01, 0.95, 0.10)
    >>> plan.sample_size, plan.allowed_deviations, round(plan.risk_of_underreliance, 3)
    (153, 3, 0.069)
    """
    if not (0.0 < underreliance_risk < 1.0):
        raise InvalidInput(
            "underreliance_risk",
            f"underreliance_risk {underreliance_risk!r} must be strictly between 0 and 1",
        )
    # The zero-deviation plan checks the shared inputs and bounds the search from below.
    zero = size_sample(
        tolerable_rate, 0.0, confidence, population_size, method, max_sample_size=max_sample_size
    )
    model = resolve_model(zero.method, population_size)
    if not (0.0 <= expected_rate < tolerable_rate):
        raise InvalidInput(
            "expected_rate",
            f"expected_rate {expected_rate!r} must be at least 0 and below "
            f"tolerable_rate {tolerable_rate!r}",
        )
    try:
        classical: SampleSizePlan | None = size_sample(
            tolerable_rate,
            expected_rate,
            confidence,
            population_size,
            model.name,
            max_sample_size=max_sample_size,
        )
    except (NoFeasiblePlan, ComputationTooLarge):
        classical = None
    tolerable, expected = exact_rate(tolerable_rate), exact_rate(expected_rate)
    alpha = 1.0 - confidence
    max_n = max_sample_size
    if model.needs_population and population_size is not None:
        max_n = min(max_n, population_size)

    estimate = _normal_estimate(tolerable_rate, expected_rate, confidence, underreliance_risk)
    if estimate > 2 * max_n and not model.needs_population:
        raise _none_under_cap(tolerable_rate, expected_rate, underreliance_risk, max_n, estimate)
    if min(estimate, max_n) * expected_rate > 2 * MAX_ALLOWED_DEVIATIONS:
        raise ComputationTooLarge(
            "underreliance_risk",
            f"the plan would need about {estimate:,.0f} items allowing about "
            f"{estimate * expected_rate:,.0f} deviations; this service sizes two-risk plans "
            f"allowing at most {MAX_ALLOWED_DEVIATIONS:,}: loosen underreliance_risk or widen "
            "the gap between expected_rate and tolerable_rate",
        )
    found = _search(
        model,
        tolerable,
        expected,
        alpha,
        underreliance_risk,
        population_size,
        zero.sample_size,
        max_n,
    )
    if found is None:
        raise _none_under_cap(tolerable_rate, expected_rate, underreliance_risk, max_n, estimate)
    n, k = found
    risk_over = float(model.lower_tail(k, n, tolerable, population_size))
    risk_under = 0.0 if expected == 0 else float(model.upper_tail(k, n, expected, population_size))
    warnings = (
        []
        if classical is None
        else [
            w
            for w in classical.warnings
            if "zero-deviation" not in w
            and "half the population" not in w
            and "every item" not in w
        ]
    )
    if population_size is not None and n == population_size:
        warnings.append(
            f"The plan tests every item of the population ({n:,} of {n:,}): the result will "
            "be the population's exact deviation count, with no sampling risk."
        )
    elif population_size is not None and 2 * n > population_size:
        warnings.append(
            f"The sample of {n:,} is more than half the population of {population_size:,} "
            "items; consider testing every item."
        )
    return TwoRiskPlan(
        method=model.name,
        tolerable_rate=tolerable_rate,
        expected_rate=expected_rate,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        sample_size=n,
        allowed_deviations=k,
        achieved_confidence=1.0 - risk_over,
        risk_of_overreliance=risk_over,
        risk_of_underreliance=risk_under,
        warnings=tuple(dict.fromkeys(warnings)),
        tolerable_deviant_items=(
            None if population_size is None else deviant_items(tolerable, population_size)
        ),
        underreliance_risk=underreliance_risk,
        classical_sample_size=None if classical is None else classical.sample_size,
        classical_allowed_deviations=None if classical is None else classical.allowed_deviations,
    )


def _search(
    model: Model,
    tolerable: Fraction,
    expected: Fraction,
    alpha: float,
    beta: float,
    size: int | None,
    start: int,
    max_n: int,
) -> tuple[int, int] | None:
    """The smallest feasible n and its K(n), or None when there is none up to max_n.

    K(n) never falls as n grows, and while it stays at one value k the risk of
    underreliance ``P(X > k | e)`` only grows with n: within each run of equal K(n) only
    its first n can be the first feasible one. That first n is ``n_k``, the smallest n with
    ``P(X ≤ k | t) ≤ α``, nondecreasing in k. So the k are scanned upward, ``n_k`` found
    for a chunk of them at once by bisection on n, and the first k with
    ``P(X > k | e) ≤ β`` at ``n_k`` gives the plan. (Checking k where K(n_k) is larger is
    only stricter, and that n_k is checked again with its own K(n_k).)
    """
    first_k, chunk = 0, 16
    while first_k <= MAX_ALLOWED_DEVIATIONS:
        ks = np.arange(first_k, first_k + chunk, dtype=np.int64)
        top = np.full(ks.shape, max_n, dtype=np.int64)
        reachable = ks < max_n
        reachable &= (
            np.asarray(model.lower_tail(ks, np.maximum(top, ks + 1), tolerable, size)) <= alpha
        )
        if not reachable[0]:
            return None
        ks = ks[reachable]
        low = np.maximum(ks + 1, start)  # below n_k
        high = np.full(ks.shape, max_n, dtype=np.int64)  # at or above n_k
        low = np.where(
            np.asarray(model.lower_tail(ks, low, tolerable, size)) <= alpha, low - 1, low
        )
        while np.any(high - low > 1):
            mid = (low + high) // 2
            ok = np.asarray(model.lower_tail(ks, mid, tolerable, size)) <= alpha
            high = np.where(ok, mid, high)
            low = np.where(ok, low, mid)
        n_k = high
        under = np.asarray(model.upper_tail(ks, n_k, expected, size))
        hits = np.flatnonzero(under <= beta)
        if hits.size:
            n = int(n_k[hits[0]])
            k = int(
                _largest_allowed(model, np.array([n], dtype=np.int64), tolerable, alpha, size)[0]
            )
            return n, k
        if ks.size < chunk:
            return None
        first_k += chunk
        chunk = min(4 * chunk, 1024)
    raise ComputationTooLarge(
        "underreliance_risk",
        f"a plan meeting both risks would allow more than {MAX_ALLOWED_DEVIATIONS:,} "
        "deviations: loosen underreliance_risk or widen the gap between expected_rate and "
        "tolerable_rate",
    )


def _normal_estimate(tolerable: float, expected: float, confidence: float, beta: float) -> float:
    """Size from the normal approximation to both tails (used for messages and caps only)."""
    z_alpha = float(special.ndtri(confidence))
    z_beta = float(special.ndtri(1.0 - beta))
    spread = (
        z_alpha * (tolerable * (1 - tolerable)) ** 0.5 + z_beta * (expected * (1 - expected)) ** 0.5
    )
    return float((spread / (tolerable - expected)) ** 2)


def _none_under_cap(
    tolerable_rate: float, expected_rate: float, beta: float, max_n: int, estimate: float
) -> NoFeasiblePlan:
    return NoFeasiblePlan(
        "underreliance_risk",
        f"no sample of at most {max_n:,} items keeps the risk of overreliance within the "
        f"confidence and the risk of underreliance at expected_rate {expected_rate!r} within "
        f"{beta!r}; by the normal approximation about {estimate:,.0f} items would be needed. "
        "A looser underreliance_risk, a lower expected_rate or a higher tolerable_rate "
        f"(a wider gap than {tolerable_rate!r} − {expected_rate!r}) would give a plan",
    )
