"""Re-performable selection of currency units (monetary-unit sampling).

The population is a list of items, each with an identifier and a recorded amount in the
smallest currency unit. A selection is a pure function of the population, the sample size,
the seed, the method and :data:`ALGORITHM_ID`; the steps below are its specification.

1. *Excluded items.* Items with a zero or negative amount are not sampled by amount (they
   need a procedure of their own); they are counted and totalled apart.
2. *Canonical order.* The remaining items in ascending Unicode code point order of their
   identifiers. Unit u (0-based) of the ordered items belongs to the item whose cumulative
   amount first exceeds u.
3. *Individually significant items.* With n the sample size, B the total of the items
   still to sample and J = B / n, every item with amount >= J is taken in full: it is
   removed, n falls by the number removed and J is recomputed on the rest. The step is
   repeated until no remaining item reaches J (removing items of amount >= J never
   raises J, so the iteration ends, after at most as many rounds as there are items).
   When n reaches 0, the rest is not sampled and a warning says so.
4. *Stream.* The keyed HMAC-SHA256 counter stream and the uniform integers of
   :func:`service.sampling.selection.select` (Notes, steps 2 and 3), keyed by the seed.
5. *Units*, over the B units of the remaining items (B and n from step 3):

   - ``fixed_interval``: r = uniform(B); hit k (k = 0..n-1) is unit floor((r + k B) / n),
     that is a random start r/n in the first interval and then every J-th unit;
   - ``cell``: for each k = 0..n-1 in turn, u = uniform(B); hit k is unit
     floor((k B + u) / n), a uniform point of the k-th interval [kJ, (k+1)J);
   - ``random_units``: n values uniform(B), sorted ascending (with replacement).

6. *Population fingerprint*: SHA-256 of ``b"monetary-items" || 0x00 || u64(K) ||
   ASCII(scale) || 0x00`` followed by ``UTF-8(identifier) || 0x00 || ASCII(amount in
   units, as a signed decimal integer) || 0x00`` for every item given (including the
   excluded ones), in canonical order.
7. *Selection fingerprint*: SHA-256 of ``b"monetary-selection" || 0x00 ||
   ASCII(ALGORITHM_ID) || 0x00 || population fingerprint (32 raw bytes) || ASCII(method)
   || 0x00 || u64(n) || u64(byte length of UTF-8 seed) || UTF-8 seed``.

Units are reported 1-based: unit 1 is the first unit of the first sampled item.
"""

from __future__ import annotations

import hashlib
from bisect import bisect_right
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from fractions import Fraction
from itertools import accumulate, pairwise
from typing import Final

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.selection import (
    MAX_IDENTIFIER_LENGTH,
    check_seed,
    generate_seed,
    selection_fingerprint,
    uniform_below,
    word_stream,
)

ALGORITHM: Final = "sha256-counter-monetary-units"
ALGORITHM_VERSION: Final = 1
ALGORITHM_ID: Final = f"{ALGORITHM}/v{ALGORITHM_VERSION}"
"""Identifier reported with every monetary selection."""

METHODS: Final = ("fixed_interval", "cell", "random_units")
DEFAULT_MAX_ITEMS: Final = 1_000_000

EXCLUDED_WARNING: Final = (
    "{count} item(s) with a zero or negative amount (total {total}) are not part of the "
    "population sampled by amount; they need a procedure of their own."
)


@dataclass(frozen=True, slots=True)
class SelectedItem:
    """An item hit by the selection: its amount (units), the units that hit it (1-based)."""

    id: str
    amount: int
    units: tuple[int, ...]

    @property
    def hits(self) -> int:
        return len(self.units)


