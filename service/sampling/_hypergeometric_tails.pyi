"""Types of the compiled scalar hypergeometric tails (``_hypergeometric_tails.c``)."""

from collections.abc import Sequence

def lower(k: int, N: int, M: int, n: int, /) -> tuple[float, float] | None:  # noqa: N803
    """``(P(X ≤ k), P(X > k))`` as ``hypergeometric._lower_one`` computes them, or None
    where only the Python code can (outside the support or the domain, a tail longer than
    the scalar loop, an integer ratio beyond 2^53)."""

def configure(table: Sequence[float], /) -> None:
    """The Stirling errors ``δ(0) … δ(15)`` the module uses, given once at import."""
