"""Checks of the selection inputs: the seed, the sample size, item numbers."""

from __future__ import annotations

from collections.abc import Iterable

from service.sampling.errors import ComputationTooLarge, InvalidInput
from service.sampling.selection.limits import _SHOWN, MAX_NUMBER, MAX_SEED_LENGTH


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
