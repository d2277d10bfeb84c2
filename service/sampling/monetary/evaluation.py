"""Evaluation of the misstatements found in a monetary-unit sample.

Definitions (amounts in smallest currency units):

- *Taint* of a misstated item: (book amount - audited amount) / book amount. A positive
  taint is an overstatement, a negative one an understatement; the two directions are
  evaluated separately, each with its own limits, on the magnitudes of their taints.
- *Projected misstatement* of a direction: J x the sum of its taints (an item hit h times
  counts h times), plus the misstatements of individually significant items, which are
  known in full and carry no sampling risk (they are added to every limit as they are).
- *Basic precision*: the limit with no misstatement, J x RF(0) for the factor-based
  methods; *incremental allowance*: the limit less the projected misstatement and the
  basic precision. The betting bound is not built from basic precision and increments, so
  for it the split is only a comparison (its basic precision is its limit with no
  misstatement, and its incremental allowance can be negative); so can that of the
  binomial-factor Stringer bound in very small samples, whose factor increments fall
  below 1.
- *Net most likely misstatement*: projected overstatement less projected understatement.
- *Taints above 100%* (an overstatement whose audited amount is negative, or an
  understatement more than the book amount): the Stringer and cell bounds use the taint
  at its value (it adds its taint times the incremental factor) but their conventional
  justification assumes taints up to 100%, and the betting bound, whose proof needs
  taints in [0, 1], is not computed; a warning says so.

Methods and where their guarantee holds (``GUARANTEES``):

- ``stringer`` and ``stringer_binomial``: Stringer bound with Poisson or binomial
  factors; no general proof, but regarded as conservative for any selection of units in
  audit practice and in published simulations; counted as holding for every method.
- ``cell``: cell evaluation, derived for cell selection; holds for ``cell`` only.
- ``betting``: proven for independent uniform draws of units (``random_units``);
  ``fixed_interval`` selection is treated as random, as is conventional, and said so.

``recommended``: the tightest limit among the methods whose guarantee holds for the
selection method and that apply to the taints found.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Final

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.monetary import bounds
from service.sampling.monetary.selection import METHODS as SELECTION_METHODS

GUARANTEES: Final[Mapping[str, tuple[str, ...]]] = {
    "stringer": SELECTION_METHODS,
    "stringer_binomial": SELECTION_METHODS,
    "cell": ("cell",),
    "betting": ("random_units", "fixed_interval"),
}
"""The selection methods for which each evaluation method's guarantee holds."""

GUARANTEE_TEXT: Final[Mapping[str, str]] = {
    "stringer": "conservative in audit practice and published simulations; no general proof",
    "stringer_binomial": "as stringer, with binomial factors for the sample size",
    "cell": "derived for cell selection",
    "betting": "proven for independent random selection of units and taints in [0, 1]; "
    "fixed-interval selection treated as random, as is conventional",
}

METHODS: Final = tuple(GUARANTEES)
DEFAULT_MAX_SAMPLE_SIZE: Final = 1_000_000
DIRECTIONS: Final = ("overstatement", "understatement")


@dataclass(frozen=True, slots=True)
class Misstatement:
    """A misstatement found: amounts in units; ``hits`` sampling units hit the item."""

    id: str
    book_amount: int
    audited_amount: int
    hits: int = 1
    individually_significant: bool = False


@dataclass(frozen=True, slots=True)
class MethodLimit:
    """One method's limit for one direction (amounts in units, exact fractions or None)."""

    method: str
    projected_misstatement: Fraction
    basic_precision: Fraction | None
    incremental_allowance: Fraction | None
    upper_misstatement_limit: Fraction | None
    guarantee_holds: bool
    guarantee: str
    conclusion: str | None


@dataclass(frozen=True, slots=True)
class DirectionResult:
    """Over- or understatement: the taints, the known misstatement and each method's limit."""

    direction: str
    misstatements: int
    taints: tuple[Fraction, ...]
    known_misstatement: Fraction
    projected_misstatement: Fraction
    methods: tuple[MethodLimit, ...]
    recommended: str
    recommended_limit: Fraction


