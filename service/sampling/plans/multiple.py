"""Several attributes tested on one sample.

One sample of ``n`` items is tested for several attributes (an approval present, an
amount that matches, a posting in the right period), each with its own tolerable
deviation rate ``t_i`` and expected rate ``e_i``, at one confidence and from one
population.

Sample size
    Each attribute alone needs ``n_i`` items (:func:`service.sampling.attributes.size_sample`).
    The common sample is the smallest ``n ≥ max n_i`` at which every attribute's own
    condition holds with ``k_i = ceil(e_i × n)`` deviations allowed:

        P(X ≤ k_i) ≤ 1 − confidence  when the true rate equals ``t_i``.

    Usually ``n = max n_i``. The condition is not monotone in ``n``: a larger sample can
    allow one more deviation and lose confidence (``t = 5%``, ``e = 1%``: 93 items allowing
    1 deviation reach 95%, 101 items allowing 2 do not), so the search goes on past
    ``max n_i`` until every attribute holds, and says so in a warning.

Evaluation
    Each attribute is evaluated on its own with
    :func:`service.sampling.attributes.evaluate_sample`, on the shared sample size.

The risks are stated per attribute. Testing several attributes on one sample does not
change each one's risk of overreliance; the chance that at least one of them wrongly
supports reliance is larger, up to the sum of the risks.

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3 (attribute sampling, one sample
used for several attributes, the largest required size governing).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from service.sampling.attributes import (
    DEFAULT_MAX_SAMPLE_SIZE,
    Evaluation,
    SampleSizePlan,
    evaluate_sample,
    size_sample,
)
from service.sampling.distributions import Model, deviant_items, resolve_model
from service.sampling.errors import InvalidInput, NoFeasiblePlan, SamplingError
from service.sampling.rates import ceil_product, exact_rate

# Sample sizes checked at once when the common size is searched past the largest single size.
_CHUNK = 256


@dataclass(frozen=True)
class AttributeRates:
    """One attribute to plan for: its name and rates."""

    name: str
    tolerable_rate: float
    expected_rate: float = 0.0


@dataclass(frozen=True)
class AttributeFindings:
    """One attribute of a finished test: its name, deviations found and tolerable rate."""

    name: str
    deviations: int
    tolerable_rate: float
    expected_rate: float | None = None


@dataclass(frozen=True)
class AttributePlan:
    """One attribute at the common sample size."""

    name: str
    tolerable_rate: float
    expected_rate: float
    own_sample_size: int
    allowed_deviations: int
    achieved_confidence: float
    risk_of_overreliance: float
    risk_of_underreliance: float
    tolerable_deviant_items: int | None = None


@dataclass(frozen=True)
class SeveralAttributesPlan:
    """One sample for several attributes: the inputs, repeated, beside the answer."""

    method: str
    confidence: float
    population_size: int | None
    population_label: str | None
    sample_size: int
    governing_attribute: str
    attributes: tuple[AttributePlan, ...]
    warnings: tuple[str, ...]

    @property
    def whole_population(self) -> bool:
        return self.population_size is not None and self.sample_size == self.population_size


@dataclass(frozen=True)
class AttributeEvaluation:
    """One attribute's evaluation, with its name."""

    name: str
    evaluation: Evaluation


@dataclass(frozen=True)
class SeveralAttributesEvaluation:
    """The evaluation of one sample tested for several attributes."""

    method: str
    confidence: float
    population_size: int | None
    population_label: str | None
    sample_size: int
    attributes: tuple[AttributeEvaluation, ...]
    warnings: tuple[str, ...]

    @property
    def supports_reliance(self) -> bool:
        """True when every attribute's result supports reliance."""
        return all(item.evaluation.supports_reliance for item in self.attributes)

    @property
    def attributes_not_supporting(self) -> tuple[str, ...]:
        return tuple(item.name for item in self.attributes if not item.evaluation.supports_reliance)


def _check_names(names: Sequence[str]) -> None:
    if not names:
        raise InvalidInput("attributes", "attributes must list at least one attribute")
    seen: set[str] = set()
    for index, name in enumerate(names):
        if not name.strip():
            raise InvalidInput(f"attributes[{index}].name", "the name must not be blank")
        if name in seen:
            raise InvalidInput(
                f"attributes[{index}].name", f"the name {name!r} is given to two attributes"
            )
        seen.add(name)


