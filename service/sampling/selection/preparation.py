"""Each population put in its canonical order, with its size, its fingerprint and a way
to read the item at a position."""

from __future__ import annotations

import hashlib
from bisect import bisect_right
from collections.abc import Callable
from dataclasses import dataclass
from itertools import pairwise

import numpy as np

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.selection.checks import _check_number, _some
from service.sampling.selection.limits import MAX_IDENTIFIER_LENGTH, MAX_NUMBER
from service.sampling.selection.order import (
    _code_point_order,
    _items_fingerprint,
    _Listing,
    _raise_bad_identifier,
)
from service.sampling.selection.populations import (
    ItemPopulation,
    NumberedPopulation,
    Population,
    RangePopulation,
)


@dataclass(frozen=True, slots=True)
class _Prepared:
    """A validated population: its size, fingerprint and a map from positions to items."""

    size: int
    fingerprint: bytes
    items_at: Callable[[list[int]], tuple[int, ...] | tuple[str, ...]]


def _prepare(population: Population, max_items: int) -> _Prepared:
    match population:
        case NumberedPopulation():
            return _prepare_numbered(population)
        case RangePopulation():
            return _prepare_ranges(population, max_items)
        case ItemPopulation():
            return _prepare_items(population, max_items)
    raise TypeError(
        "population must be a NumberedPopulation, RangePopulation or ItemPopulation, "
        f"got {type(population).__name__}"
    )


def _prepare_numbered(population: NumberedPopulation) -> _Prepared:
    size = population.size
    if not isinstance(size, int) or isinstance(size, bool):
        raise InvalidInput("population.size", f"size must be an integer, got {type(size).__name__}")
    if not 1 <= size <= MAX_NUMBER:
        raise InvalidInput("population.size", f"size {size} is outside 1..{MAX_NUMBER}")
    digest = hashlib.sha256(b"numbered\x00" + size.to_bytes(8, "big")).digest()

    def items_at(positions: list[int]) -> tuple[int, ...]:
        return tuple(p + 1 for p in positions)

    return _Prepared(size, digest, items_at)


def _prepare_ranges(population: RangePopulation, max_items: int) -> _Prepared:
    ranges, exclude = population.ranges, population.exclude
    if not isinstance(ranges, tuple) or not ranges:
        raise InvalidInput("population.ranges", "at least one range (first, last) is required")
    if not isinstance(exclude, tuple):
        raise InvalidInput("population.exclude", "exclude must be a list of numbers")
    if len(ranges) + len(exclude) > max_items:
        raise ComputationTooLarge(
            "population.ranges",
            f"{len(ranges)} ranges and {len(exclude)} excluded numbers exceed the limit of "
            f"{max_items} listed values",
        )

    spans: list[tuple[int, int, int]] = []  # (first, last, index in the request)
    for index, entry in enumerate(ranges):
        field = f"population.ranges[{index}]"
        if not isinstance(entry, tuple) or len(entry) != 2:
            raise InvalidInput(field, "each range must be a pair (first, last)")
        first = _check_number(entry[0], f"{field}.first", "first")
        last = _check_number(entry[1], f"{field}.last", "last")
        if first > last:
            raise InvalidInput(f"{field}.first", f"first {first} is greater than last {last}")
        spans.append((first, last, index))
    spans.sort()
    for (first_a, last_a, a), (first_b, last_b, b) in pairwise(spans):
        if first_b <= last_a:
            low, high = sorted(((a, first_a, last_a), (b, first_b, last_b)))
            raise InvalidInput(
                f"population.ranges[{high[0]}]",
                f"ranges[{low[0]}] ({low[1]}..{low[2]}) and ranges[{high[0]}] "
                f"({high[1]}..{high[2]}) overlap",
            )

    excluded = sorted(
        _check_number(x, f"population.exclude[{i}]", "excluded number")
        for i, x in enumerate(exclude)
    )
    repeated = sorted({a for a, b in pairwise(excluded) if a == b})
    if repeated:
        raise InvalidInput(
            "population.exclude", f"excluded numbers listed more than once: {_some(repeated)}"
        )
    firsts = [first for first, _, _ in spans]
    outside = [x for x in excluded if (k := bisect_right(firsts, x) - 1) < 0 or x > spans[k][1]]
    if outside:
        raise InvalidInput(
            "population.exclude", f"excluded numbers outside every range: {_some(outside)}"
        )

    runs = _included_runs([(first, last) for first, last, _ in spans], excluded)
    if not runs:
        raise InvalidInput(
            "population.exclude", "every number in the ranges is excluded; the population is empty"
        )
    run_firsts = [first for first, _ in runs]
    before: list[int] = []  # number of included items before each run
    size = 0
    for first, last in runs:
        before.append(size)
        size += last - first + 1
    if size > MAX_NUMBER:
        raise InvalidInput(
            "population.ranges", f"the ranges hold {size} numbers; the limit is {MAX_NUMBER}"
        )
    encoded = b"".join(f.to_bytes(8, "big") + t.to_bytes(8, "big") for f, t in runs)
    digest = hashlib.sha256(b"ranges\x00" + len(runs).to_bytes(8, "big") + encoded).digest()

    def items_at(positions: list[int]) -> tuple[int, ...]:
        out: list[int] = []
        for p in positions:
            k = bisect_right(before, p) - 1
            out.append(run_firsts[k] + p - before[k])
        return tuple(out)

    return _Prepared(size, digest, items_at)


