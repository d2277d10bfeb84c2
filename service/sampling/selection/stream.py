"""The HMAC-SHA256 stream of 64-bit words, the unbiased draw below a bound, the two
methods' draws (partial Fisher-Yates shuffle; a fixed interval from a random start) and
the selection fingerprint. The byte-level specification is in the Notes of
:func:`service.sampling.selection.select`."""

from __future__ import annotations

import hashlib
import hmac
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from fractions import Fraction
from itertools import count
from typing import Final

from service.sampling.errors import InvalidInput
from service.sampling.selection.limits import _TWO_64, _WORDS, ALGORITHM_IDS
from service.sampling.selection.preparation import _Prepared
from service.sampling.selection.results import Selection


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
