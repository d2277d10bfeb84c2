"""The error band within which a double tail probability is not trusted to decide.

The double tails of :mod:`service.sampling.distributions` are accurate to a relative
error below 10^-12 over the supported range (measured against exact fractions by
``bench/tail_accuracy.py``; figures in BENCHMARKS.md). The band is a thousand times
wider, so a comparison is taken from the double alone only when the double lies
farther than 10^-9 (relative) from the risk; inside the band the exact path decides.
"""

from __future__ import annotations

RELATIVE_BAND = 1e-9


def near(value: float, risk: float) -> bool:
    """Whether ``value`` is within the band of ``risk`` (both probabilities).

    >>> near(0.5000000000000002, 0.5), near(0.51, 0.5)
    (True, False)
    """
    return abs(value - risk) <= RELATIVE_BAND * max(abs(risk), abs(value))
