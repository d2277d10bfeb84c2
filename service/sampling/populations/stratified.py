"""Stratified selection from a population file.

The population is cut into strata, by the values of a column (one stratum per distinct
value, blank cells forming a stratum of their own) or by amount bands (stratum h holds
the amounts from bound h − 1, inclusive, to bound h, exclusive). Amounts at or above an
optional top threshold form the top stratum, taken in full. Each other stratum gets a
sample size, given for it or allocated from a total:

* proportional: n_h = n · N_h / N;
* Neyman: n_h = n · N_h S_h / Σ N_k S_k, S_h the standard deviation of the stratum's amounts
  (with divisor N_h − 1), which minimises the variance of the estimated total for a given n
  (Cochran 1977, §5.5); a stratum whose share exceeds its size is taken in full and the rest
  reallocated among the others (§5.9).

Shares are rounded by largest remainders: each stratum gets the whole part of its share, and
the units left go one each to the largest fractional parts, an earlier stratum first on a
tie.

Each stratum is selected as a population of its own, in the canonical form of
:mod:`.canonical`, with its own seed derived from the one seed: the stratum's seed is
``"stratum-"`` followed by the hexadecimal SHA-256 of ``b"stratum" || 0x00 || UTF-8(seed)
|| 0x00 || UTF-8(label)``, where the label is the column value (``""`` for blanks), the band
written ``"[low, high)"`` with ``-inf``/``inf`` for open ends, or ``"top"``. So every stratum
can be re-performed alone, as an items population, with its derived seed.

References
----------
.. [1] W. G. Cochran, *Sampling Techniques*, 3rd ed., Wiley, 1977, sections 5.5 and 5.9.
.. [2] J. Neyman, "On the two different aspects of the representative method", *Journal
   of the Royal Statistical Society* 97(4), 558-625, 1934.
"""

from __future__ import annotations

import hashlib
import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from decimal import Decimal
from fractions import Fraction
from typing import Final

from service.sampling.errors import InvalidInput
from service.sampling.populations.amounts import DECIMAL_TYPE
from service.sampling.populations.canonical import FileSelection, select_from_file
from service.sampling.populations.filters import quoted
from service.sampling.populations.reading import AMOUNT, PopulationTable
from service.sampling.selection import generate_seed

ALLOCATIONS: Final = ("proportional", "neyman")
TOP: Final = "top"
FIELD: Final = "strata"


@dataclass(frozen=True)
class StrataPlan:
    """How to cut the population and how many to take from each stratum.

    Exactly one of ``column`` and ``bands``; exactly one of ``sizes`` (by stratum label) and
    ``sample_size`` (allocated by ``allocation``).
    """

    column: str | None = None
    bands: tuple[Decimal, ...] = ()
    top_threshold: Decimal | None = None
    sizes: Mapping[str, int] | None = None
    sample_size: int | None = None
    allocation: str = "proportional"


@dataclass(frozen=True)
class StratumSelection:
    """One stratum: its population, amounts, sample size, seed and selection."""

    label: str
    population_size: int
    total: Decimal | None
    standard_deviation: float | None
    sample_size: int
    seed: str
    taken_in_full: bool
    selection: FileSelection | None  # None when nothing is taken from the stratum


@dataclass(frozen=True)
class StratifiedSelection:
    """Every stratum's selection, in stratum order (bands or values ascending, top last)."""

    strata: tuple[StratumSelection, ...]
    seed: str
    method: str
    allocation: str | None
    sample_size: int


def stratum_seed(seed: str, label: str) -> str:
    """The seed of one stratum, derived from the selection's seed (module docstring).

    >>> zero = bytes(1)
    >>> stratum_seed("harbour-lane", "top") == "stratum-" + hashlib.sha256(
    ...     b"stratum" + zero + b"harbour-lane" + zero + b"top").hexdigest()
    True
    """
    digest = hashlib.sha256(
        b"stratum\x00" + seed.encode("utf-8") + b"\x00" + label.encode("utf-8")
    ).hexdigest()
    return f"stratum-{digest}"


