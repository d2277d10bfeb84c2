"""Reproducible, re-performable selection of sample items.

A selection is a pure function of five things: the population, the sample size, the seed, the
method and the algorithm version. Anyone who holds those five can redo the selection, with this
module or by hand in another language, and obtain the same items in the same order. The
byte-level specification is in the Notes of :func:`select`; it is fixed for each value of
:data:`ALGORITHM_VERSION`, and any change to it, however small, comes with a new version.

Three kinds of population are supported, each with a canonical order:

* :class:`NumberedPopulation` -- items are the positions 1..N;
* :class:`RangePopulation` -- document-number ranges with excluded (voided) numbers, in
  ascending number order;
* :class:`ItemPopulation` -- explicit identifiers, in ascending Unicode code point order.

Two methods are supported: ``"random"`` (simple random sampling without replacement by a
partial Fisher–Yates shuffle) and ``"systematic"`` (a fixed interval from a random start).
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import struct
from bisect import bisect_right
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from fractions import Fraction
from itertools import count, pairwise
from typing import Final

import numpy as np
import numpy.typing as npt

from service.sampling.errors import ComputationTooLarge, InvalidInput

__all__ = [
    "ALGORITHM",
    "ALGORITHM_ID",
    "ALGORITHM_IDS",
    "ALGORITHM_VERSION",
    "DEFAULT_MAX_ITEMS",
    "MAX_IDENTIFIER_LENGTH",
    "MAX_NUMBER",
    "MAX_SEED_LENGTH",
    "METHODS",
    "SYSTEMATIC_ALGORITHM_ID",
    "ItemPopulation",
    "NumberedPopulation",
    "Population",
    "RangePopulation",
    "Selection",
    "check_seed",
    "generate_seed",
    "items_fingerprint",
    "select",
    "select_canonical",
    "selection_fingerprint",
    "uniform_below",
    "word_stream",
]

ALGORITHM: Final = "sha256-counter-fisher-yates"
"""Name of the selection algorithm."""

ALGORITHM_VERSION: Final = 1
"""Version of the byte-level specification; bumped whenever any selected item could change."""

ALGORITHM_ID: Final = f"{ALGORITHM}/v{ALGORITHM_VERSION}"
"""Identifier reported with every random selection: ``"sha256-counter-fisher-yates/v1"``."""

SYSTEMATIC_ALGORITHM_ID: Final = "hmac-sha256-systematic/v1"
"""Identifier reported with every systematic selection (a random start, no shuffle)."""

ALGORITHM_IDS: Final[Mapping[str, str]] = {
    "random": ALGORITHM_ID,
    "systematic": SYSTEMATIC_ALGORITHM_ID,
}
"""The algorithm identifier of each method; each is bound into the selection fingerprint."""

MAX_SEED_LENGTH: Final = 256
"""Longest seed accepted, in characters (Unicode code points)."""

MAX_IDENTIFIER_LENGTH: Final = 1_000
"""Longest item identifier accepted, in characters (Unicode code points)."""

MAX_NUMBER: Final = 2**53 - 1
"""Largest population size and largest document number; every value stays exact in JSON."""

DEFAULT_MAX_ITEMS: Final = 1_000_000
"""Default cap on listed inputs (identifiers, ranges plus exclusions) and on the sample size."""

_TWO_64: Final = 1 << 64
_WORDS: Final = struct.Struct(">4Q").unpack
_SHOWN: Final = 5  # how many offending values a message names before "and N more"


# --------------------------------------------------------------------------- populations


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


# --------------------------------------------------------------------------- result


@dataclass(frozen=True, slots=True)
class Selection:
    """A selected sample and everything needed to re-perform it.

    Attributes
    ----------
    items : tuple of int or tuple of str
        The selected items in draw order: numbers for numbered and range populations,
        identifiers for item populations.
    positions : tuple of int
        1-based canonical positions of the selected items, in the same order as ``items``.
    sample_size : int
        Number of items selected.
    population_size : int
        Number of items in the population (after exclusions).
    seed : str
        The seed used (generated when none was given).
    method : str
        ``"random"`` or ``"systematic"``.
    algorithm : str
        The method's algorithm name with its version (:data:`ALGORITHM_IDS`).
    population_fingerprint : str
        Hex SHA-256 of the canonical encoding of the population.
    selection_fingerprint : str
        Hex SHA-256 binding the population fingerprint, seed, method, sample size and
        algorithm version.
    interval, start : float or None
        Systematic method only: the sampling interval N/n and the random start r/n, as the
        nearest floats. ``None`` for the random method.
    interval_exact, start_exact : str or None
        Systematic method only: the same values exactly, as unreduced fractions ``"N/n"`` and
        ``"r/n"``. ``None`` for the random method.
    """

    items: tuple[int, ...] | tuple[str, ...]
    positions: tuple[int, ...]
    sample_size: int
    population_size: int
    seed: str
    method: str
    algorithm: str
    population_fingerprint: str
    selection_fingerprint: str
    interval: float | None = None
    interval_exact: str | None = None
    start: float | None = None
    start_exact: str | None = None


# --------------------------------------------------------------------------- public functions


def generate_seed() -> str:
    """Return a fresh seed: 32 lowercase hexadecimal characters (128 bits) from :mod:`secrets`.

    Returns
    -------
    str
        The seed. Record it with the selection: without it the selection cannot be redone.
    """
    return secrets.token_hex(16)


def select(
    population: Population,
    sample_size: int,
    seed: str | None = None,
    method: str = "random",
    *,
    max_items: int = DEFAULT_MAX_ITEMS,
) -> Selection:
    """Select ``sample_size`` items from ``population`` reproducibly.

    Parameters
    ----------
    population : NumberedPopulation, RangePopulation or ItemPopulation
        The population to select from.
    sample_size : int
        Number of items n to select, 1 <= n <= population size and n <= ``max_items``.
    seed : str, optional
        1 to :data:`MAX_SEED_LENGTH` characters, used exactly as given (no trimming, no Unicode
        normalisation). When omitted a seed is generated by :func:`generate_seed`.
    method : {"random", "systematic"}, optional
        Selection method; ``"random"`` by default.
    max_items : int, optional
        Cap on listed inputs (identifiers; ranges plus excluded numbers) and on the sample
        size; requests above it raise :class:`~service.sampling.errors.ComputationTooLarge`.

    Returns
    -------
    Selection
        The selected items in draw order, their canonical positions and the fingerprints.

    Raises
    ------
    InvalidInput
        An input is malformed; ``field`` names it as a dotted path such as
        ``"population.ranges[2].first"``, ``"population.exclude"``, ``"population.items"``,
        ``"sample_size"``, ``"seed"`` or ``"method"``.
    ComputationTooLarge
        The population lists or the sample size exceed ``max_items``.

    Notes
    -----
    The specification below is version 1 of :data:`ALGORITHM`. ``u64(x)`` denotes x as 8 bytes,
    big-endian, unsigned; ``||`` is concatenation; positions are 0-based in the steps below and
    reported 1-based.

    1. *Canonical order.* ``NumberedPopulation(N)``: position p holds item p + 1.
       ``RangePopulation``: the numbers that lie in a range and are not excluded, ascending.
       ``ItemPopulation``: the identifiers in ascending Unicode code point order, which is the
       same as the byte order of their UTF-8 encodings.
    2. *Stream.* The key K is the UTF-8 encoding of the seed. Block j (j = 0, 1, 2, ...) is
       HMAC-SHA256(K, u64(j)), 32 bytes. Each block is cut into four 8-byte words, each read
       as a big-endian unsigned integer. Words are used in order -- block 0 words 0 to 3, then
       block 1 words 0 to 3, and so on -- each exactly once.
    3. *Uniform integer in [0, m)*, m >= 1. Let L = 2^64 - (2^64 mod m), the largest multiple
       of m not above 2^64. Take the next word x. If x >= L, discard it and take the next
       word; otherwise the value is x mod m. At least one word is always used.
    4. *Random method.* Think of an arrangement A of the N positions, A[k] = k at the outset.
       For draw i = 0, 1, ..., n - 1: j = i + uniform(N - i); swap A[i] and A[j]; draw i
       selects the canonical position now in A[i] (the one that was in A[j]). Only entries
       that have moved are stored, so memory grows with n, never with N. Because draw i uses
       only the words after those of draws 0..i-1, the first n draws of a request for n + m
       items are exactly the draws of a request for n items.
    5. *Systematic method.* r = uniform(N), the first value of the stream. The interval is
       N/n and the start r/n, so 0 <= start < interval. Selection k (k = 0..n-1) is position
       floor(start + k * N/n) = floor((r + k*N) / n), computed exactly with integers. There is
       one selection in each block [k*N/n, (k+1)*N/n); consecutive positions differ by
       floor(N/n) or ceil(N/n); every item has inclusion probability exactly n/N.
    6. *Population fingerprint*, SHA-256 of:

       * numbered: ``b"numbered" || 0x00 || u64(N)``;
       * ranges: ``b"ranges" || 0x00 || u64(R)`` followed by ``u64(first) || u64(last)`` for
         each of the R maximal runs of consecutive included numbers, ascending (adjacent
         ranges merge into one run and excluded numbers split runs, so the fingerprint depends
         only on the set of included numbers);
       * items: ``b"items" || 0x00 || u64(K)`` followed by ``UTF-8(identifier) || 0x00`` for
         each of the K identifiers in canonical order.

    7. *Selection fingerprint*, SHA-256 of ``b"selection" || 0x00 || ASCII(algorithm id) ||
       0x00 || population fingerprint (32 raw bytes) || ASCII(method) || 0x00 || u64(n) ||
       u64(byte length of UTF-8 seed) || UTF-8 seed``. The algorithm id is the method's:
       ``"sha256-counter-fisher-yates/v1"`` for random, ``"hmac-sha256-systematic/v1"`` for
       systematic (which draws one start and shuffles nothing).

    References
    ----------
    .. [1] R. A. Fisher and F. Yates, *Statistical Tables for Biological, Agricultural and
       Medical Research*, Oliver & Boyd, 1938.
    .. [2] R. Durstenfeld, "Algorithm 235: Random permutation", *Communications of the ACM*
       7(7), 420, 1964.
    .. [3] NIST FIPS 180-4, *Secure Hash Standard (SHS)*, 2015 (SHA-256).
    .. [4] H. Krawczyk, M. Bellare and R. Canetti, RFC 2104, *HMAC: Keyed-Hashing for Message
       Authentication*, 1997.

    Examples
    --------
    >>> first = select(NumberedPopulation(4200), 5, seed="fictional-co-2026-q3")
    >>> first.items
    (2750, 608, 188, 3072, 3793)
    >>> select(NumberedPopulation(4200), 8, seed="fictional-co-2026-q3").items[:5] == first.items
    True
    >>> every = select(NumberedPopulation(4200), 60, seed="fictional-co-2026-q3",
    ...                method="systematic")
    >>> every.interval_exact, every.start_exact, every.items[:3]
    ('4200/60', '2749/60', (46, 116, 186))
    """
    draw = _method(method)
    seed = generate_seed() if seed is None else seed
    key = check_seed(seed)
    _check_sample_size(sample_size, max_items)
    return _draw(_prepare(population, max_items), sample_size, seed, key, method, draw)


def select_canonical(
    size: int,
    fingerprint: bytes,
    items_at: Callable[[list[int]], tuple[int, ...] | tuple[str, ...]],
    sample_size: int,
    seed: str | None = None,
    method: str = "random",
    *,
    max_items: int = DEFAULT_MAX_ITEMS,
) -> Selection:
    """Select from a population already put in canonical order elsewhere.

    The draws are those of :func:`select` (Notes, steps 2 to 5, and 7) over a population
    known only by its size, its fingerprint (step 6) and a map from 0-based canonical
    positions to items. It serves populations too large to hold as an
    :class:`ItemPopulation`, such as population files sorted by a database engine: given
    the fingerprint :func:`items_fingerprint` computes from the same identifiers, the
    result is the one :func:`select` gives for ``ItemPopulation`` of them.

    Parameters
    ----------
    size : int
        Number of items N in the population, at least 1.
    fingerprint : bytes
        The population fingerprint, 32 raw bytes.
    items_at : callable
        Given a list of 0-based canonical positions, the items there, in the same order.
    sample_size, seed, method, max_items
        As for :func:`select`; ``max_items`` caps the sample size only.

    Returns
    -------
    Selection
        As from :func:`select`.

    Examples
    --------
    >>> ids = ("PO-3", "PO-1", "PO-2")
    >>> listed = tuple(sorted(s.encode() for s in ids))
    >>> direct = select(ItemPopulation(ids), 2, seed="harbour-lane")
    >>> again = select_canonical(3, items_fingerprint(3, [listed]),
    ...     lambda at: tuple(listed[p].decode() for p in at), 2, seed="harbour-lane")
    >>> again == direct
    True
    """
    draw = _method(method)
    seed = generate_seed() if seed is None else seed
    key = check_seed(seed)
    _check_sample_size(sample_size, max_items)
    if not isinstance(size, int) or size < 1 or len(fingerprint) != 32:
        raise ValueError("size must be a positive integer and fingerprint 32 bytes")
    return _draw(_Prepared(size, fingerprint, items_at), sample_size, seed, key, method, draw)


def items_fingerprint(count: int, batches: Iterable[Sequence[bytes]]) -> bytes:
    """The fingerprint of an items population (Notes, step 6), 32 raw bytes.

    Parameters
    ----------
    count : int
        Number of identifiers K.
    batches : iterable of sequences of bytes
        The UTF-8 encoded identifiers in canonical (byte) order, in consecutive batches, so
        that a long population can be hashed without holding it whole. The caller
        guarantees the order, distinctness and that no identifier is empty or holds a zero
        byte; ``count`` must be the number of identifiers fed.

    Examples
    --------
    >>> items_fingerprint(2, [[b"A"], [b"B"]]) == items_fingerprint(2, [[b"A", b"B"]])
    True
    """
    digest = hashlib.sha256(b"items\x00" + count.to_bytes(8, "big"))
    fed = 0
    for batch in batches:
        if batch:
            digest.update(b"\x00".join(batch) + b"\x00")
            fed += len(batch)
    if fed != count:
        raise ValueError(f"count is {count} but {fed} identifiers were given")
    return digest.digest()


def _method(method: object) -> _Draw:
    draw = _METHODS.get(method) if isinstance(method, str) else None
    if draw is None:
        raise InvalidInput(
            "method", f"method must be one of {', '.join(map(repr, METHODS))}, got {method!r}"
        )
    return draw


def _draw(
    prepared: _Prepared, sample_size: int, seed: str, key: bytes, method: str, draw: _Draw
) -> Selection:
    if sample_size > prepared.size:
        raise InvalidInput(
            "sample_size",
            f"sample_size {sample_size} exceeds the population size {prepared.size}",
        )

    positions, systematic = draw(word_stream(key), prepared.size, sample_size)
    return Selection(
        items=prepared.items_at(positions),
        positions=tuple(p + 1 for p in positions),
        sample_size=sample_size,
        population_size=prepared.size,
        seed=seed,
        method=method,
        algorithm=ALGORITHM_IDS[method],
        population_fingerprint=prepared.fingerprint.hex(),
        selection_fingerprint=_selection_fingerprint(
            prepared.fingerprint, key, method, sample_size
        ),
        interval=float(systematic.interval) if systematic else None,
        interval_exact=systematic.interval_text if systematic else None,
        start=float(systematic.start) if systematic else None,
        start_exact=systematic.start_text if systematic else None,
    )


# --------------------------------------------------------------------------- stream and draws


def word_stream(key: bytes) -> Iterator[int]:
    """Yield the 64-bit words of the keyed counter stream (Notes of :func:`select`, step 2).

    Block j is HMAC-SHA256(key, u64(j)); each block gives four big-endian 64-bit words.
    """
    for block in count():
        yield from _WORDS(hmac.digest(key, block.to_bytes(8, "big"), "sha256"))


def uniform_below(words: Iterator[int], m: int) -> int:
    """Return a uniform integer in [0, m) from ``words`` by rejection (Notes of :func:`select`,
    step 3): words at or above the largest multiple of m not above 2^64 are discarded."""
    limit = _TWO_64 - _TWO_64 % m
    for x in words:
        if x < limit:
            return x % m
    raise AssertionError("the word stream is endless")  # pragma: no cover


@dataclass(frozen=True, slots=True)
class _Systematic:
    interval: Fraction
    start: Fraction
    interval_text: str
    start_text: str


_Draw = Callable[[Iterator[int], int, int], tuple[list[int], _Systematic | None]]


def _draw_random(words: Iterator[int], size: int, n: int) -> tuple[list[int], None]:
    """Partial Fisher–Yates shuffle over positions 0..size-1 (Notes, step 4)."""
    moved: dict[int, int] = {}  # A[k] for every k whose entry differs from k
    chosen: list[int] = []
    for i in range(n):
        j = i + uniform_below(words, size - i)
        picked = moved.get(j, j)
        at_i = moved.pop(i, i)  # A[i] is never read again once draw i is done
        if j != i:
            moved[j] = at_i
        chosen.append(picked)
    return chosen, None


def _draw_systematic(words: Iterator[int], size: int, n: int) -> tuple[list[int], _Systematic]:
    """Fixed interval size/n from the random start r/n (Notes, step 5)."""
    r = uniform_below(words, size)
    positions = [(r + k * size) // n for k in range(n)]
    return positions, _Systematic(
        interval=Fraction(size, n),
        start=Fraction(r, n),
        interval_text=f"{size}/{n}",
        start_text=f"{r}/{n}",
    )


_METHODS: Final[Mapping[str, _Draw]] = {
    "random": _draw_random,
    "systematic": _draw_systematic,
}

METHODS: Final = tuple(_METHODS)
"""Names of the supported selection methods."""


def _selection_fingerprint(population: bytes, key: bytes, method: str, n: int) -> str:
    """Hex SHA-256 binding everything the selection depends on (Notes, step 7)."""
    return selection_fingerprint(b"selection", ALGORITHM_IDS[method], population, key, method, n)


def selection_fingerprint(
    domain: bytes, algorithm: str, population: bytes, key: bytes, method: str, n: int
) -> str:
    """Hex SHA-256 of ``domain || 0x00 || ASCII(algorithm) || 0x00 || population
    fingerprint (32 raw bytes) || ASCII(method) || 0x00 || u64(n) || u64(len(key)) || key``,
    integers big-endian: the selection fingerprint of :func:`select` (``b"selection"``) and
    of the monetary-unit selection (``b"monetary-selection"``)."""
    payload = b"".join(
        (
            domain,
            b"\x00",
            algorithm.encode("ascii"),
            b"\x00",
            population,
            method.encode("ascii"),
            b"\x00",
            n.to_bytes(8, "big"),
            len(key).to_bytes(8, "big"),
            key,
        )
    )
    return hashlib.sha256(payload).hexdigest()


# --------------------------------------------------------------------------- validation


def _some(values: Iterable[object]) -> str:
    """Name the first few values and count the rest."""
    listed = list(values)
    shown = ", ".join(repr(v) for v in listed[:_SHOWN])
    rest = len(listed) - _SHOWN
    return f"{shown} and {rest} more" if rest > 0 else shown


def check_seed(seed: object) -> bytes:
    """Validate the seed and return its UTF-8 encoding, the stream key."""
    if not isinstance(seed, str):
        raise InvalidInput("seed", f"seed must be a string, got {type(seed).__name__}")
    if not seed:
        raise InvalidInput("seed", "seed must not be empty")
    if len(seed) > MAX_SEED_LENGTH:
        raise InvalidInput(
            "seed", f"seed has {len(seed)} characters; the limit is {MAX_SEED_LENGTH}"
        )
    try:
        return seed.encode("utf-8")
    except UnicodeEncodeError:
        raise InvalidInput(
            "seed", "seed cannot be encoded as UTF-8 (it contains a lone surrogate)"
        ) from None


def _check_sample_size(sample_size: object, max_items: int) -> None:
    if not isinstance(sample_size, int) or isinstance(sample_size, bool):
        raise InvalidInput(
            "sample_size", f"sample_size must be an integer, got {type(sample_size).__name__}"
        )
    if sample_size < 1:
        raise InvalidInput("sample_size", f"sample_size must be at least 1, got {sample_size}")
    if sample_size > max_items:
        raise ComputationTooLarge(
            "sample_size", f"sample_size {sample_size} exceeds the limit of {max_items}"
        )


def _check_number(value: object, field: str, what: str) -> int:
    if not isinstance(value, int) or isinstance(value, bool):
        raise InvalidInput(field, f"{what} must be an integer, got {type(value).__name__}")
    if not 0 <= value <= MAX_NUMBER:
        raise InvalidInput(field, f"{what} {value} is outside 0..{MAX_NUMBER}")
    return value


# --------------------------------------------------------------------------- preparation


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


# --------------------------------------------------------------------------- identifier order
# The canonical order of identifiers is the byte order of their UTF-8 encodings (Notes, step 1).
# Python's sorted() compares string objects scattered over the heap one pair at a time; for a
# million identifiers that takes seconds. The functions below sort the encoded bytes with numpy
# instead: each identifier is read as consecutive 8-byte big-endian words, zero-padded at the
# end. Comparing those words as unsigned integers, most significant first, is comparing the
# bytes, and the zero padding sorts a prefix before its extensions exactly as byte order does,
# because no identifier contains a zero byte (U+0000 is refused, and UTF-8 encodes no other
# character with one). The leading bytes common to all identifiers are skipped; then comes
# one full sort on the next word, and sorts of the identifiers still tied only, on the word
# after, until no ties remain. Identifiers still tied when all their bytes have been compared
# are equal. Memory is a few arrays of one entry per identifier.

# _KEEP[r], as stored in memory, keeps the first r bytes of a word and clears the other 8 - r.
_KEEP: Final = np.frombuffer(
    b"".join(b"\xff" * r + b"\x00" * (8 - r) for r in range(9)), dtype=np.uint64
)
_CHUNK: Final = 1 << 16  # identifiers hashed per step of the fingerprint
_LEAST_ROOM: Final = 16  # fewest bits of a word worth packing beside the rank and the index

_Positions = npt.NDArray[np.int64]
_Words = npt.NDArray[np.uint64]


@dataclass(frozen=True, slots=True)
class _Listing:
    """The UTF-8 identifiers joined by zero bytes, located, and their leading words.

    Bytes that every identifier shares at its start (``prefix`` of them) cannot order
    anything, so words are counted after them: word k of an identifier is its bytes
    prefix + 8k to prefix + 8k + 7, zero past its end. ``table[k]`` holds word k of every
    identifier, as stored in memory, for the first few k: as many as the longest identifier
    needs, within about twice the memory of the identifiers themselves. Words beyond the
    table are read from ``padded`` when needed.
    """

    padded: npt.NDArray[np.uint8]  # the joined bytes followed by eight zero bytes
    starts: _Positions  # byte offset of each identifier, in the order given
    lengths: _Positions  # byte length of each identifier
    prefix: int  # number of leading bytes common to all identifiers
    table: _Words  # shape (words, identifiers)

    @classmethod
    def of(cls, joined: bytes, count: int) -> _Listing:
        """Locate the ``count`` identifiers in ``joined`` (separated by single zero bytes)."""
        size = len(joined)
        padded = np.zeros(size + 8, dtype=np.uint8)
        padded[:size] = np.frombuffer(joined, dtype=np.uint8)
        ends = np.empty(count, dtype=np.int64)
        ends[:-1] = np.flatnonzero(padded[:size] == 0)
        ends[-1] = size
        starts = np.empty(count, dtype=np.int64)
        starts[0] = 0
        starts[1:] = ends[:-1] + 1
        lengths = ends - starts
        longest = int(lengths.max())
        same = longest if int(lengths.min()) == longest else None
        prefix, read, stored = 0, 0, None
        while prefix < longest:
            stored = _word_at(padded, starts, lengths, prefix, same)
            word = _values(stored)
            low, high = word.min(), word.max()
            read = prefix
            if low != high:  # the first differing bit is in this word
                prefix += (64 - int(low ^ high).bit_length()) // 8
                break
            prefix += 8
        prefix = min(prefix, longest)  # all equal: everything is common
        needed = (longest - prefix) // 8 + 1  # room for the zero byte after the longest
        columns = min(needed, max(1, (2 * len(padded) + 8 * count) // (8 * count)))
        table = np.empty((columns, count), dtype=np.uint64)
        for k in range(columns):
            if k == 0 and stored is not None and read == prefix:  # the search read it last
                table[0] = stored
            else:
                table[k] = _word_at(padded, starts, lengths, prefix + 8 * k, same)
        return cls(padded, starts, lengths, prefix, table)

    def word(self, index: int, rows: _Positions | None = None) -> _Words:
        """Word ``index`` of the identifiers at ``rows`` (all when None), as big-endian values.

        Compared as unsigned integers, these words order the identifiers as their bytes do.
        """
        if index < len(self.table):
            return _values(self.table[index] if rows is None else self.table[index][rows])
        starts = self.starts if rows is None else self.starts[rows]
        lengths = self.lengths if rows is None else self.lengths[rows]
        return _values(_read_words(self.padded, starts + self.prefix, lengths - self.prefix, index))


def _values(stored: _Words) -> _Words:
    """Words as stored in memory, read as big-endian unsigned integers."""
    return stored.view(">u8").astype(np.uint64)


def _word_at(
    padded: npt.NDArray[np.uint8],
    starts: _Positions,
    lengths: _Positions,
    offset: int,
    same: int | None,
) -> _Words:
    """Bytes ``offset`` to ``offset + 7`` of every identifier, as stored, zero past its end.

    ``same`` is the length of every identifier when they all have one length: the words then
    lie at a fixed stride in ``padded`` and are read without an index.
    """
    if same is None:
        return _read_words(padded, starts + offset, lengths - offset, 0)
    if offset >= same:
        return np.zeros(len(starts), dtype=np.uint64)
    # The last identifier's word ends at most 6 bytes past the joined bytes, within the padding.
    strided = np.ndarray(
        (len(starts),), dtype=np.uint64, buffer=padded, offset=offset, strides=(same + 1,)
    )
    kept = min(same - offset, 8)
    return strided & _KEEP[kept : kept + 1]


def _read_words(
    padded: npt.NDArray[np.uint8], starts: _Positions, lengths: _Positions, index: int
) -> _Words:
    """Word ``index`` of each identifier, as stored in memory, zero past its end."""
    limit = len(padded) - 8
    # Every offset from 0 to `limit` begins eight readable bytes; numpy reads them unaligned.
    words = np.ndarray((limit + 1,), dtype=np.uint64, buffer=padded, strides=(1,))
    offsets = np.minimum(starts + 8 * index, limit)
    return words[offsets] & _KEEP[np.clip(lengths - 8 * index, 0, 8)]


def _code_point_order(listing: _Listing) -> tuple[_Positions, list[int]]:
    """The canonical order of the identifiers, and where any repeated identifiers sit in it.

    Returns ``order`` (``order[p]`` is the index, in the order given, of the identifier at
    canonical position p) and the canonical position of the first of each run of equal
    identifiers (empty when all are distinct).
    """
    count = len(listing.starts)
    order = np.arange(count, dtype=np.int64)
    tied = order.copy()  # canonical positions not yet told apart from a neighbour
    group = np.zeros(count, dtype=np.int64)  # positions with the same number are tied
    repeated: list[int] = []
    index = 0
    while count > 1:
        key = listing.word(index, None if index == 0 else order[tied])
        tied, group = _sort_within(order, tied, group, key)
        if not len(tied):
            break
        # Word `index` is compared; tied identifiers with no bytes beyond it are equal.
        done = listing.lengths[order[tied]] <= listing.prefix + 8 * (index + 1)
        if done.any():
            first = _group_starts(group)
            ended = np.logical_and.reduceat(done, first)
            repeated.extend(tied[first[ended]].tolist())
            keep = np.repeat(~ended, np.diff(np.r_[first, len(tied)]))
            tied, group = tied[keep], group[keep]
            if not len(tied):
                break
        index += 1
    return order, repeated


def _group_starts(group: _Positions) -> _Positions:
    """Where each run of equal group numbers begins."""
    return np.flatnonzero(np.r_[True, group[1:] != group[:-1]])


def _sort_within(
    order: _Positions, tied: _Positions, group: _Positions, key: _Words
) -> tuple[_Positions, _Positions]:
    """Order each group of tied positions by ``key``, in place in ``order``; return new ties.

    ``tied`` lists canonical positions, ascending, in runs of equal ``group`` number; ``key``
    holds one word for the identifier at each of them. The group's dense rank, the key (less
    its minimum, shifted right past the zero bits common to all) and the position's index in
    ``tied`` are packed into one 64-bit integer and the packed values are sorted: a plain
    sort of integers is several times faster than an argsort or a lexsort. When the key has
    more significant bits than the rank and the index leave room for, its high bits are
    sorted on first and the positions they leave tied are sorted on the low bits.
    """
    count = len(tied)
    first = _group_starts(group)
    sizes = np.diff(np.r_[first, count])
    if (key == np.repeat(key[first], sizes)).all():  # the word is common to each group
        return tied, group
    key = key - key.min()
    common = int(np.bitwise_or.reduce(key))
    key >>= np.uint64((common & -common).bit_length() - 1)  # trailing zero bits common to all
    bits = int(key.max()).bit_length()
    rank_bits = (len(first) - 1).bit_length()
    index_bits = (count - 1).bit_length()
    room = 64 - rank_bits - index_bits
    if room < _LEAST_ROOM:  # tens of millions of ties: too many to pack, sort pairs instead
        within = np.lexsort((key, np.repeat(np.arange(len(first)), sizes)))
        order[tied] = order[tied][within]
        key = key[within]
        same = (np.diff(key) == 0) & np.isin(np.arange(1, count), first, invert=True)
        return _still_tied(tied, same)
    rest = None
    if bits > room:
        rest = key & np.uint64((1 << (bits - room)) - 1)
        key >>= np.uint64(bits - room)
        bits = room
    packed = np.repeat(np.arange(len(first), dtype=np.uint64), sizes)
    packed <<= np.uint64(bits)
    packed |= key
    packed <<= np.uint64(index_bits)
    packed |= np.arange(count, dtype=np.uint64)
    packed.sort()
    within = (packed & np.uint64((1 << index_bits) - 1)).astype(np.int64)
    order[tied] = order[tied][within]
    # Equal packed values less the index: same group, same key.
    same = np.diff(packed >> np.uint64(index_bits)) == 0
    if rest is None:
        return _still_tied(tied, same)
    still = np.r_[same, False] | np.r_[False, same]
    tied, group = _still_tied(tied, same)
    return _sort_within(order, tied, group, rest[within][still]) if len(tied) else (tied, group)


def _still_tied(tied: _Positions, same: npt.NDArray[np.bool_]) -> tuple[_Positions, _Positions]:
    """The positions equal to a neighbour (``same[k]``: positions k and k + 1), in groups."""
    still = np.r_[same, False] | np.r_[False, same]
    return tied[still], np.cumsum(np.r_[True, ~same])[still]


def _items_fingerprint(listing: _Listing, order: _Positions) -> bytes:
    """SHA-256 of the identifiers in canonical order, each followed by a zero byte (step 6)."""
    count, prefix = len(order), listing.prefix
    digest = hashlib.sha256(b"items\x00" + count.to_bytes(8, "big"))
    shared = listing.padded[:prefix]  # the first identifier starts at offset 0
    for begin in range(0, count, _CHUNK):
        rows = order[begin : begin + _CHUNK]
        sizes = listing.lengths[rows] + 1  # each identifier with the zero byte after it
        columns = (int(sizes.max()) - prefix + 7) // 8
        if columns <= len(listing.table):
            # The shared bytes and the table hold every byte and the zero after it: lay the
            # rows out and keep each identifier's own bytes.
            block = np.empty((len(rows), prefix + 8 * columns), dtype=np.uint8)
            block[:, :prefix] = shared
            words = np.empty((len(rows), columns), dtype=np.uint64)
            for k in range(columns):
                words[:, k] = listing.table[k][rows]
            block[:, prefix:] = words.view(np.uint8)
            if int(sizes.min()) == int(sizes.max()):
                digest.update(np.ascontiguousarray(block[:, : int(sizes[0])]).data)
            else:
                digest.update(block[np.arange(block.shape[1]) < sizes[:, None]].data)
        else:  # a long identifier in this stretch: gather the bytes one by one
            ends = np.cumsum(sizes)
            offsets = np.repeat(listing.starts[rows] - (ends - sizes), sizes)
            offsets += np.arange(int(ends[-1]), dtype=np.int64)
            digest.update(listing.padded[offsets].data)
    return digest.digest()


def _raise_bad_identifier(items: tuple[object, ...]) -> None:
    """Raise the error for the first identifier that is not a UTF-8 encodable string."""
    for index, item in enumerate(items):
        field = f"population.items[{index}]"
        if not isinstance(item, str):
            raise InvalidInput(field, f"identifiers must be strings, got {type(item).__name__}")
        try:
            item.encode("utf-8")
        except UnicodeEncodeError:
            raise InvalidInput(
                field, f"identifier {item!r} cannot be encoded as UTF-8 (lone surrogate)"
            ) from None
