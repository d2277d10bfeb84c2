"""The operating characteristic of a test-of-controls plan.

Definition
----------
A plan tests ``n`` items and supports reliance on the control when the sample shows at
most ``k`` deviations. Its *operating characteristic* is the function

    OC(p) = P(X ≤ k)  when the true deviation rate is p,

with ``X`` following the plan's model (:mod:`service.sampling.distributions`):

- binomial: ``X ~ Binomial(n, p)``;
- hypergeometric: ``X ~ Hypergeometric(N, M, n)`` with ``M = ceil(p × N)`` deviant items
  in a population of ``N``, drawn without replacement;
- Poisson: ``X ~ Poisson(n × p)``.

``OC(0) = 1`` and ``OC`` does not rise as ``p`` rises. Two values of it are the sampling
risks of the plan:

- at the tolerable deviation rate ``t``, ``OC(t)`` is the *risk of overreliance*, the
  probability that the sample supports reliance although the rate is as high as ``t``;
- at the expected population deviation rate ``e``, ``1 − OC(e) = P(X > k)`` is the *risk of
  underreliance*, the probability that the sample does not support reliance although the
  rate is only ``e``. It is computed as the upper tail, not by subtraction, so that small
  risks keep their precision.

Both use the model's own tails on the exact decimal of the rate
(:func:`service.sampling.rates.exact_rate`), the computation
:func:`service.sampling.attributes.size_sample` uses, so the curve of a plan from
``size_sample`` reports that plan's risks to the last digit.

Grid
----
The curve is evaluated at ``points`` evenly spaced rates from 0 to an upper rate
``p_max``. ``p_max`` is the smallest decimal with two significant figures that is at least

- a rate at which ``OC`` is at most 0.001: the Clopper–Pearson rate at which the binomial
  ``P(X ≤ k)`` equals 0.001, ``B⁻¹(0.999; k + 1, n − k)``, for the binomial and
  hypergeometric models, and the Garwood rate ``Γ⁻¹(k + 1, 0.999) / n`` for the Poisson
  model; the rate is checked against the model and raised by a quarter until the model
  agrees; and
- 1.25 times the larger of the tolerable and expected rates, when either is given,

and at most 1. Each grid rate is reported as a float, and its probability is computed
from the exact decimal of that float, so that a client repeating the computation at a
reported rate gets the reported probability.

Under the hypergeometric model the deviant count ``ceil(p × N)`` is a whole number, so
``OC`` is a staircase: it changes only where ``p × N`` passes a whole number. The grid
samples the staircase; a grid coarser than ``1 / N`` can step over some of its treads.

References
----------
AICPA, *Audit Guide: Audit Sampling* (2019), chapter 3, on the risk of overreliance and
the risk of underreliance in tests of controls.
Dodge, H. F. & Romig, H. G. (1959). *Sampling Inspection Tables*, 2nd ed. Wiley: the
operating characteristic of a single sampling plan for attributes.
Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial limits
illustrated in the case of the binomial. *Biometrika* 26(4), 404–413.
Garwood, F. (1936). Fiducial limits for the Poisson distribution. *Biometrika* 28(3/4),
437–442.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

from scipy import special, stats

from service.sampling.distributions import Model, resolve_model
from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.rates import exact_rate
from service.sampling.wording import CAUTION, percent

__all__ = [
    "DEFAULT_POINTS",
    "FLOOR_PROBABILITY",
    "HYPERGEOMETRIC_WORK_LIMIT",
    "MAX_POINTS",
    "MIN_POINTS",
    "CurvePoint",
    "OperatingCharacteristic",
    "curve_summary",
    "operating_characteristic",
]

#: Grid points when the request does not say.
DEFAULT_POINTS = 101
#: Fewest and most grid points accepted; a finer grid than 2,001 points adds nothing a
#: reader or a chart can see.
MIN_POINTS = 2
MAX_POINTS = 2001
#: The grid runs at least to a rate where the probability of supporting reliance is at
#: most this.
FLOOR_PROBABILITY = 0.001
#: Computation limit for the hypergeometric model, in grid points × population items:
#: the model's hypergeometric tail costs time roughly in proportion to the population
#: size (a few milliseconds per 10^9 items), so the product bounds the time of a curve to
#: about a second.
HYPERGEOMETRIC_WORK_LIMIT = 210_000_000_000
#: Default largest sample, as for sizing.
DEFAULT_MAX_SAMPLE_SIZE = 10_000_000

# Margin beyond the largest marked rate, and the step by which a starting upper rate is
# raised until the model falls to FLOOR_PROBABILITY.
_BEYOND_MARKS = Fraction(5, 4)
_RAISE_STEP = Fraction(5, 4)
# Relative slack when checking a closed-form rate against the model (the closed forms
# are accurate to a few units in the last place).
_CHECK_SLACK = 1e-9
# Sampling fraction above which the with-replacement models lose materially against the
# hypergeometric one (common practice threshold, not a standard).
_LARGE_SAMPLING_FRACTION = Fraction(1, 10)


@dataclass(frozen=True)
class CurvePoint:
    """One point of the curve.

    Attributes
    ----------
    rate : float
        True deviation rate ``p``.
    probability : float
        ``P(X ≤ k)`` at ``p``: the probability that the sample supports reliance.
    """

    rate: float
    probability: float


@dataclass(frozen=True)
class OperatingCharacteristic:
    """The operating characteristic of a plan: the inputs, repeated, beside the curve.

    Attributes
    ----------
    method : str
        Model used (``binomial``, ``hypergeometric`` or ``poisson``).
    sample_size, allowed_deviations : int
        The plan: ``n`` items, reliance with at most ``k`` deviations.
    population_size : int or None
        ``N``, when given.
    population_label : str or None
        Free text naming the population.
    tolerable_rate, expected_rate : float or None
        The rates given, if any.
    points : tuple of CurvePoint
        The curve on the grid, in order of rate, from rate 0.
    risk_of_overreliance : float or None
        ``P(X ≤ k)`` at the tolerable rate, when it is given.
    risk_of_underreliance : float or None
        ``P(X > k)`` at the expected rate, when it is given.
    warnings : tuple of str
        Plain-words cautions about the plan and the model.
    """

    method: str
    sample_size: int
    allowed_deviations: int
    population_size: int | None
    population_label: str | None
    tolerable_rate: float | None
    expected_rate: float | None
    points: tuple[CurvePoint, ...]
    risk_of_overreliance: float | None
    risk_of_underreliance: float | None
    warnings: tuple[str, ...]


# --- validation -------------------------------------------------------------


def _whole(value: object, field: str, low: int, high: int | None = None) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise InvalidInput(field, f"{field} must be a whole number; got {value!r}")
    if value < low or (high is not None and value > high):
        bound = f"at least {low:,}" if high is None else f"from {low:,} to {high:,}"
        raise InvalidInput(field, f"{field} must be {bound}; got {value:,}")
    return value


def _rate(value: object, field: str, *, allow_zero: bool) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InvalidInput(field, f"{field} must be a number; got {value!r}")
    number = float(value)
    low_ok = number >= 0.0 if allow_zero else number > 0.0
    if not (math.isfinite(number) and low_ok and number < 1.0):
        bounds = "from 0 up to (not including) 1" if allow_zero else "strictly between 0 and 1"
        raise InvalidInput(field, f"{field} must be a fraction {bounds}; got {value!r}")
    return number


# --- the curve --------------------------------------------------------------


def _probability(model: Model, k: int, n: int, rate: Fraction, size: int | None) -> float:
    value = float(model.lower_tail(k, n, rate, size))
    if not math.isfinite(value):
        raise ComputationTooLarge(
            "sample_size",
            f"the {model.name} probability of at most {k:,} deviations in {n:,} items could "
            "not be computed in double precision",
        )
    return min(1.0, max(0.0, value))


def _starting_upper_rate(model: Model, k: int, n: int) -> float:
    """A rate near the one where the model's ``P(X ≤ k)`` falls to FLOOR_PROBABILITY."""
    if k >= n:
        return 1.0
    level = 1.0 - FLOOR_PROBABILITY
    if model.name == "poisson":
        return min(1.0, float(special.gammaincinv(k + 1, level)) / n)
    return float(stats.beta.ppf(level, k + 1, n - k))