def largest_remainders(shares: Sequence[Fraction], total: int) -> list[int]:
    """Whole numbers adding to ``total``, each the floor of its share plus at most one.

    >>> largest_remainders([Fraction(7, 2), Fraction(7, 2), Fraction(3)], 10)
    [4, 3, 3]
    """
    whole = [math.floor(s) for s in shares]
    left = total - sum(whole)
    order = sorted(range(len(shares)), key=lambda h: (-(shares[h] - whole[h]), h))
    for h in order[:left]:
        whole[h] += 1
    return whole


def allocate(
    sizes: Sequence[int], weights: Sequence[Fraction], sample_size: int
) -> list[int]:
    """Allocate ``sample_size`` in proportion to ``weights``, no stratum above its size.

    A stratum whose share reaches its size is taken in full and the rest allocated again
    among the others (Cochran 1977, §5.9).

    >>> allocate([100, 50], [Fraction(1000), Fraction(2000)], 30)
    [10, 20]
    >>> allocate([100, 5], [Fraction(1000), Fraction(2000)], 30)
    [25, 5]
    """
    if sample_size > sum(sizes):
        raise InvalidInput(
            "sample_size",
            f"sample_size {sample_size} exceeds the {sum(sizes):,} records of the strata",
        )
    full: set[int] = set()
    while True:
        open_ = [h for h in range(len(sizes)) if h not in full]
        room = sample_size - sum(sizes[h] for h in full)
        weight = sum((weights[h] for h in open_), Fraction(0))
        if weight == 0:
            shares = {h: Fraction(room * sizes[h], sum(sizes[k] for k in open_)) for h in open_}
        else:
            shares = {h: room * weights[h] / weight for h in open_}
        over = [h for h in open_ if shares[h] >= sizes[h]]
        if not over:
            break
        full.update(over)
    rounded = largest_remainders([shares[h] for h in open_], room)
    result = [sizes[h] for h in range(len(sizes))]
    for h, n in zip(open_, rounded, strict=True):
        result[h] = n
    return result


def _label_sql(table: PopulationTable, plan: StrataPlan) -> tuple[str, list[object], list[str]]:
    """The SQL label of each record, its parameters, and the labels of the bands."""
    if plan.column is not None:
        if plan.column not in table.columns:
            raise InvalidInput(
                f"{FIELD}.column",
                f"no column {plan.column!r} in the file; its columns are "
                f"{', '.join(table.columns)}",
            )
        return f"coalesce({quoted(plan.column)}, '')", [], []
    bounds = list(plan.bands)
    if any(b >= c for b, c in itertools.pairwise(bounds)):
        raise InvalidInput(f"{FIELD}.bands", "bands must be ascending and distinct")
    texts = ["-inf", *(str(b) for b in bounds), "inf"]
    labels = [f"[{low}, {high})" for low, high in itertools.pairwise(texts)]
    cases = " ".join(
        f"WHEN {AMOUNT} < CAST(? AS {DECIMAL_TYPE}) THEN ?" for _ in bounds
    )
    parameters: list[object] = []
    for bound, label in zip(bounds, labels, strict=False):
        parameters += [bound, label]
    parameters.append(labels[-1])
    return f"CASE {cases} ELSE ? END", parameters, labels


