"""The cost model: each operation's work, estimated from its validated inputs.

A cost unit is about one microsecond of one core's time on the reference machine (a
2-core x86-64 virtual machine), measured by timing each operation at the corners of its
inputs: an estimate is an envelope of those timings rather than a prediction, so it errs
high. Before the core is called, :func:`check` refuses a request whose estimate is above
``Settings.max_request_cost`` (default 2,000,000, about two seconds) with a 422 naming
the inputs that make it large; a batch is refused when the sum over its operations is.

Each estimator returns a :class:`Cost`: the units and the input fields that drive them
(the fields the refusal names). The drivers of each operation:

=============================== ============================================================
operation                       cost grows with
=============================== ============================================================
sample-size, plan-periodic      the approximate sample size (normal approximation from the
                                rates and confidence), per attribute, ten times more without
                                replacement, and more with an underreliance risk
evaluation, plan-curve          the curve's points, and the allowed deviations when
                                sampling without replacement
estimation-sample-size          for ``exact``: the normal-approximation size (sizes searched
                                times the rate grid), sixty times more per size without
                                replacement (hypergeometric tails)
staged-plan                     the fixed plan's approximate size, ten times more without
                                replacement
staged-evaluation, staged-curve points × the deviation counts the stages name
strata-evaluation               the number of strata
sequence-evaluation             the number of results, more without replacement
selection                       sample_size, listed items, ranges
monetary-*                      the listed population items or misstatements
files                           the file's bytes (bounded by the file limits instead)
=============================== ============================================================
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from statistics import NormalDist
from typing import Any

from service.web.problems import Problem, invalid_input

#: Every operation: parsing, validation, dumping and the log line.
BASE = 2_000
#: Approximate sizes beyond this are refused by the core's own caps before any search.
SIZE_CEILING = 1_000_000
TOO_MUCH_WORK = "/problems/too-much-work"


@dataclass(frozen=True)
class Cost:
    """Estimated cost units, and the input fields that drive them."""

    units: int
    drivers: tuple[str, ...] = ()

    def __add__(self, other: Cost) -> Cost:
        return Cost(self.units + other.units, tuple(dict.fromkeys(self.drivers + other.drivers)))


def _get(source: Any, name: str) -> Any:
    """Field ``name`` of a loaded input, whether a mapping or an object made by the schema."""
    if isinstance(source, Mapping):
        return source.get(name)
    return getattr(source, name, None)


def _float(value: Any, default: float) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return default
    return number if math.isfinite(number) else default


def _population_size(inputs: Mapping[str, Any]) -> int | None:
    population = _get(inputs, "population_size") or _get(inputs, "population")
    if population is not None and not isinstance(population, int):
        population = _get(population, "size")
    if isinstance(population, int) and not isinstance(population, bool):
        return population
    return None


def _z(risk: float) -> float:
    """The one-sided standard normal quantile for ``risk`` (clipped to a sane range)."""
    return NormalDist().inv_cdf(1 - min(max(risk, 1e-12), 0.5))


def _attribute_size(tolerable: float, expected: float, confidence: float) -> float:
    """The approximate sample size of a test of controls: ``ln(1/α)/TR`` plus the normal
    term ``z² p(1−p)/(TR − p)²`` for an expected rate ``p``."""
    risk = 1 - confidence
    if tolerable <= 0:
        return 0.0
    size = math.log(1 / max(risk, 1e-12)) / tolerable
    if 0 < expected < tolerable:
        size += _z(risk) ** 2 * expected * (1 - expected) / (tolerable - expected) ** 2
    return size


def _finite(size: float, population: int | None) -> float:
    """``size`` corrected for a finite population (``n / (1 + n/N)``)."""
    return size if population is None else size / (1 + size / population)


def sample_size(inputs: Mapping[str, Any]) -> Cost:
    """The sizing search is fast with replacement (a tenth of a unit per item of the
    approximate size) and about one unit per item without; the core refuses plans beyond
    its sample-size cap at once, so sizes are counted up to :data:`SIZE_CEILING`."""
    confidence = _float(_get(inputs, "confidence"), 0.95)
    attributes = _get(inputs, "attributes") or [inputs]
    total = 0.0
    for attribute in attributes:
        total += min(SIZE_CEILING, _attribute_size(
            _float(_get(attribute, "tolerable_rate"), 0.05),
            _float(_get(attribute, "expected_rate"), 0.0),
            confidence,
        ))
    per_item = 1.0 if _get(inputs, "method") == "hypergeometric" else 0.1
    if _get(inputs, "underreliance_risk") is not None:
        # Two risks: a search over sizes and allowed deviations, about two units an item.
        per_item = max(3 * per_item, 2.0)
    drivers: tuple[str, ...] = ("tolerable_rate", "expected_rate", "confidence", "method")
    if _get(inputs, "attributes"):
        drivers = ("attributes", "confidence", "method")
    return Cost(BASE + int(per_item * total) + 100 * len(attributes), drivers)


def periodic(inputs: Mapping[str, Any]) -> Cost:
    """Sized without replacement from the occurrences: as :func:`sample_size`."""
    size = min(SIZE_CEILING, _attribute_size(
        _float(_get(inputs, "tolerable_rate"), 0.05),
        _float(_get(inputs, "expected_rate"), 0.0),
        _float(_get(inputs, "confidence"), 0.95),
    ))
    return Cost(BASE + int(size), ("tolerable_rate", "expected_rate", "confidence"))


def evaluation(inputs: Mapping[str, Any]) -> Cost:
    return Cost(30_000 + 1_000 * len(_get(inputs, "attributes") or ()), ("attributes",))


def curve(inputs: Mapping[str, Any]) -> Cost:
    points = int(_float(_get(inputs, "points"), 101))
    per_point = 40.0
    if _get(inputs, "method") == "hypergeometric":
        per_point += 0.01 * int(_float(_get(inputs, "allowed_deviations"), 0))
    return Cost(BASE + int(points * per_point), ("points", "allowed_deviations"))


def estimation(inputs: Mapping[str, Any]) -> Cost:
    """Only ``exact`` searches; the other methods are closed forms or short bisections."""
    methods = _get(inputs, "methods")
    units = BASE + 1_000 * len(methods or ("all",) * 5)
    if methods is None or "exact" in methods:
        margin = _float(_get(inputs, "margin"), 0.05)
        rate = _get(inputs, "anticipated_rate")
        p = 0.5 if rate is None else min(max(_float(rate, 0.5), 0.0), 1.0)
        two_sided = (1 - _float(_get(inputs, "confidence"), 0.95)) / 2
        normal = _z(two_sided) ** 2 * max(p * (1 - p), 0.01) / max(margin, 1e-9) ** 2
        population = _population_size(inputs)
        per_size = 5.0 if population is None else 60.0
        units += int(per_size * _finite(normal, population))
    drivers = ["margin", "confidence"]
    if _get(inputs, "anticipated_rate") is not None:
        drivers.append("anticipated_rate")
    if _population_size(inputs) is not None:
        drivers.append("population.size")
    return Cost(units, tuple(drivers))


def staged_plan(inputs: Mapping[str, Any]) -> Cost:
    size = _attribute_size(
        _float(_get(inputs, "tolerable_rate"), 0.05),
        _float(_get(inputs, "expected_rate"), 0.0),
        _float(_get(inputs, "confidence"), 0.95),
    )
    factor = 5_000 if _get(inputs, "method") == "hypergeometric" else 500
    return Cost(
        BASE + int(factor * size),
        ("tolerable_rate", "expected_rate", "confidence", "method"),
    )


def _stage_counts(inputs: Mapping[str, Any]) -> int:
    stages = _get(inputs, "stages") or ()
    return sum(int(_float(_get(stage, "fail_if_at_least"), 0)) + 1 for stage in stages)


def staged_evaluation(inputs: Mapping[str, Any]) -> Cost:
    per = 60 if _get(inputs, "method") == "hypergeometric" else 3
    return Cost(BASE + 10 * per * _stage_counts(inputs), ("stages",))


def staged_curve(inputs: Mapping[str, Any]) -> Cost:
    per = 60 if _get(inputs, "method") == "hypergeometric" else 3
    points = int(_float(_get(inputs, "points"), 101))
    return Cost(BASE + per * points * _stage_counts(inputs), ("points", "stages", "method"))


def strata(inputs: Mapping[str, Any]) -> Cost:
    return Cost(BASE + 12_000 * len(_get(inputs, "strata") or ()), ("strata",))


def sequence(inputs: Mapping[str, Any]) -> Cost:
    per = 150 if _population_size(inputs) is not None else 50
    return Cost(BASE + per * len(_get(inputs, "results") or ()), ("results",))


def selection(inputs: Mapping[str, Any]) -> Cost:
    population = _get(inputs, "population") or {}
    listed = len(_get(population, "items") or ())
    ranges = len(_get(population, "ranges") or ())
    size = int(_float(_get(inputs, "sample_size"), 0))
    drivers = ["sample_size"]
    if listed:
        drivers.append("population.items")
    if ranges:
        drivers.append("population.ranges")
    return Cost(BASE + 3 * size + listed + 10 * ranges, tuple(drivers))


def monetary_size(inputs: Mapping[str, Any]) -> Cost:
    return Cost(20_000, ("tolerable_misstatement",))


def monetary_selection(inputs: Mapping[str, Any]) -> Cost:
    listed = len(_get(inputs, "population") or ())
    return Cost(BASE + 10 * listed, ("population",))


def monetary_evaluation(inputs: Mapping[str, Any]) -> Cost:
    return Cost(BASE + 25 * len(_get(inputs, "misstatements") or ()), ("misstatements",))


def upload(inputs: Mapping[str, Any]) -> Cost:
    """A population file: about one unit per 20 bytes read (bounded by the file limits)."""
    path = _get(inputs, "upload")
    size = path.stat().st_size if path is not None else 0
    return Cost(BASE + size // 20, ("file",))


ESTIMATORS: dict[str, Callable[[Mapping[str, Any]], Cost]] = {
    "sample-size": sample_size,
    "evaluation": evaluation,
    "evaluation-of-test-sheet": upload,
    "estimation-sample-size": estimation,
    "plan-curve": curve,
    "plan-periodic": periodic,
    "staged-plan": staged_plan,
    "staged-evaluation": staged_evaluation,
    "staged-curve": staged_curve,
    "strata-evaluation": strata,
    "sequence-evaluation": sequence,
    "selection": selection,
    "population-profile": upload,
    "population-stratified-selection": upload,
    "monetary-sample-size": monetary_size,
    "monetary-selection": monetary_selection,
    "monetary-evaluation": monetary_evaluation,
    # The batch sums its operations' costs itself, before answering any of them.
    "batch": lambda inputs: Cost(BASE),
}


def estimate(name: str, inputs: Mapping[str, Any]) -> Cost:
    """The cost of operation ``name`` on its validated ``inputs`` (:data:`BASE` for an
    operation without an estimator: every operation of the service has one, which a test
    checks)."""
    estimator = ESTIMATORS.get(name)
    return Cost(BASE) if estimator is None else estimator(inputs)


def too_large(cost: Cost, budget: int, what: str = "the request") -> Problem:
    """The 422 refusing ``cost`` above ``budget``: the detail gives the figures, and
    ``errors`` names each field that drives the cost."""
    fields = cost.drivers or ("body",)
    detail = (
        f"{what} would cost an estimated {cost.units:,} units (about a microsecond each), "
        f"above the budget of {budget:,}; the cost grows with {', '.join(fields)}: ask for "
        "less work, or split it across requests"
    )
    message = f"drives the estimated cost, {cost.units:,} units, above the budget of {budget:,}"
    problem = invalid_input({field: [message] for field in fields})
    problem.title, problem.type, problem.detail = "Too much work", TOO_MUCH_WORK, detail
    return problem


def check(cost: Cost, budget: int, what: str = "the request") -> None:
    if cost.units > budget:
        raise too_large(cost, budget, what)
