"""The answer of a selection: the items in draw order, with what re-performs it."""

from __future__ import annotations

from dataclasses import dataclass


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
