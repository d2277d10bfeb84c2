"""Attribute sampling for tests of controls: sample sizes and evaluation.

A test of controls asks, one-sided, whether the population deviation rate is
at or below the *tolerable deviation rate* ``t``. The sample size plan and the
evaluation below use one definition throughout, so that they always agree.

Sample size (``size_sample``)
    The smallest ``n`` such that, with ``k = ceil(e × n)`` deviations allowed
    (``e`` the expected population deviation rate),

        P(X ≤ k) ≤ 1 − confidence  when the true rate equals ``t``,

    X following the chosen model (see :mod:`service.sampling.distributions`).
    ``e = 0`` gives the zero-deviation (discovery) plan. ``P(X ≤ k)`` at ``t``
    is the *risk of overreliance* the plan accepts; ``P(X > k)`` at ``e`` is
    its *risk of underreliance*.

Evaluation (``evaluate_sample``)
    For ``d`` deviations in ``n`` items, the *upper deviation limit* is the
    exact one-sided upper confidence bound for the rate; the result supports
    reliance exactly when ``P(X ≤ d) ≤ 1 − confidence`` at the tolerable rate,
    which is the sizing condition again. Hence, for a plan from
    ``size_sample``, ``k`` deviations support reliance and ``k + 1`` do not.

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 and tables A-1 to A-4.
Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial
limits illustrated in the case of the binomial. *Biometrika* 26(4), 404–413.
Wright, T. (1991). Exact confidence bounds when sampling from small finite
universes: an easy reference based on the hypergeometric distribution (monograph).
Garwood, F. (1936). Fiducial limits for the Poisson distribution.
*Biometrika* 28(3/4), 437–442.
"""

from __future__ import annotations

from service.sampling.attributes.checks import (
    DEFAULT_MAX_SAMPLE_SIZE,
    MAX_ALLOWED_DEVIATIONS,
    MAX_CONFIDENCE,
    MIN_CONFIDENCE,
    MIN_TOLERABLE_RATE,
)
from service.sampling.attributes.evaluation import evaluate_sample
from service.sampling.attributes.results import Evaluation, Interval, SampleSizePlan
from service.sampling.attributes.sizing import PLAN_MEMO_SIZE, size_sample

__all__ = [
    "DEFAULT_MAX_SAMPLE_SIZE",
    "MAX_ALLOWED_DEVIATIONS",
    "MAX_CONFIDENCE",
    "MIN_CONFIDENCE",
    "MIN_TOLERABLE_RATE",
    "PLAN_MEMO_SIZE",
    "Evaluation",
    "Interval",
    "SampleSizePlan",
    "evaluate_sample",
    "size_sample",
]