def _included_runs(spans: list[tuple[int, int]], excluded: list[int]) -> list[tuple[int, int]]:
    """Maximal runs of consecutive included numbers, ascending.

    ``spans`` are sorted, disjoint ranges; ``excluded`` is sorted, distinct and lies within
    them.
    """
    merged: list[list[int]] = []
    for first, last in spans:
        if merged and merged[-1][1] + 1 == first:
            merged[-1][1] = last
        else:
            merged.append([first, last])
    runs: list[tuple[int, int]] = []
    k = 0
    for first, last in merged:
        current = first
        while k < len(excluded) and excluded[k] <= last:
            if excluded[k] > current:
                runs.append((current, excluded[k] - 1))
            current = excluded[k] + 1
            k += 1
        if current <= last:
            runs.append((current, last))
    return runs


def _prepare_items(population: ItemPopulation, max_items: int) -> _Prepared:
    items = population.items
    if not isinstance(items, tuple) or not items:
        raise InvalidInput("population.items", "at least one identifier is required")
    if len(items) > max_items:
        raise ComputationTooLarge(
            "population.items", f"{len(items)} identifiers exceed the limit of {max_items}"
        )
    # Joining and encoding run in C over the whole list and check every identifier's type and
    # encodability on the way; only a failure pays for a per-item scan to name the offender.
    try:
        joined = "\x00".join(items)
        encoded = joined.encode("utf-8")
    except (TypeError, UnicodeEncodeError):
        _raise_bad_identifier(items)
        raise
    if joined.count("\x00") != len(items) - 1:
        index = next(i for i, s in enumerate(items) if "\x00" in s)
        raise InvalidInput(
            f"population.items[{index}]",
            f"identifier {items[index]!r} contains the character U+0000",
        )
    del joined
    if max(map(len, items)) > MAX_IDENTIFIER_LENGTH:
        index = next(i for i, s in enumerate(items) if len(s) > MAX_IDENTIFIER_LENGTH)
        raise InvalidInput(
            f"population.items[{index}]",
            f"identifier has {len(items[index]):,} characters; the limit is "
            f"{MAX_IDENTIFIER_LENGTH:,} characters",
        )
    listing = _Listing.of(encoded, len(items))
    if not listing.lengths.all():
        raise InvalidInput(
            f"population.items[{int(np.argmin(listing.lengths))}]", "identifiers must not be empty"
        )
    order, repeated_at = _code_point_order(listing)
    if repeated_at:
        repeated = sorted({items[int(order[p])] for p in repeated_at})
        raise InvalidInput(
            "population.items", f"identifiers listed more than once: {_some(repeated)}"
        )
    digest = _items_fingerprint(listing, order)

    def items_at(positions: list[int]) -> tuple[str, ...]:
        return tuple(items[k] for k in order[positions].tolist())

    return _Prepared(len(items), digest, items_at)
