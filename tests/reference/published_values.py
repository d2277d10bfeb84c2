"""Published values the sampling core is checked against, each block with its source.

Values marked "recalled from memory" were written down from the printed table
without the book at hand; each was also reproduced by the computation the
table is built on (the definitions in service.sampling.attributes), which is
why they are trusted here. Where a table rounds, the tolerance says so.
"""

# --- AICPA, Audit Guide: Audit Sampling (2019), table A-1 -------------------
# "Statistical sample sizes for tests of controls, 5 percent risk of
# overreliance" (binomial model, large population). Entries are
# (tolerable rate, expected rate) -> (sample size, expected number of
# deviations shown in parentheses in the table). Recalled from memory.
TABLE_A1_95 = {
    (0.05, 0.0): (59, 0),
    (0.05, 0.0025): (93, 1),
    (0.05, 0.01): (93, 1),
    (0.05, 0.0125): (124, 2),
    (0.05, 0.0175): (153, 3),
    (0.05, 0.02): (181, 4),
    (0.03, 0.0): (99, 0),
    (0.03, 0.0025): (157, 1),
    (0.02, 0.0): (149, 0),
    (0.02, 0.0025): (236, 1),
    (0.04, 0.0): (74, 0),
    (0.06, 0.0): (49, 0),
    (0.10, 0.0): (29, 0),
    (0.10, 0.01): (46, 1),
}

# --- AICPA, Audit Guide: Audit Sampling (2019), table A-2 -------------------
# Same, 10 percent risk of overreliance. Recalled from memory.
TABLE_A2_90 = {
    (0.05, 0.0): (45, 0),
    (0.10, 0.0): (22, 0),
    (0.03, 0.0): (76, 0),
}

# --- AICPA, Audit Guide: Audit Sampling (2019), table A-3 -------------------
# "Statistical sampling results evaluation table for tests of controls, upper
# limits at 5 percent risk of overreliance": (sample size, deviations found)
# -> upper limit in percent, printed to one decimal and rounded up (the
# conservative direction: 50 items with 1 deviation give 9.14%, printed 9.2).
# Recalled from memory.
TABLE_A3_95 = {
    (100, 2): 6.2,
    (100, 0): 3.0,
    (50, 1): 9.2,
    (60, 0): 4.9,
}
TABLE_DECIMALS = 1  # decimals of a percent, rounded up

# --- Textbook hypergeometric example ------------------------------------------
# Zero-deviation plans for tolerable 5% at 95% confidence, sampling without
# replacement: population 100 -> 45, population 600 -> 56 (against 59 for the
# binomial). A standard worked example in auditing texts on attribute
# sampling in small populations; recalled from memory.
HYPERGEOMETRIC_EXAMPLES = {100: 45, 600: 56}

# --- Poisson confidence factors of attribute-sampling practice ----------------
# Factor for 0 deviations at 95% confidence is 3.00 (-ln 0.05 = 2.9957); at
# 90% it is 2.31 (-ln 0.10 = 2.3026). The factors for 1 and 2 deviations at 95%
# are 4.75 and 6.30 (4.7439 and 6.2958). Standard values of the Poisson
# (Garwood 1936) upper limit used in audit practice, printed to two decimals
# rounded up; recalled from memory.
POISSON_FACTORS_95 = {0: 3.00, 1: 4.75, 2: 6.30}
POISSON_FACTORS_90 = {0: 2.31, 1: 3.89}
FACTOR_DECIMALS = 2  # rounded up