def select_stratified(
    table: PopulationTable,
    plan: StrataPlan,
    seed: str | None,
    method: str,
    *,
    max_items: int,
) -> StratifiedSelection:
    """Select from each stratum of the file's population (module docstring)."""
    con = table.con
    if (plan.column is None) == (not plan.bands):
        raise InvalidInput(FIELD, "give either column or bands, not both or neither")
    if (plan.sizes is None) == (plan.sample_size is None):
        raise InvalidInput(FIELD, "give either sizes or sample_size, not both or neither")
    needs_amounts = bool(plan.bands) or plan.top_threshold is not None or (
        plan.sizes is None and plan.allocation == "neyman"
    )
    if needs_amounts and table.description.amount_column is None:
        raise InvalidInput(
            "population.file.amount_column", "amount bands, a top stratum and Neyman "
            "allocation need an amount column"
        )
    if plan.allocation not in ALLOCATIONS:
        raise InvalidInput(f"{FIELD}.allocation", f"must be one of {', '.join(ALLOCATIONS)}")
    if needs_amounts:
        blank = con.execute(f"SELECT count(*) FROM kept WHERE {AMOUNT} IS NULL").fetchone()  # nosec B608
        if blank and blank[0]:
            raise InvalidInput(
                "population.file.amount_column",
                f"{blank[0]:,} records of the population have no amount; strata by amount "
                "need one on every record",
            )
    label, parameters, band_labels = _label_sql(table, plan)
    if plan.top_threshold is not None:
        label = f"CASE WHEN {AMOUNT} >= CAST(? AS {DECIMAL_TYPE}) THEN '{TOP}' ELSE {label} END"
        parameters = [plan.top_threshold, *parameters]
    con.execute(
        f"CREATE OR REPLACE TABLE stratified AS SELECT kept.*, {label} AS stratum "  # nosec B608
        "FROM kept JOIN source USING (__record__)",
        parameters,
    )
    found = con.execute(
        f"SELECT stratum, count(*), sum({AMOUNT}), stddev_samp({AMOUNT}) FROM stratified "  # nosec B608
        "GROUP BY stratum"
    ).fetchall()
    facts = {str(s): (int(n), total, sd) for s, n, total, sd in found}
    order = band_labels or sorted(
        (s for s in facts if s != TOP or plan.column is not None),
        key=lambda s: s.encode("utf-8"),
    )
    labels = [s for s in order if s in facts and not (s == TOP and plan.top_threshold)]
    top = TOP in facts and plan.top_threshold is not None
    sizes = [facts[s][0] for s in labels]
    if plan.sizes is not None:
        unknown = sorted(set(plan.sizes) - set(labels))
        if unknown:
            raise InvalidInput(
                f"{FIELD}.sizes",
                f"no stratum {', '.join(map(repr, unknown))}; the strata are "
                f"{', '.join(map(repr, labels))}",
            )
        wanted = [int(plan.sizes.get(s, 0)) for s in labels]
        for s, n, size in zip(labels, wanted, sizes, strict=True):
            if n > size:
                raise InvalidInput(
                    f"{FIELD}.sizes", f"{n} from stratum {s!r}, which holds {size:,} records"
                )
        allocation = None
    else:
        total_size = int(plan.sample_size or 0)  # given: checked above
        if plan.allocation == "neyman":
            weights = [
                Fraction(facts[s][0]) * Fraction(facts[s][2] or 0) for s in labels
            ]
        else:
            weights = [Fraction(size) for size in sizes]
        wanted = allocate(sizes, weights, total_size)
        allocation = plan.allocation
    seed = generate_seed() if seed is None else seed
    chosen: list[StratumSelection] = []
    plan_of = [*zip(labels, wanted, strict=True)] + ([(TOP, facts[TOP][0])] if top else [])
    for s, n in plan_of:
        size, total, sd = facts[s]
        derived = stratum_seed(seed, s)
        selection = None
        if n:
            con.execute("CREATE OR REPLACE TABLE stratum_now AS SELECT * FROM stratified "
                        "WHERE stratum = ?", [s])
            # The top stratum is taken in full: its draw order is a random order of it.
            selection = select_from_file(
                table, n, derived, method if s != TOP else "random",
                max_items=max_items, source="stratum_now",
            )
        chosen.append(
            StratumSelection(
                label=s,
                population_size=size,
                total=None if total is None else Decimal(total).quantize(
                    Decimal(1).scaleb(-table.places)),
                standard_deviation=None if sd is None else float(sd),
                sample_size=n,
                seed=derived,
                taken_in_full=s == TOP or n == size,
                selection=selection,
            )
        )
    return StratifiedSelection(
        strata=tuple(chosen),
        seed=seed,
        method=method,
        allocation=allocation,
        sample_size=sum(s.sample_size for s in chosen),
    )
