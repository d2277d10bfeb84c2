"""Exact decisions at ties: is a tail probability at most the risk ``1 − confidence``?

The service computes tail probabilities in double precision, fast and accurate to a
relative error of about 10^-12 (see BENCHMARKS.md). Auditors' inputs are round
decimals, and round decimals make exact ties common: with N = 10 items and a
tolerable rate of 10%, the chance that 9 items show no deviation is exactly 1/10, the
risk at 90% confidence. A double result a rounding away from the risk would decide
such a tie by chance. This package decides every comparison that a double result
cannot settle:

- :mod:`~service.sampling.ties.band` holds the error band: a double tail farther
  from the risk than the band is decided by the double alone;
- :mod:`~service.sampling.ties.exact_tails` sums the binomial and hypergeometric
  tails exactly, as fractions (they are finite sums of rationals);
- :mod:`~service.sampling.ties.poisson_bounds` brackets the Poisson tail between
  rational bounds that tighten until the comparison is decided (a Poisson tail at a
  positive rational mean is never rational, so it never ties exactly);
- :mod:`~service.sampling.ties.decide` puts them together for the three models.
"""

from service.sampling.ties.decide import Decision, at_most, at_most_each, hypergeometric_above

__all__ = ["Decision", "at_most", "at_most_each", "hypergeometric_above"]