@dataclass(frozen=True, slots=True)
class MonetarySelection:
    """A monetary-unit selection and everything needed to re-perform it (amounts in units)."""

    items: tuple[SelectedItem, ...]
    individually_significant: tuple[tuple[str, int], ...]
    sample_size: int
    units_drawn: int
    population_items: int
    book_value: int
    sampled_value: int
    sampling_interval: Fraction
    excluded_count: int
    excluded_total: int
    seed: str
    method: str
    scale: int
    algorithm: str
    population_fingerprint: str
    selection_fingerprint: str
    warnings: tuple[str, ...]


_Draw = Callable[[Iterator[int], int, int], list[int]]


def _fixed_interval(words: Iterator[int], total: int, n: int) -> list[int]:
    r = uniform_below(words, total)
    return [(r + k * total) // n for k in range(n)]


def _cell(words: Iterator[int], total: int, n: int) -> list[int]:
    return [(k * total + uniform_below(words, total)) // n for k in range(n)]


def _random_units(words: Iterator[int], total: int, n: int) -> list[int]:
    return sorted(uniform_below(words, total) for _ in range(n))


_DRAWS: Final[Mapping[str, _Draw]] = {
    "fixed_interval": _fixed_interval,
    "cell": _cell,
    "random_units": _random_units,
}


def _canonical(items: tuple[tuple[str, int], ...], max_items: int) -> list[tuple[str, int]]:
    if not items:
        raise InvalidInput("population", "must list at least one item")
    if len(items) > max_items:
        raise ComputationTooLarge(
            "population", f"lists {len(items):,} items; the limit is {max_items:,}"
        )
    for index, (identifier, _) in enumerate(items):
        if not isinstance(identifier, str) or not identifier:
            raise InvalidInput(f"population[{index}].id", "must be a non-empty string")
        if len(identifier) > MAX_IDENTIFIER_LENGTH or "\x00" in identifier:
            raise InvalidInput(
                f"population[{index}].id",
                f"must be at most {MAX_IDENTIFIER_LENGTH} characters, without U+0000",
            )
    ordered = sorted(items, key=lambda item: item[0])
    for previous, current in pairwise(ordered):
        if previous[0] == current[0]:
            raise InvalidInput("population", f"identifier {current[0]!r} is listed more than once")
    return ordered


def population_fingerprint(ordered: list[tuple[str, int]], scale: int) -> bytes:
    """SHA-256 of the canonical encoding of the items (module Notes, step 6)."""
    digest = hashlib.sha256(b"monetary-items\x00" + len(ordered).to_bytes(8, "big"))
    digest.update(str(scale).encode("ascii") + b"\x00")
    for identifier, amount in ordered:
        try:
            digest.update(
                identifier.encode("utf-8") + b"\x00" + str(amount).encode("ascii") + b"\x00"
            )
        except UnicodeEncodeError:
            raise InvalidInput(
                "population", f"identifier {identifier!r} is not valid UTF-8"
            ) from None
    return digest.digest()


def _selection_fingerprint(population: bytes, key: bytes, method: str, n: int) -> str:
    """Hex SHA-256 binding everything the selection depends on (module Notes, step 7)."""
    return selection_fingerprint(b"monetary-selection", ALGORITHM_ID, population, key, method, n)


def split_significant(
    amounts: list[tuple[str, int]], sample_size: int
) -> tuple[list[tuple[str, int]], list[tuple[str, int]], int]:
    """Take items at or above the interval in full, iterating (module Notes, step 3).

    Returns the individually significant items, the rest and the sample size left for it.

    With 3 units over 100, J = 100/3 takes ``a``; then J = 50/2 = 25 takes ``b``; then
    J = 20/1 takes nothing.

    >>> split_significant([("a", 50), ("b", 30), ("c", 10), ("d", 10)], 3)
    ([('a', 50), ('b', 30)], [('c', 10), ('d', 10)], 1)
    """
    rest, significant, n = list(amounts), [], sample_size
    while n > 0 and rest:
        total = sum(amount for _, amount in rest)
        taken = [item for item in rest if item[1] * n >= total]
        if not taken:
            break
        significant += taken
        rest = [item for item in rest if item[1] * n < total]
        n -= len(taken)
        if n < 0:
            n = 0
    return significant, rest, n


def select_units(
    population: tuple[tuple[str, int], ...],
    sample_size: int,
    seed: str | None = None,
    method: str = "fixed_interval",
    *,
    scale: int = 2,
    max_items: int = DEFAULT_MAX_ITEMS,
) -> MonetarySelection:
    """Select currency units by amount, re-performably (module Notes).

    Parameters
    ----------
    population : tuple of (str, int)
        Identifier and amount in units of ``10**-scale``.
    sample_size : int
        Sampling units n (hits), including the individually significant items.

    Examples
    --------
    >>> chosen = select_units((("INV-1", 5_000), ("INV-2", 1_000), ("INV-3", 4_000)), 2,
    ...                       seed="example")
    >>> [(item.id, item.hits) for item in chosen.items], chosen.individually_significant
    ([('INV-3', 1)], (('INV-1', 5000),))
    """
    draw = _DRAWS.get(method) if isinstance(method, str) else None
    if draw is None:
        raise InvalidInput("method", f"must be one of {', '.join(METHODS)}, got {method!r}")
    if isinstance(sample_size, bool) or not isinstance(sample_size, int) or sample_size < 1:
        raise InvalidInput(
            "sample_size", f"must be a whole number of at least 1, got {sample_size!r}"
        )
    if sample_size > max_items:
        raise ComputationTooLarge("sample_size", f"must be at most {max_items:,}")
    seed = generate_seed() if seed is None else seed
    key = check_seed(seed)
    ordered = _canonical(population, max_items)
    fingerprint = population_fingerprint(ordered, scale)
    positive = [item for item in ordered if item[1] > 0]
    excluded = [amount for _, amount in ordered if amount <= 0]
    if not positive:
        raise InvalidInput("population", "has no item with an amount above 0")
    significant, rest, n = split_significant(positive, sample_size)
    warnings: list[str] = []
    if excluded:
        warnings.append(
            EXCLUDED_WARNING.format(count=len(excluded), total=_money(sum(excluded), scale))
        )
    total = sum(amount for _, amount in rest)
    selected: list[SelectedItem] = []
    if n > 0 and rest:
        hits = draw(word_stream(key), total, n)
        ends = list(accumulate(amount for _, amount in rest))
        by_item: dict[int, list[int]] = {}
        for unit in hits:
            by_item.setdefault(bisect_right(ends, unit), []).append(unit + 1)
        selected = [
            SelectedItem(rest[index][0], rest[index][1], tuple(units))
            for index, units in sorted(by_item.items())
        ]
    elif rest:
        warnings.append(
            f"The sample size is taken up by individually significant items; the other "
            f"{len(rest):,} item(s) (total {_money(total, scale)}) are not sampled."
        )
    if significant:
        warnings.append(
            f"{len(significant):,} item(s) at or above the sampling interval are individually "
            "significant: test them in full; their misstatements count with no sampling risk."
        )
    return MonetarySelection(
        items=tuple(selected),
        individually_significant=tuple(significant),
        sample_size=sample_size,
        units_drawn=n if rest else 0,
        population_items=len(ordered),
        book_value=sum(amount for _, amount in positive),
        sampled_value=total,
        sampling_interval=Fraction(total, n) if n > 0 and rest else Fraction(0),
        excluded_count=len(excluded),
        excluded_total=sum(excluded),
        seed=seed,
        method=method,
        scale=scale,
        algorithm=ALGORITHM_ID,
        population_fingerprint=fingerprint.hex(),
        selection_fingerprint=_selection_fingerprint(fingerprint, key, method, sample_size),
        warnings=tuple(warnings),
    )


def _money(units: int, scale: int) -> str:
    sign = "-" if units < 0 else ""
    whole, part = divmod(abs(units), 10**scale)
    return f"{sign}{whole:,}.{part:0{scale}d}" if scale else f"{sign}{whole:,}"