def size_several(
    attributes: Sequence[AttributeRates],
    confidence: float = 0.95,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> SeveralAttributesPlan:
    """One sample size for several attributes, with each attribute's plan at that size.

    Parameters
    ----------
    attributes : sequence of AttributeRates
        At least one, with distinct names.
    confidence, population_size, method, max_sample_size
        As for :func:`service.sampling.attributes.size_sample`, shared by all attributes.

    Returns
    -------
    SeveralAttributesPlan

    Notes
    -----
    The smallest ``n`` at least the largest single-attribute size at which every
    attribute's sizing condition holds with ``k_i = ceil(e_i n)``; see the module
    docstring.

    Examples
    --------
    >>> plan = size_several([AttributeRates("approval", 0.05, 0.0),
    ...                      AttributeRates("amount", 0.05, 0.01)])
    >>> plan.sample_size, [a.allowed_deviations for a in plan.attributes]
    (93, [0, 1])
    """
    _check_names([a.name for a in attributes])
    model = resolve_model(method, population_size)
    singles: list[SampleSizePlan] = []
    for index, attribute in enumerate(attributes):
        try:
            singles.append(
                size_sample(
                    attribute.tolerable_rate,
                    attribute.expected_rate,
                    confidence,
                    population_size,
                    model.name,
                    max_sample_size=max_sample_size,
                )
            )
        except SamplingError as exc:
            shared = exc.field in {"confidence", "method"} or exc.field.startswith("population")
            field = exc.field if shared else f"attributes[{index}].{exc.field}"
            raise type(exc)(field, exc.message) from None
    largest = max(singles, key=lambda plan: plan.sample_size)
    max_n = max_sample_size
    if model.needs_population and population_size is not None:
        max_n = min(max_n, population_size)
    n = _common_size(model, attributes, confidence, population_size, largest.sample_size, max_n)

    plans = []
    for attribute, single in zip(attributes, singles, strict=True):
        tolerable, expected = (
            exact_rate(attribute.tolerable_rate),
            exact_rate(attribute.expected_rate),
        )
        k = ceil_product(expected, n)
        risk_over = float(model.lower_tail(k, n, tolerable, population_size))
        risk_under = (
            0.0 if expected == 0 else float(model.upper_tail(k, n, expected, population_size))
        )
        plans.append(
            AttributePlan(
                name=attribute.name,
                tolerable_rate=attribute.tolerable_rate,
                expected_rate=attribute.expected_rate,
                own_sample_size=single.sample_size,
                allowed_deviations=k,
                achieved_confidence=1.0 - risk_over,
                risk_of_overreliance=risk_over,
                risk_of_underreliance=risk_under,
                tolerable_deviant_items=(
                    None if population_size is None else deviant_items(tolerable, population_size)
                ),
            )
        )
    warnings = list(largest.warnings)
    if n > largest.sample_size:
        warnings.append(
            f"The largest single-attribute sample ({largest.sample_size:,} items) would allow "
            "another attribute one more deviation without reaching the confidence; the "
            f"common sample is {n:,} items, the smallest larger size at which every attribute "
            "reaches it."
        )
    if len(plans) > 1:
        warnings.append(
            "Each attribute's risk of overreliance is stated alone; the chance that at least "
            "one attribute wrongly supports reliance can be as large as their sum."
        )
    return SeveralAttributesPlan(
        method=model.name,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        sample_size=n,
        governing_attribute=attributes[singles.index(largest)].name,
        attributes=tuple(plans),
        warnings=tuple(warnings),
    )


def _common_size(
    model: Model,
    attributes: Sequence[AttributeRates],
    confidence: float,
    population_size: int | None,
    start: int,
    max_n: int,
) -> int:
    """Smallest n in [start, max_n] at which every attribute's condition holds."""
    alpha = 1.0 - confidence
    low = start
    while low <= max_n:
        ns = np.arange(low, min(low + _CHUNK, max_n + 1), dtype=np.int64)
        holds = np.ones(ns.shape, dtype=bool)
        for attribute in attributes:
            tolerable, expected = (
                exact_rate(attribute.tolerable_rate),
                exact_rate(attribute.expected_rate),
            )
            ks = np.array([ceil_product(expected, int(n)) for n in ns], dtype=np.int64)
            holds &= np.asarray(model.lower_tail(ks, ns, tolerable, population_size)) <= alpha
        hits = np.flatnonzero(holds)
        if hits.size:
            return int(ns[hits[0]])
        low += _CHUNK
    raise NoFeasiblePlan(
        "attributes",
        f"no sample of {start:,} to {max_n:,} items reaches confidence {confidence!r} for every "
        "attribute at once; plan the attributes on separate samples",
    )


def evaluate_several(
    sample_size: int,
    attributes: Sequence[AttributeFindings],
    confidence: float = 0.95,
    population_size: int | None = None,
    method: str | None = None,
    *,
    population_label: str | None = None,
) -> SeveralAttributesEvaluation:
    """Evaluate each attribute of one sample on its own.

    Examples
    --------
    >>> result = evaluate_several(100, [AttributeFindings("approval", 2, 0.07)])
    >>> round(result.attributes[0].evaluation.upper_deviation_limit, 4)
    0.0616
    """
    _check_names([a.name for a in attributes])
    results = []
    for index, attribute in enumerate(attributes):
        if attribute.deviations > sample_size:
            raise InvalidInput(
                f"attributes[{index}].deviations",
                f"deviations {attribute.deviations} must not exceed sample_size {sample_size}",
            )
        try:
            evaluation = evaluate_sample(
                sample_size,
                attribute.deviations,
                confidence,
                attribute.tolerable_rate,
                population_size,
                method,
                population_label=population_label,
                expected_rate=attribute.expected_rate,
            )
        except InvalidInput as exc:
            shared = {"sample_size", "confidence", "method"}
            field = exc.field
            if field not in shared and not field.startswith("population"):
                field = f"attributes[{index}].{field}"
            raise InvalidInput(field, exc.message) from None
        results.append(AttributeEvaluation(attribute.name, evaluation))
    first = results[0].evaluation
    warnings = list(dict.fromkeys(w for r in results for w in r.evaluation.warnings))
    return SeveralAttributesEvaluation(
        method=first.method,
        confidence=confidence,
        population_size=population_size,
        population_label=population_label,
        sample_size=sample_size,
        attributes=tuple(results),
        warnings=tuple(warnings),
    )
