"""Searches over sample sizes and deviant counts: bisection for the smallest size that
holds (up from below, or down from a known answer), and for the largest or smallest
count that qualifies."""

from __future__ import annotations

from collections.abc import Callable


def _bisect_smallest(holds: Callable[[int], bool], lo: int, hi: int) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, by bisection, for ``holds`` monotone
    and true at ``hi``."""
    while lo < hi:
        mid = (lo + hi) // 2
        if holds(mid):
            hi = mid
        else:
            lo = mid + 1
    return lo


def _smallest_satisfying(holds: Callable[[int], bool], lo: int, hi: int) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, for ``holds`` monotone and true at ``hi``.

    The bracket is grown from ``lo`` by doubling before the bisection, so the
    distributions are evaluated near the answer and not at ``hi``, which may be
    very large (a population of 10^12 items).
    """
    step = 1
    while lo + step < hi and not holds(lo + step):
        lo += step + 1
        step *= 2
    hi = min(hi, lo + step)
    return _bisect_smallest(holds, lo, hi)


def _smallest_satisfying_below(
    holds: Callable[[int], bool], lo: int, hi: int, first_step: int = 1
) -> int:
    """Smallest n in [lo, hi] with ``holds(n)``, for ``holds`` monotone and true at ``hi``.

    Searched downwards from ``hi`` by doubling steps, the first of ``first_step``, then
    by bisection: when ``hi`` is a close upper bound of the answer (the binomial plan for
    a hypergeometric one) and ``first_step`` about the distance to it, a few evaluations
    settle it.
    """
    step = max(1, first_step)
    while hi - step >= lo and holds(hi - step):
        hi -= step
        step *= 2
    lo = max(lo, hi - step + 1)
    return _bisect_smallest(holds, lo, hi)


def _largest_qualifying(qualifies: Callable[[int], bool], lo: int, hi: int, guess: int) -> int:
    """Largest m in [lo, hi] with ``qualifies(m)``, for ``qualifies`` true at ``lo`` and
    monotone (true, then false).

    The search starts at ``guess`` and moves away from it by doubling steps until the
    answer is bracketed, then bisects; a guess within a few units of the answer settles
    it in a few evaluations, and any guess gives the same answer.
    """
    probe = min(max(guess, lo), hi)
    if probe > lo:
        step = 1
        if qualifies(probe):
            lo = probe
            while lo + step <= hi:
                if not qualifies(lo + step):
                    hi = lo + step - 1
                    break
                lo += step
                step *= 2
        else:
            hi = probe - 1
            while hi - step + 1 > lo:
                below = hi - step + 1
                if qualifies(below):
                    lo = below
                    break
                hi = below - 1
                step *= 2
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if qualifies(mid):
            lo = mid
        else:
            hi = mid - 1
    return lo


def _smallest_qualifying(qualifies: Callable[[int], bool], lo: int, hi: int, guess: int) -> int:
    """Smallest m in [lo, hi] with ``qualifies(m)``, for ``qualifies`` true at ``hi`` and
    monotone (false, then true); searched from ``guess`` as :func:`_largest_qualifying`."""
    return -_largest_qualifying(lambda m: qualifies(-m), -hi, -lo, -guess)