def _round_up(rate: Fraction) -> Fraction:
    """The smallest decimal with two significant figures at least ``rate`` (capped at 1)."""
    if rate >= 1:
        return Fraction(1)
    if rate <= 0:
        return Fraction(1, 100)
    unit = Fraction(10) ** (math.floor(math.log10(rate)) - 1)
    while rate / unit >= 100:
        unit *= 10
    while rate / unit < 10:
        unit /= 10
    return min(Fraction(1), math.ceil(rate / unit) * unit)


def _upper_rate(
    model: Model, k: int, n: int, size: int | None, marks: list[float]
) -> Fraction:
    upper = Fraction(_starting_upper_rate(model, k, n))
    while upper < 1 and _probability(model, k, n, upper, size) > FLOOR_PROBABILITY * (
        1.0 + _CHECK_SLACK
    ):
        upper = min(Fraction(1), upper * _RAISE_STEP)
    for mark in marks:
        upper = max(upper, exact_rate(mark) * _BEYOND_MARKS)
    return _round_up(upper)


def _warnings(model: Model, n: int, size: int | None) -> tuple[str, ...]:
    warnings: list[str] = []
    if size is None or model.needs_population:
        return ()
    if n > size:
        warnings.append(
            f"The sample of {n:,} exceeds the population of {size:,} items; the "
            f"{model.name} model treats the items as drawn with replacement."
        )
    elif Fraction(n, size) > _LARGE_SAMPLING_FRACTION:
        warnings.append(
            "The sample is more than 10% of the population; the hypergeometric method "
            "describes a sample drawn without replacement more closely (common practice "
            "threshold)."
        )
    return tuple(warnings)


