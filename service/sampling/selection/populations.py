"""The three kinds of population a selection draws from, each with its canonical order."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class NumberedPopulation:
    """Items numbered 1..``size``; item *p* sits at canonical position *p*.

    Parameters
    ----------
    size : int
        Number of items N, 1 <= N <= :data:`MAX_NUMBER`.
    """

    size: int


@dataclass(frozen=True, slots=True)
class RangePopulation:
    """Document numbers in inclusive ranges, less excluded (for example voided) numbers.

    The canonical order is ascending document number. Ranges may be given in any order but
    must not overlap; every excluded number must lie in some range and appear once.

    Parameters
    ----------
    ranges : tuple of (int, int)
        ``(first, last)`` pairs, inclusive, 0 <= first <= last <= :data:`MAX_NUMBER`.
    exclude : tuple of int, optional
        Numbers inside the ranges that are not part of the population.
    """

    ranges: tuple[tuple[int, int], ...]
    exclude: tuple[int, ...] = ()

    def __post_init__(self) -> None:
        # Accept lists (as decoded from JSON) but store tuples, so the value stays immutable.
        ranges: object = self.ranges
        if isinstance(ranges, list | tuple):
            entries = tuple(tuple(r) if isinstance(r, list) else r for r in ranges)
            object.__setattr__(self, "ranges", entries)
        if isinstance(self.exclude, list):
            object.__setattr__(self, "exclude", tuple(self.exclude))


@dataclass(frozen=True, slots=True)
class ItemPopulation:
    """Explicit item identifiers, in canonical ascending Unicode code point order.

    Identifiers are compared exactly as given: no Unicode normalisation, no case folding, no
    trimming. They must be non-empty, at most :data:`MAX_IDENTIFIER_LENGTH` characters,
    distinct, encodable as UTF-8 (no lone surrogates) and free of the character U+0000. The
    order in which they are given does not matter.

    Parameters
    ----------
    items : tuple of str
        The identifiers.
    """

    items: tuple[str, ...]

    def __post_init__(self) -> None:
        if isinstance(self.items, list):
            object.__setattr__(self, "items", tuple(self.items))


Population = NumberedPopulation | RangePopulation | ItemPopulation
"""Any of the supported population kinds."""