@dataclass(frozen=True, slots=True)
class MonetaryEvaluation:
    """The evaluation of a monetary-unit sample (amounts in units of ``10**-scale``)."""

    book_value: int
    sample_size: int
    sampling_interval: Fraction
    selection_method: str
    confidence: float
    tolerable_misstatement: int | None
    scale: int
    overstatement: DirectionResult
    understatement: DirectionResult
    net_most_likely_misstatement: Fraction
    conclusion: str | None
    warnings: tuple[str, ...]


def resolve_sample_size(book_value: int, sample_size: int | None, interval: Fraction | None) -> int:
    """n from the sample size or the interval; both must agree within half a unit.

    >>> resolve_sample_size(250_000_000, None, Fraction(4_166_667))
    60
    """
    if sample_size is None:
        if interval is None:
            raise InvalidInput("sample_size", "give sample_size or sampling_interval")
        if interval <= 0:
            raise InvalidInput("sampling_interval", "must be above 0")
        sample_size = max(1, round(Fraction(book_value) / interval))
    if sample_size < 1:
        raise InvalidInput("sample_size", "must be at least 1")
    if interval is not None and abs(Fraction(book_value, sample_size) - interval) > Fraction(1, 2):
        raise InvalidInput(
            "sampling_interval",
            "is inconsistent with book_value / sample_size "
            f"({float(Fraction(book_value, sample_size)):.2f} in smallest currency units)",
        )
    return sample_size


_Bound = Callable[[Sequence[float], int, float], float]

_BOUNDS: Final[Mapping[str, _Bound]] = {
    "stringer": lambda taints, n, c: bounds.stringer(taints, c),
    "stringer_binomial": lambda taints, n, c: bounds.stringer(taints, c, n),
    "cell": lambda taints, n, c: bounds.cell(taints, c),
    "betting": lambda taints, n, c: bounds.betting(taints, n, c),
}


def _conclusion(limit: Fraction | None, tolerable: int | None) -> str | None:
    if limit is None or tolerable is None:
        return None
    return (
        "within tolerable misstatement" if limit <= tolerable else "exceeds tolerable misstatement"
    )


def _direction(
    name: str,
    found: list[tuple[Fraction, int]],
    known: Fraction,
    interval: Fraction,
    n: int,
    confidence: float,
    selection_method: str,
    tolerable: int | None,
) -> DirectionResult:
    taints = [taint for taint, hits in found for _ in range(hits)]
    as_floats = [float(t) for t in taints]
    projected = interval * sum(taints, Fraction(0)) + known
    over_one = any(t > 1 for t in taints)
    limits: list[MethodLimit] = []
    for method, bound in _BOUNDS.items():
        holds = selection_method in GUARANTEES[method] and not over_one
        if method == "betting" and over_one:
            limits.append(
                MethodLimit(
                    method,
                    projected,
                    None,
                    None,
                    None,
                    False,
                    "not computed: a taint above 100% is outside [0, 1]",
                    None,
                )
            )
            continue
        limit = interval * Fraction(bound(as_floats, n, confidence)) + known
        basic = interval * Fraction(bound([], n, confidence))
        limits.append(
            MethodLimit(
                method=method,
                projected_misstatement=projected,
                basic_precision=basic,
                incremental_allowance=limit - projected - basic,
                upper_misstatement_limit=limit,
                guarantee_holds=holds,
                guarantee=GUARANTEE_TEXT[method],
                conclusion=_conclusion(limit, tolerable),
            )
        )
    eligible = [m for m in limits if m.guarantee_holds and m.upper_misstatement_limit is not None]
    if not eligible:  # taints above 100%: no guarantee holds; the Stringer bound is reported
        eligible = [limits[0]]
    best = min(eligible, key=lambda m: m.upper_misstatement_limit or 0)
    return DirectionResult(
        direction=name,
        misstatements=len(found),
        taints=tuple(taints),
        known_misstatement=known,
        projected_misstatement=projected,
        methods=tuple(limits),
        recommended=best.method,
        recommended_limit=best.upper_misstatement_limit or Fraction(0),
    )


