"""Monetary-unit sampling: plan, select by amount and evaluate misstatements in money.

Every currency unit of a balance is a sampling unit, so an item is selected with a
probability proportional to its recorded amount and the result is a limit in money.

- :mod:`.amounts` -- exact amounts in the smallest currency unit;
- :mod:`.factors` -- reliability factors (Poisson, binomial, hypergeometric upper limits);
- :mod:`.sizing` -- sample sizes;
- :mod:`.selection` -- re-performable selection of currency units;
- :mod:`.bounds` -- upper misstatement limits (Stringer, cell, betting);
- :mod:`.evaluation` -- the evaluation of the misstatements found.
"""