def operating_characteristic(
    sample_size: int,
    allowed_deviations: int,
    population_size: int | None = None,
    method: str | None = None,
    tolerable_rate: float | None = None,
    expected_rate: float | None = None,
    points: int = DEFAULT_POINTS,
    *,
    population_label: str | None = None,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> OperatingCharacteristic:
    """The operating characteristic of a plan, with its risks at the rates given.

    Parameters
    ----------
    sample_size : int
        Items tested, ``n ≥ 1``, at most ``max_sample_size``; under the hypergeometric
        model at most ``N``.
    allowed_deviations : int
        Most deviations that still support reliance, ``0 ≤ k ≤ n``.
    population_size : int, optional
        ``N``; needed by the hypergeometric model.
    method : {"binomial", "hypergeometric", "poisson"}, optional
        Defaults to hypergeometric when ``N`` is given, else binomial, as for sizing.
    tolerable_rate : float, optional
        Tolerable deviation rate, in (0, 1); gives the risk of overreliance.
    expected_rate : float, optional
        Expected population deviation rate, in [0, 1) and below the tolerable rate when
        both are given; gives the risk of underreliance.
    points : int
        Grid points, from MIN_POINTS to MAX_POINTS.
    population_label : str, optional
        Repeated in the result.
    max_sample_size : int
        Largest sample accepted.

    Returns
    -------
    OperatingCharacteristic

    Raises
    ------
    InvalidInput
        Naming the field, for an input outside its domain.
    ComputationTooLarge
        When a hypergeometric curve would be above HYPERGEOMETRIC_WORK_LIMIT.

    Notes
    -----
    ``OC(p) = P(X ≤ k)`` at the true deviation rate ``p`` under the plan's model; see
    the module docstring for the grid and the hypergeometric staircase.

    References
    ----------
    Dodge & Romig (1959), *Sampling Inspection Tables*; AICPA, *Audit Guide: Audit
    Sampling* (2019), chapter 3.

    Examples
    --------
    >>> curve = operating_characteristic(93, 1, tolerable_rate=0.05, expected_rate=0.01)
    >>> curve.points[0], len(curve.points), curve.points[-1].rate
    (CurvePoint(rate=0.0, probability=1.0), 101, 0.096)
    >>> round(curve.risk_of_overreliance, 4), round(curve.risk_of_underreliance, 4)
    (0.05, 0.2384)
    """
    n = _whole(sample_size, "sample_size", 1, max_sample_size)
    k = _whole(allowed_deviations, "allowed_deviations", 0)
    if k > n:
        raise InvalidInput(
            "allowed_deviations",
            f"allowed_deviations {k:,} must not exceed sample_size {n:,}",
        )
    size = None if population_size is None else _whole(population_size, "population.size", 1)
    model = resolve_model(method, size)
    if model.needs_population and size is not None and n > size:
        raise InvalidInput(
            "sample_size",
            f"sample_size {n:,} must not exceed population.size {size:,} under the "
            f"{model.name} method, which draws without replacement",
        )
    tolerable = None if tolerable_rate is None else _rate(
        tolerable_rate, "tolerable_rate", allow_zero=False
    )
    expected = None if expected_rate is None else _rate(
        expected_rate, "expected_rate", allow_zero=True
    )
    if tolerable is not None and expected is not None and expected >= tolerable:
        raise InvalidInput(
            "expected_rate",
            f"expected_rate {expected!r} must be below tolerable_rate {tolerable!r}",
        )
    count = _whole(points, "points", MIN_POINTS, MAX_POINTS)
    if model.needs_population and size is not None and count * size > HYPERGEOMETRIC_WORK_LIMIT:
        most = HYPERGEOMETRIC_WORK_LIMIT // size
        advice = (
            f"ask for at most {most:,} points, or use"
            if most >= MIN_POINTS
            else "use"
        )
        raise ComputationTooLarge(
            "points" if most >= MIN_POINTS else "population.size",
            f"a hypergeometric curve of {count:,} points for a population of {size:,} items "
            f"is above this service's computation limit of "
            f"{HYPERGEOMETRIC_WORK_LIMIT:,} points × items; {advice} method binomial, "
            "which differs little from the hypergeometric one when the sample is a small "
            "part of the population",
        )

    marks = [rate for rate in (tolerable, expected) if rate is not None]
    upper = _upper_rate(model, k, n, size, marks)
    curve = []
    for index in range(count):
        rate = float(upper * index / (count - 1))
        curve.append(CurvePoint(rate, _probability(model, k, n, exact_rate(rate), size)))

    risk_over = (
        None
        if tolerable is None
        else float(model.lower_tail(k, n, exact_rate(tolerable), size))
    )
    risk_under = (
        None
        if expected is None
        else float(model.upper_tail(k, n, exact_rate(expected), size))
    )
    return OperatingCharacteristic(
        method=model.name,
        sample_size=n,
        allowed_deviations=k,
        population_size=size,
        population_label=population_label,
        tolerable_rate=tolerable,
        expected_rate=expected,
        points=tuple(curve),
        risk_of_overreliance=risk_over,
        risk_of_underreliance=risk_under,
        warnings=_warnings(model, n, size),
    )


# --- wording ----------------------------------------------------------------


def _deviations(count: int) -> str:
    return f"{count:,} deviation" + ("" if count == 1 else "s")


def curve_summary(curve: OperatingCharacteristic) -> str:
    """One paragraph describing the curve and the risks it shows."""
    if curve.population_size is None:
        population = "a large population"
    else:
        population = f"a population of {curve.population_size:,} items"
        if curve.population_label:
            population += f" ({curve.population_label})"
    allowance = (
        "no deviation" if curve.allowed_deviations == 0
        else f"at most {_deviations(curve.allowed_deviations)}"
    )
    last = curve.points[-1]
    text = (
        f"A sample of {curve.sample_size:,} items from {population} supports reliance when "
        f"it shows {allowance} ({curve.method} model). The probability that it does is 100% "
        f"when the true deviation rate is 0 and {percent(last.probability)} at a rate of "
        f"{percent(last.rate)}, the end of the {len(curve.points):,}-point grid."
    )
    if curve.tolerable_rate is not None and curve.risk_of_overreliance is not None:
        text += (
            f" At the tolerable rate of {percent(curve.tolerable_rate)} it is "
            f"{percent(curve.risk_of_overreliance)} (risk of overreliance)."
        )
    if curve.expected_rate is not None and curve.risk_of_underreliance is not None:
        text += (
            f" At the expected rate of {percent(curve.expected_rate)} the chance of finding "
            f"more than {_deviations(curve.allowed_deviations)} is "
            f"{percent(curve.risk_of_underreliance)} (risk of underreliance)."
        )
    if curve.method == "hypergeometric":
        text += (
            " The population holds a whole number of deviant items, ceil(rate × "
            f"{curve.population_size:,}), so the curve is a staircase that changes only "
            "where that number changes."
        )
    return f"{text} {CAUTION}"