def evaluate_monetary_sample(
    book_value: int,
    misstatements: Sequence[Misstatement] = (),
    sample_size: int | None = None,
    sampling_interval: Fraction | None = None,
    selection_method: str = "fixed_interval",
    confidence: float = 0.95,
    tolerable_misstatement: int | None = None,
    *,
    scale: int = 2,
    max_sample_size: int = DEFAULT_MAX_SAMPLE_SIZE,
) -> MonetaryEvaluation:
    """Evaluate the misstatements of a monetary-unit sample (module Notes).

    ``book_value`` is the value sampled by units (individually significant items apart).

    Examples
    --------
    >>> result = evaluate_monetary_sample(
    ...     600_000_000, [Misstatement("A", 400_000, 200_000), Misstatement("B", 500_000, 400_000)],
    ...     sample_size=600)
    >>> float(result.overstatement.projected_misstatement) / 100
    7000.0
    """
    if book_value <= 0:
        raise InvalidInput("book_value", f"must be above 0, got {book_value}")
    if selection_method not in SELECTION_METHODS:
        raise InvalidInput("selection_method", f"must be one of {', '.join(SELECTION_METHODS)}")
    if not 0 < confidence < 1:
        raise InvalidInput("confidence", "must be strictly between 0 and 1")
    if tolerable_misstatement is not None and not 0 < tolerable_misstatement < book_value:
        raise InvalidInput("tolerable_misstatement", "must be above 0 and below book_value")
    n = resolve_sample_size(book_value, sample_size, sampling_interval)
    if n > max_sample_size:
        raise ComputationTooLarge(
            "sample_size", f"{n:,} sampling units; the limit is {max_sample_size:,}"
        )
    interval = Fraction(book_value, n)
    over: list[tuple[Fraction, int]] = []
    under: list[tuple[Fraction, int]] = []
    known = {"over": Fraction(0), "under": Fraction(0)}
    warnings: list[str] = []
    hits = 0
    seen: set[str] = set()
    for index, item in enumerate(misstatements):
        field = f"misstatements[{index}]"
        if item.id in seen:
            raise InvalidInput(f"{field}.id", f"{item.id!r} is listed more than once")
        seen.add(item.id)
        if item.book_amount <= 0:
            raise InvalidInput(
                f"{field}.book_amount",
                "must be above 0: items with a zero or negative book amount are not sampled "
                "by amount and have no taint",
            )
        if item.hits < 1:
            raise InvalidInput(f"{field}.hits", "must be at least 1")
        difference = item.book_amount - item.audited_amount
        if item.individually_significant:
            side = "over" if difference > 0 else "under"
            known[side] += abs(difference)
            continue
        hits += item.hits
        taint = Fraction(difference, item.book_amount)
        if taint > 0:
            over.append((taint, item.hits))
        elif taint < 0:
            under.append((-taint, item.hits))
    if hits > n:
        raise InvalidInput(
            "misstatements",
            f"the sampled misstatements account for {hits} sampling units, more than the "
            f"sample size {n}",
        )
    for name, found in (("overstatement", over), ("understatement", under)):
        if any(t > 1 for t, _ in found):
            warnings.append(
                f"A {name} taint above 100% was found: the Stringer and cell limits use it at "
                "its value, without the guarantee that assumes taints up to 100%; the betting "
                "limit is not computed. Consider the item on its own."
            )
    if under:
        warnings.append(
            "Monetary-unit sampling selects understated items with a lower probability than "
            "their audited amount warrants; treat understatement limits with care."
        )
    if selection_method == "fixed_interval":
        warnings.append(
            "Fixed-interval selection is treated as random selection of units, as is "
            "conventional; a pattern in the ledger that follows the interval would break this."
        )
    results = [
        _direction(
            name,
            found,
            known[side],
            interval,
            n,
            confidence,
            selection_method,
            tolerable_misstatement,
        )
        for name, found, side in (
            ("overstatement", over, "over"),
            ("understatement", under, "under"),
        )
    ]
    overall = None
    if tolerable_misstatement is not None:
        overall = _conclusion(results[0].recommended_limit, tolerable_misstatement)
    return MonetaryEvaluation(
        book_value=book_value,
        sample_size=n,
        sampling_interval=interval,
        selection_method=selection_method,
        confidence=confidence,
        tolerable_misstatement=tolerable_misstatement,
        scale=scale,
        overstatement=results[0],
        understatement=results[1],
        net_most_likely_misstatement=results[0].projected_misstatement
        - results[1].projected_misstatement,
        conclusion=overall,
        warnings=tuple(warnings),
    )
