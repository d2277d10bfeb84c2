"""Domain errors raised by the sampling core.

Every error the core raises on purpose derives from :class:`SamplingError`.
Each carries the name of the input it concerns (``field``, a dotted path such as
``"population.size"``) so the HTTP layer can report it against that field, and a
message that names the value and the bound it broke.
"""

from __future__ import annotations


class SamplingError(ValueError):
    """Base class: an input the core cannot answer for, with the field it concerns."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(f"{field}: {message}")
        self.field = field
        self.message = message


class InvalidInput(SamplingError):
    """An input is outside the domain of the method (a rate of 0, deviations above n...)."""


class NoFeasiblePlan(SamplingError):
    """No sample size within the limits meets the requested confidence."""


class ComputationTooLarge(SamplingError):
    """The request would need a computation above the configured caps."""
