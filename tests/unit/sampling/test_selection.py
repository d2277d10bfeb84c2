"""Tests for the reproducible selection of sample items.

The scenarios are invented: Fictional Co's 2026 third-quarter disbursements (numbered 1..4200),
Harrow Lane Supplies' sales invoices 10001-10500 and 20001-20350 with voided numbers, and
Quillbrook Ltd's purchase orders.
"""

from __future__ import annotations

import doctest
import hashlib
import hmac
import math
import random
import re
import tracemalloc
from bisect import bisect_left
from collections import Counter
from collections.abc import Iterator, Sequence
from fractions import Fraction
from itertools import islice, pairwise
from typing import Any

import pytest
from scipy import stats

from service.sampling import selection as selection_module
from service.sampling.errors import ComputationTooLarge, InvalidInput, SamplingError
from service.sampling.selection import (
    ALGORITHM_ID,
    ALGORITHM_VERSION,
    MAX_NUMBER,
    MAX_SEED_LENGTH,
    ItemPopulation,
    NumberedPopulation,
    Population,
    RangePopulation,
    generate_seed,
    select,
)
from service.sampling.selection import order as selection_order

# --------------------------------------------------------------------------- reference
# A straightforward re-implementation of the written specification (Notes of ``select``),
# using hmac/hashlib directly and a fully materialised population and arrangement. It shares
# no code with the module.


def ref_words(seed: str) -> Iterator[int]:
    """Block j = HMAC-SHA256(UTF-8 seed, j as 8 bytes big-endian); four big-endian words each."""
    key = seed.encode("utf-8")
    counter = 0
    while True:
        block = hmac.new(key, counter.to_bytes(8, "big"), hashlib.sha256).digest()
        for t in range(4):
            yield int.from_bytes(block[8 * t : 8 * t + 8], "big")
        counter += 1


def ref_uniform(words: Iterator[int], m: int) -> int:
    """Reject words >= the largest multiple of m not above 2**64, then reduce mod m."""
    limit = 2**64 - (2**64 % m)
    while True:
        x = next(words)
        if x < limit:
            return x % m


def ref_random(canonical: Sequence[Any], n: int, seed: str) -> list[Any]:
    """Draw i swaps arrangement[i] with arrangement[i + uniform(N - i)] and takes arrangement[i]."""
    arrangement = list(range(len(canonical)))
    words = ref_words(seed)
    out = []
    for i in range(n):
        j = i + ref_uniform(words, len(canonical) - i)
        arrangement[i], arrangement[j] = arrangement[j], arrangement[i]
        out.append(canonical[arrangement[i]])
    return out


def ref_systematic(canonical: Sequence[Any], n: int, seed: str) -> tuple[int, list[Any]]:
    """r = uniform(N); selection k is canonical[floor((r + k*N) / n)]."""
    size = len(canonical)
    r = ref_uniform(ref_words(seed), size)
    return r, [canonical[(r + k * size) // n] for k in range(n)]


def u64(x: int) -> bytes:
    return x.to_bytes(8, "big")


# --------------------------------------------------------------------------- scenarios

FICTIONAL_SEED = "fictional-co-2026-q3"

HARROW_RANGES = ((20001, 20350), (10001, 10500))  # given out of order on purpose
HARROW_VOIDED = (10017, 10233, 20100, 20101, 10500)
HARROW_SEED = "harrow-lane-ap-2026-h1"
HARROW_NUMBERS = sorted(
    x for first, last in HARROW_RANGES for x in range(first, last + 1) if x not in HARROW_VOIDED
)

QUILLBROOK_ORDERS = (
    *(f"PO-2026-{k:04d}" for k in range(1, 41)),
    "ÉCH-0001",
    "ÉCH-0002",
    "Ω-0003",
    "\U0001f4c4-0004",
    "po-2026-0001",
    "\uffff-0005",
)
QUILLBROOK_SEED = "quillbrook-po-2026"
# RFC 3629, section 1: byte-wise sorting of UTF-8 strings gives the same order as sorting by
# code point, so sorting by the encoded bytes is an independent statement of the canonical order.
QUILLBROOK_CANONICAL = sorted(QUILLBROOK_ORDERS, key=lambda s: s.encode("utf-8"))


# --------------------------------------------------------------------------- (1) vectors
# The literals below were computed once with the reference implementation above. If any of
# them ever changes, the selections of earlier engagements can no longer be re-performed:
# ALGORITHM_VERSION must change along with it.


def test_algorithm_identifier_names_the_version() -> None:
    assert ALGORITHM_VERSION == 1
    assert ALGORITHM_ID == "sha256-counter-fisher-yates/v1"


def test_vector_numbered_random() -> None:
    pinned = [2750, 608, 188, 3072, 3793, 2360, 3089, 3710, 1779, 3183]
    reference = ref_random(range(1, 4201), 60, FICTIONAL_SEED)[:10]
    result = select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED)
    assert list(result.items[:10]) == reference == pinned
    assert list(result.positions[:10]) == pinned  # item p sits at position p


def test_vector_ranges_with_voided_numbers() -> None:
    pinned = [20081, 10131, 10284, 10157, 20223, 10084, 20196, 10159, 10429, 20112]
    reference = ref_random(HARROW_NUMBERS, 25, HARROW_SEED)[:10]
    result = select(RangePopulation(HARROW_RANGES, HARROW_VOIDED), 25, seed=HARROW_SEED)
    assert list(result.items[:10]) == reference == pinned
    assert [HARROW_NUMBERS[p - 1] for p in result.positions] == list(result.items)


def test_vector_identifiers() -> None:
    pinned = [
        "Ω-0003",
        "PO-2026-0014",
        "PO-2026-0024",
        "PO-2026-0039",
        "PO-2026-0038",
        "PO-2026-0004",
        "PO-2026-0009",
        "PO-2026-0007",
        "po-2026-0001",
        "PO-2026-0034",
    ]
    pinned_positions = [44, 14, 24, 39, 38, 4, 9, 7, 41, 34]
    reference = ref_random(QUILLBROOK_CANONICAL, 20, QUILLBROOK_SEED)[:10]
    result = select(ItemPopulation(QUILLBROOK_ORDERS), 20, seed=QUILLBROOK_SEED)
    assert list(result.items[:10]) == reference == pinned
    assert list(result.positions[:10]) == pinned_positions
    assert [QUILLBROOK_CANONICAL[p - 1] for p in pinned_positions] == pinned


def test_vector_systematic() -> None:
    pinned_start, pinned = 976, [17, 87, 157, 227, 297, 367, 437, 507, 577, 647]
    r, reference = ref_systematic(range(1, 4202), 60, "fictional-co-2026-q3-sys")
    result = select(
        NumberedPopulation(4201), 60, seed="fictional-co-2026-q3-sys", method="systematic"
    )
    assert r == pinned_start
    assert result.start_exact == f"{pinned_start}/60"
    assert result.interval_exact == "4201/60"
    assert list(result.items[:10]) == reference[:10] == pinned
    assert list(result.items) == reference


def test_words_at_or_above_the_last_multiple_are_rejected() -> None:
    # For m = 2**52 + 1, 2**64 mod m = m - 4096, so about one word in 4096 is rejected. This
    # seed was found by trying numbered seeds until the first word of the stream fell in the
    # rejected band; both methods must then skip it and use the second word.
    size, seed = 2**52 + 1, "fictional-co-rejection-1598"
    first_block = hmac.new(seed.encode(), u64(0), hashlib.sha256).digest()
    first_word, second_word = (int.from_bytes(first_block[k : k + 8], "big") for k in (0, 8))
    assert first_word >= 2**64 - 2**64 % size > second_word
    random_pick = select(NumberedPopulation(size), 1, seed=seed)
    systematic = select(NumberedPopulation(size), 1, seed=seed, method="systematic")
    assert random_pick.items == (second_word % size + 1,)
    assert systematic.start_exact == f"{second_word % size}/1"


def test_fingerprints_follow_the_written_byte_layout() -> None:
    # Built by hand from the specification with hashlib (SHA-256, FIPS 180-4).
    population = hashlib.sha256(b"numbered\x00" + u64(4200)).digest()
    seed = FICTIONAL_SEED.encode("utf-8")
    selection = hashlib.sha256(
        b"selection\x00"
        + b"sha256-counter-fisher-yates/v1\x00"
        + population
        + b"random\x00"
        + u64(60)
        + u64(len(seed))
        + seed
    ).hexdigest()
    result = select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED)
    assert result.population_fingerprint == population.hex()
    assert result.selection_fingerprint == selection
    # pinned once; a change here is a change of the algorithm version
    assert selection == "784ca6f6727c456f17a90134d2323c6473b04b9343dc6c03fc5bd5ae506d6984"


def test_range_fingerprint_is_over_the_runs_of_included_numbers() -> None:
    # Included: 10001-10016, 10018-10232, 10234-10499, 20001-20099, 20102-20350.
    runs = [(10001, 10016), (10018, 10232), (10234, 10499), (20001, 20099), (20102, 20350)]
    expected = hashlib.sha256(
        b"ranges\x00" + u64(len(runs)) + b"".join(u64(a) + u64(b) for a, b in runs)
    ).hexdigest()
    result = select(RangePopulation(HARROW_RANGES, HARROW_VOIDED), 1, seed=HARROW_SEED)
    assert result.population_fingerprint == expected
    assert result.population_size == len(HARROW_NUMBERS) == 845


def test_item_fingerprint_is_over_the_canonical_identifiers() -> None:
    body = b"".join(s.encode("utf-8") + b"\x00" for s in QUILLBROOK_CANONICAL)
    expected = hashlib.sha256(b"items\x00" + u64(len(QUILLBROOK_CANONICAL)) + body).hexdigest()
    result = select(ItemPopulation(QUILLBROOK_ORDERS), 1, seed=QUILLBROOK_SEED)
    assert result.population_fingerprint == expected


def test_same_set_of_numbers_gives_the_same_fingerprint_and_selection() -> None:
    merged = select(RangePopulation(((1, 1000),), (500,)), 30, seed="harrow-lane-merge")
    split = select(RangePopulation(((501, 1000), (1, 499)), ()), 30, seed="harrow-lane-merge")
    adjacent = select(
        RangePopulation(((1, 250), (251, 1000)), (500,)), 30, seed="harrow-lane-merge"
    )
    assert merged == split == adjacent


def test_selection_fingerprint_changes_with_each_input() -> None:
    base = select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED)
    variants = [
        select(NumberedPopulation(4201), 60, seed=FICTIONAL_SEED),
        select(NumberedPopulation(4200), 61, seed=FICTIONAL_SEED),
        select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED + "x"),
        select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED, method="systematic"),
    ]
    fingerprints = {base.selection_fingerprint} | {v.selection_fingerprint for v in variants}
    assert len(fingerprints) == 5


def test_same_request_gives_the_same_selection() -> None:
    population = RangePopulation(HARROW_RANGES, HARROW_VOIDED)
    assert select(population, 40, seed=HARROW_SEED) == select(population, 40, seed=HARROW_SEED)
    assert select(population, 40, seed=HARROW_SEED) != select(population, 40, seed="other")


def test_docstring_examples_run() -> None:
    outcome = doctest.testmod(selection_module, raise_on_error=False)
    assert outcome.attempted > 0
    assert outcome.failed == 0


# --------------------------------------------------------------------------- (2) extension


@pytest.mark.parametrize(
    ("population", "n", "m"),
    [
        (NumberedPopulation(4200), 60, 15),
        (NumberedPopulation(7), 3, 4),  # extended to the whole population
        (NumberedPopulation(10**9), 200, 300),
        (RangePopulation(HARROW_RANGES, HARROW_VOIDED), 25, 10),
        (ItemPopulation(QUILLBROOK_ORDERS), 20, 26),
    ],
)
def test_extension_starts_with_the_original_draw(population: Population, n: int, m: int) -> None:
    for seed in ("fictional-co-ext-1", "fictional-co-ext-2", FICTIONAL_SEED):
        first = select(population, n, seed=seed)
        extended = select(population, n + m, seed=seed)
        assert extended.items[:n] == first.items
        assert extended.positions[:n] == first.positions
        assert len(set(extended.items)) == n + m


# --------------------------------------------------------------------------- (3) order


def test_identifier_order_does_not_matter() -> None:
    rng = random.Random(20260930)
    expected = select(ItemPopulation(QUILLBROOK_ORDERS), 20, seed=QUILLBROOK_SEED)
    for _ in range(5):
        shuffled = list(QUILLBROOK_ORDERS)
        rng.shuffle(shuffled)
        assert select(ItemPopulation(tuple(shuffled)), 20, seed=QUILLBROOK_SEED) == expected
    assert select(ItemPopulation(list(QUILLBROOK_ORDERS)), 20, seed=QUILLBROOK_SEED) == expected


def test_canonical_order_is_code_point_order() -> None:
    items = ("b", "a", "Z", "é", "\U0001f600", "\uffff", "ab", "A", "\u00e9t")
    everything = select(ItemPopulation(items), len(items), seed="quillbrook-order")
    by_position = [
        item for _, item in sorted(zip(everything.positions, everything.items, strict=True))
    ]
    # RFC 3629, section 1: UTF-8 byte order equals code point order.
    assert by_position == sorted(items, key=lambda s: s.encode("utf-8"))
    # UTF-16 code unit order differs for this set (U+1F600 is a surrogate pair below U+FFFF),
    # so the check above does tell the two orders apart.
    assert by_position != sorted(items, key=lambda s: s.encode("utf-16-be"))


def test_range_order_does_not_matter() -> None:
    forward = select(
        RangePopulation(((10001, 10500), (20001, 20350)), HARROW_VOIDED), 25, seed=HARROW_SEED
    )
    backward = select(
        RangePopulation(HARROW_RANGES, tuple(reversed(HARROW_VOIDED))), 25, seed=HARROW_SEED
    )
    assert forward == backward


# --------------------------------------------------------------------------- (4) uniformity

UNIFORM_N, UNIFORM_n, UNIFORM_SEEDS = 20, 5, 4000


def _random_inclusions() -> list[tuple[int, ...]]:
    population = NumberedPopulation(UNIFORM_N)
    return [
        tuple(select(population, UNIFORM_n, seed=f"uniformity-{s}").items)
        for s in range(UNIFORM_SEEDS)
    ]


def _corrected_chi_square_p(counts: Sequence[int], size: int, n: int) -> float:
    """p-value of Pearson's statistic for inclusion counts under simple random sampling.

    For samples of n drawn without replacement from N, pi_k = n/N and pi_kl = n(n-1)/(N(N-1))
    (Särndal, Swensson and Wretman, Model Assisted Survey Sampling, 1992, section 3.3). The
    inclusion counts then have the multinomial covariance multiplied by (N - n)/(N - 1), so
    Pearson's statistic divided by that factor is asymptotically chi-square with N - 1
    degrees of freedom.
    """
    statistic = stats.chisquare(counts).statistic
    return float(stats.chi2.sf(statistic / ((size - n) / (size - 1)), size - 1))


def test_inclusion_counts_are_uniform() -> None:
    samples = _random_inclusions()
    counts = Counter(item for sample in samples for item in sample)
    observed = [counts[k] for k in range(1, UNIFORM_N + 1)]
    # Threshold: a one-in-a-thousand false alarm rate; the seeds are fixed, so the outcome is
    # deterministic. The uncorrected test is conservative and must pass as well.
    assert _corrected_chi_square_p(observed, UNIFORM_N, UNIFORM_n) > 0.001
    assert stats.chisquare(observed).pvalue > 0.001
    assert all(len(set(sample)) == UNIFORM_n for sample in samples)


def test_uniformity_check_detects_the_swap_with_any_position_error() -> None:
    # The well-known shuffling error: draw i swaps with a position drawn from all of [0, N)
    # instead of [i, N). Same stream, same seeds; the check above must reject it.
    counts: Counter[int] = Counter()
    for s in range(UNIFORM_SEEDS):
        words = ref_words(f"uniformity-{s}")
        arrangement = list(range(1, UNIFORM_N + 1))
        for i in range(UNIFORM_n):
            j = ref_uniform(words, UNIFORM_N)
            arrangement[i], arrangement[j] = arrangement[j], arrangement[i]
        counts.update(arrangement[:UNIFORM_n])
    observed = [counts[k] for k in range(1, UNIFORM_N + 1)]
    assert _corrected_chi_square_p(observed, UNIFORM_N, UNIFORM_n) < 0.001


def test_pairwise_joint_inclusion_matches_simple_random_sampling() -> None:
    samples = [set(sample) for sample in _random_inclusions()]
    # pi_kl = n(n-1)/(N(N-1)) (Särndal, Swensson and Wretman 1992, section 3.3) = 20/380.
    expected = UNIFORM_n * (UNIFORM_n - 1) / (UNIFORM_N * (UNIFORM_N - 1))
    # The frequency over S independent seeds is binomial: standard error sqrt(pi(1-pi)/S),
    # about 0.0035 here. Four standard errors leave a two-sided false alarm chance of about
    # 6e-5 per pair.
    tolerance = 4 * math.sqrt(expected * (1 - expected) / UNIFORM_SEEDS)
    for a, b in [(1, 2), (1, 20), (8, 14), (19, 20), (5, 6)]:
        frequency = sum(1 for sample in samples if a in sample and b in sample) / UNIFORM_SEEDS
        assert abs(frequency - expected) < tolerance, (a, b, frequency)


def test_systematic_inclusion_frequency_is_n_over_size() -> None:
    size, n, seeds = 23, 5, 3000
    counts: Counter[int] = Counter()
    for s in range(seeds):
        result = select(NumberedPopulation(size), n, seed=f"sys-{s}", method="systematic")
        counts.update(result.items)
    p = n / size
    # Each item's count over independent seeds is binomial(seeds, n/N); four standard errors.
    tolerance = 4 * math.sqrt(seeds * p * (1 - p))
    assert all(abs(counts[k] - seeds * p) < tolerance for k in range(1, size + 1)), counts


# --------------------------------------------------------------------------- (5) systematic


@pytest.mark.parametrize(
    ("size", "n"),
    [(4200, 60), (4201, 60), (4259, 60), (100, 7), (10, 10), (13, 1), (10**12, 1000), (999, 998)],
)
def test_systematic_covers_the_population_evenly(size: int, n: int) -> None:
    for seed in ("fictional-co-sys-a", "fictional-co-sys-b", "fictional-co-sys-c"):
        result = select(NumberedPopulation(size), n, seed=seed, method="systematic")
        interval = Fraction(result.interval_exact or "")
        start = Fraction(result.start_exact or "")
        assert interval == Fraction(size, n)
        assert 0 <= start < interval
        assert result.interval == pytest.approx(float(interval))
        assert result.start == pytest.approx(float(start))
        zero_based = [p - 1 for p in result.positions]
        assert list(result.items) == list(result.positions)
        # selection k is floor(start + k * interval): one selection per block of the interval
        assert zero_based == [math.floor(start + k * interval) for k in range(n)]
        assert all(k * interval <= start + k * interval < (k + 1) * interval for k in range(n))
        assert zero_based[0] >= 0
        assert zero_based[-1] <= size - 1
        gaps = {b - a for a, b in pairwise(zero_based)}
        assert gaps <= {math.floor(interval), math.ceil(interval)}
        if interval.denominator == 1:
            assert gaps <= {int(interval)}


def test_systematic_has_no_interval_for_random() -> None:
    result = select(NumberedPopulation(4200), 60, seed=FICTIONAL_SEED)
    assert result.method == "random"
    assert (result.interval, result.interval_exact, result.start, result.start_exact) == (
        None,
        None,
        None,
        None,
    )


def test_systematic_over_identifiers_and_ranges_maps_positions() -> None:
    items = select(ItemPopulation(QUILLBROOK_ORDERS), 9, seed="q-sys", method="systematic")
    assert [QUILLBROOK_CANONICAL[p - 1] for p in items.positions] == list(items.items)
    ranges = select(
        RangePopulation(HARROW_RANGES, HARROW_VOIDED), 9, seed="h-sys", method="systematic"
    )
    assert [HARROW_NUMBERS[p - 1] for p in ranges.positions] == list(ranges.items)


# --------------------------------------------------------------------------- (6) membership


def test_whole_range_population_is_every_included_number_once() -> None:
    population = RangePopulation(HARROW_RANGES, HARROW_VOIDED)
    everything = select(population, len(HARROW_NUMBERS), seed="harrow-all")
    assert sorted(everything.items) == HARROW_NUMBERS
    assert sorted(everything.positions) == list(range(1, len(HARROW_NUMBERS) + 1))


@pytest.mark.parametrize(
    ("ranges", "exclude"),
    [
        (((1, 10),), (1, 2, 3, 10)),  # voided at both ends, consecutive voids
        (((5, 5), (7, 9)), (8,)),  # single-number range
        (((1, 3), (4, 6), (10, 12)), (3, 4, 10, 11, 12)),  # a range voided entirely
        (((0, 0), (2**53 - 3, 2**53 - 1)), (2**53 - 2,)),  # the extreme numbers
    ],
)
def test_ranges_with_exclusions_map_every_rank(
    ranges: tuple[tuple[int, int], ...], exclude: tuple[int, ...]
) -> None:
    included = sorted(
        x for first, last in ranges for x in range(first, last + 1) if x not in exclude
    )
    everything = select(RangePopulation(ranges, exclude), len(included), seed="harrow-edges")
    assert sorted(everything.items) == included
    assert [included[p - 1] for p in everything.positions] == list(everything.items)


def test_large_range_population_never_returns_a_voided_number() -> None:
    rng = random.Random(2026)
    ranks = rng.sample(range(2_000_000), 10_000)
    voided = tuple(r + 1 if r < 1_000_000 else r + 1_000_001 for r in ranks)
    population = RangePopulation(((2_000_001, 3_000_000), (1, 1_000_000)), voided)
    result = select(population, 5000, seed="harrow-lane-bulk")
    assert result.population_size == 2_000_000 - 10_000
    assert not set(voided).intersection(result.items)
    assert len(set(result.items)) == 5000
    assert all(1 <= x <= 1_000_000 or 2_000_001 <= x <= 3_000_000 for x in result.items)
    # position p holds the p-th included number: x less the gap and the voided numbers below x
    ordered = sorted(voided)
    for x, p in zip(result.items, result.positions, strict=True):
        gap = 1_000_000 if x > 2_000_000 else 0
        assert p == x - gap - bisect_left(ordered, x)


def test_numbered_population_of_a_trillion_is_not_materialised() -> None:
    result = select(NumberedPopulation(10**12), 1000, seed="fictional-co-ledger")
    assert len(set(result.items)) == 1000
    assert all(1 <= x <= 10**12 for x in result.items)
    assert max(result.items) > 10**11  # spread over the population, not the first few


def test_memory_grows_with_the_sample_not_the_population() -> None:
    # A list of ten million positions alone would take about 80 MB.
    tracemalloc.start()
    try:
        select(NumberedPopulation(10_000_000), 1000, seed="fictional-co-memory")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 2_000_000


def test_whole_numbered_population_is_a_permutation() -> None:
    result = select(NumberedPopulation(500), 500, seed="fictional-co-all")
    assert sorted(result.items) == list(range(1, 501))


def test_generated_seed() -> None:
    seed = generate_seed()
    assert re.fullmatch(r"[0-9a-f]{32}", seed)
    assert generate_seed() != seed
    result = select(NumberedPopulation(4200), 10)
    assert re.fullmatch(r"[0-9a-f]{32}", result.seed)
    assert select(NumberedPopulation(4200), 10, seed=result.seed) == result


def test_seed_limits_and_unicode_are_accepted() -> None:
    longest = "ä" * MAX_SEED_LENGTH  # the limit counts characters, not bytes
    assert select(NumberedPopulation(10), 3, seed=longest).seed == longest
    spaced = select(NumberedPopulation(4200), 5, seed=" " + FICTIONAL_SEED)
    assert spaced.items != select(NumberedPopulation(4200), 5, seed=FICTIONAL_SEED).items
    assert select(NumberedPopulation(MAX_NUMBER), 1, seed="x").population_size == MAX_NUMBER


# --------------------------------------------------------------------------- bad input


def _items(*values: object) -> ItemPopulation:
    return ItemPopulation(tuple(values))  # type: ignore[arg-type]


BAD_INPUTS: list[tuple[str, dict[str, Any], type[SamplingError], str, list[str]]] = [
    (
        "overlapping ranges",
        {"population": RangePopulation(((1, 100), (300, 400), (50, 60)))},
        InvalidInput,
        "population.ranges[2]",
        ["ranges[0]", "ranges[2]", "1..100", "50..60", "overlap"],
    ),
    (
        "first after last",
        {"population": RangePopulation(((1, 100), (300, 400), (500, 450)))},
        InvalidInput,
        "population.ranges[2].first",
        ["500", "450"],
    ),
    (
        "negative number",
        {"population": RangePopulation(((-1, 100),))},
        InvalidInput,
        "population.ranges[0].first",
        ["-1", str(MAX_NUMBER)],
    ),
    (
        "number above the limit",
        {"population": RangePopulation(((1, 2**53),))},
        InvalidInput,
        "population.ranges[0].last",
        [str(2**53), str(MAX_NUMBER)],
    ),
    (
        "non-integer bound",
        {"population": RangePopulation(((1, 2.5),))},  # type: ignore[arg-type]
        InvalidInput,
        "population.ranges[0].last",
        ["float"],
    ),
    (
        "range not a pair",
        {"population": RangePopulation(((1, 2, 3),))},  # type: ignore[arg-type]
        InvalidInput,
        "population.ranges[0]",
        ["pair"],
    ),
    (
        "no ranges",
        {"population": RangePopulation(())},
        InvalidInput,
        "population.ranges",
        ["at least one"],
    ),
    (
        "excluded numbers outside every range",
        {"population": RangePopulation(((1, 100), (200, 300)), (5, 150, 101, 0))},
        InvalidInput,
        "population.exclude",
        ["0", "101", "150", "outside"],
    ),
    (
        "many excluded numbers outside",
        {"population": RangePopulation(((1, 100),), tuple(range(200, 221)))},
        InvalidInput,
        "population.exclude",
        ["200, 201, 202, 203, 204 and 16 more"],
    ),
    (
        "duplicate excluded numbers",
        {"population": RangePopulation(((1, 100),), (5, 7, 5))},
        InvalidInput,
        "population.exclude",
        ["5", "more than once"],
    ),
    (
        "non-integer excluded number",
        {"population": RangePopulation(((1, 100),), (5, True))},  # bool is not a number here
        InvalidInput,
        "population.exclude[1]",
        ["bool"],
    ),
    (
        "every number excluded",
        {"population": RangePopulation(((1, 3),), (1, 2, 3))},
        InvalidInput,
        "population.exclude",
        ["empty"],
    ),
    (
        "empty numbered population",
        {"population": NumberedPopulation(0)},
        InvalidInput,
        "population.size",
        ["0", "1.."],
    ),
    (
        "numbered population above the limit",
        {"population": NumberedPopulation(MAX_NUMBER + 1)},
        InvalidInput,
        "population.size",
        [str(MAX_NUMBER + 1), str(MAX_NUMBER)],
    ),
    (
        "numbered size not an integer",
        {"population": NumberedPopulation("4200")},  # type: ignore[arg-type]
        InvalidInput,
        "population.size",
        ["str"],
    ),
    (
        "duplicate identifiers",
        {"population": _items("PO-2", "PO-1", "PO-2", "PO-3", "PO-3", "PO-2")},
        InvalidInput,
        "population.items",
        ["'PO-2'", "'PO-3'", "more than once"],
    ),
    (
        "empty identifier list",
        {"population": _items()},
        InvalidInput,
        "population.items",
        ["at least one"],
    ),
    (
        "empty identifier",
        {"population": _items("PO-1", "")},
        InvalidInput,
        "population.items[1]",
        ["empty"],
    ),
    (
        "lone surrogate",
        {"population": _items("PO-1", "PO-\ud800")},
        InvalidInput,
        "population.items[1]",
        ["UTF-8"],
    ),
    (
        "identifier not a string",
        {"population": _items("PO-1", 7)},
        InvalidInput,
        "population.items[1]",
        ["int"],
    ),
    (
        "identifiers all of another type",
        {"population": _items(3, 1, 2)},
        InvalidInput,
        "population.items[0]",
        ["int"],
    ),
    (
        "identifier with U+0000",
        {"population": _items("PO-1", "PO\x002")},
        InvalidInput,
        "population.items[1]",
        ["U+0000"],
    ),
    (
        "sample size zero",
        {"sample_size": 0},
        InvalidInput,
        "sample_size",
        ["0", "at least 1"],
    ),
    (
        "sample size above the population",
        {"sample_size": 4201},
        InvalidInput,
        "sample_size",
        ["4201", "population size 4200"],
    ),
    (
        "sample size not an integer",
        {"sample_size": 2.5},
        InvalidInput,
        "sample_size",
        ["float"],
    ),
    (
        "sample size boolean",
        {"sample_size": True},
        InvalidInput,
        "sample_size",
        ["bool"],
    ),
    ("seed not a string", {"seed": 1234}, InvalidInput, "seed", ["string", "int"]),
    ("empty seed", {"seed": ""}, InvalidInput, "seed", ["empty"]),
    (
        "seed too long",
        {"seed": "x" * (MAX_SEED_LENGTH + 1)},
        InvalidInput,
        "seed",
        ["257", "256"],
    ),
    ("seed not encodable", {"seed": "q3-\udc00"}, InvalidInput, "seed", ["UTF-8"]),
    ("unknown method", {"method": "haphazard"}, InvalidInput, "method", ["'haphazard'", "random"]),
    (
        "more identifiers than allowed",
        {"population": _items(*(f"PO-{k}" for k in range(11))), "sample_size": 2, "max_items": 10},
        ComputationTooLarge,
        "population.items",
        ["11", "10"],
    ),
    (
        "more ranges and exclusions than allowed",
        {"population": RangePopulation(((1, 100), (200, 300)), (5, 6, 7)), "max_items": 4},
        ComputationTooLarge,
        "population.ranges",
        ["4"],
    ),
    (
        "sample size above the cap",
        {"population": NumberedPopulation(10**12), "sample_size": 11, "max_items": 10},
        ComputationTooLarge,
        "sample_size",
        ["11", "10"],
    ),
]


@pytest.mark.parametrize(
    ("changes", "error", "field", "fragments"),
    [case[1:] for case in BAD_INPUTS],
    ids=[case[0] for case in BAD_INPUTS],
)
def test_bad_input_is_rejected(
    changes: dict[str, Any], error: type[SamplingError], field: str, fragments: list[str]
) -> None:
    request: dict[str, Any] = {
        "population": NumberedPopulation(4200),
        "sample_size": 3,
        "seed": FICTIONAL_SEED,
    }
    request.update(changes)
    with pytest.raises(error) as raised:
        select(**request)
    assert type(raised.value) is error
    assert raised.value.field == field
    for fragment in fragments:
        assert fragment in raised.value.message


def test_population_of_an_unknown_kind_is_a_programming_error() -> None:
    with pytest.raises(TypeError, match="population must be"):
        select(range(10), 3, seed=FICTIONAL_SEED)  # type: ignore[arg-type]


def test_overlap_names_both_ranges_by_their_request_index() -> None:
    # overlap is reported between the two ranges involved, whatever their order
    with pytest.raises(InvalidInput) as raised:
        select(RangePopulation(((50, 60), (300, 400), (1, 100))), 3, seed=FICTIONAL_SEED)
    assert raised.value.field == "population.ranges[2]"
    assert "ranges[0] (50..60)" in raised.value.message
    assert "ranges[2] (1..100)" in raised.value.message


# --------------------------------------------------------------------------- (7) list order
# The canonical order of a list is computed with numpy, eight bytes at a time after the bytes
# common to all identifiers. The reference below is Python's own sort of the UTF-8 encodings
# (RFC 3629, section 1: byte order is code point order). The lists are built to reach the
# awkward cases: identifiers that are prefixes of others, lengths on both sides of each
# multiple of eight bytes, long shared prefixes, multi-byte characters, and identifiers too
# long for the table of leading words.

ALPHABET = ("a", "b", "A", "0", "9", "-", " ", "é", "Ω", "\U0001f4c4", "\uffff", "\x01", "\x7f")


def _canonical_by_positions(items: Sequence[str]) -> list[str]:
    # A systematic sample of the whole population is every position in turn: with n = N,
    # selection k is position floor((r + k*N) / N) = k, as r < N (Notes of select, step 5).
    everything = select(
        ItemPopulation(tuple(items)), len(items), seed="quillbrook-canonical", method="systematic"
    )
    assert list(everything.positions) == list(range(1, len(items) + 1))
    return [str(item) for item in everything.items]


def _fingerprint_by_hand(items: Sequence[str]) -> str:
    ordered = sorted(items, key=lambda s: s.encode("utf-8"))
    body = b"".join(s.encode("utf-8") + b"\x00" for s in ordered)
    return hashlib.sha256(b"items\x00" + u64(len(ordered)) + body).hexdigest()


def _awkward_lists() -> Iterator[list[str]]:
    rng = random.Random(20261001)
    for _ in range(60):
        prefix = "".join(rng.choice(ALPHABET) for _ in range(rng.choice([0, 1, 7, 8, 9, 16, 23])))
        letters = ALPHABET[: rng.randint(1, len(ALPHABET))]
        size = rng.choice([2, 3, 9, 40, 200])
        items = {
            prefix + "".join(rng.choice(letters) for _ in range(rng.choice([1, 7, 8, 9, 16, 17])))
            for _ in range(size)
        }
        items |= {item[:cut] for item in list(items)[:5] for cut in (1, 8, 9) if item[:cut]}
        listed = sorted(items)
        rng.shuffle(listed)
        yield listed
    for width in (1, 2, 7, 8, 9, 15, 16, 17, 24):  # all of one length, as fixed formats are
        for prefix in ("", "QB-PO-", "Northwind Trading PO "):
            letters = ("a", "b", "A", "0", "9") if width % 2 else ("é", "Ω", "ß")  # 1 or 2 bytes
            items = {prefix + "".join(rng.choice(letters) for _ in range(width)) for _ in range(60)}
            listed = sorted(items)
            rng.shuffle(listed)
            yield listed
    for _ in range(20):  # many short identifiers and a few long ones: words beyond the table
        short = {"".join(rng.choice("ab") for _ in range(rng.randint(1, 3))) for _ in range(80)}
        stem = "Northwind Trading / purchase order / " * 3
        long = {
            stem + "".join(rng.choice("ab\u00e9") for _ in range(rng.randint(0, 12)))
            for _ in range(6)
        }
        listed = sorted(short | long)
        rng.shuffle(listed)
        yield listed


def test_list_order_is_utf8_byte_order_in_awkward_cases() -> None:
    for items in _awkward_lists():
        expected = sorted(items, key=lambda s: s.encode("utf-8"))
        assert _canonical_by_positions(items) == expected, items
        result = select(ItemPopulation(tuple(items)), 1, seed="quillbrook-fingerprint")
        assert result.population_fingerprint == _fingerprint_by_hand(items)


def test_long_list_order_and_fingerprint() -> None:
    # More identifiers than one stretch of the fingerprint (65,536), of varying length, with
    # one far longer than the rest so that one stretch is gathered byte by byte.
    rng = random.Random(20261002)
    items = [f"PO-{k}" for k in range(10_001, 80_001)] + ["PO-1" + "7" * 300]
    rng.shuffle(items)
    assert _canonical_by_positions(items) == sorted(items, key=lambda s: s.encode("utf-8"))
    result = select(ItemPopulation(tuple(items)), 3, seed="northwind-long")
    assert result.population_fingerprint == _fingerprint_by_hand(items)


def test_repeated_identifiers_are_found_in_awkward_cases() -> None:
    rng = random.Random(20261003)
    stem = "Northwind Trading / purchase order / " * 3
    for items in _awkward_lists():
        repeated = rng.sample(items, min(3, len(items) - 1)) + [stem + "twice"] * 2
        listed = items + repeated
        rng.shuffle(listed)
        with pytest.raises(InvalidInput) as raised:
            select(ItemPopulation(tuple(listed)), 1, seed="quillbrook-twice")
        named = sorted(set(repeated))
        assert raised.value.field == "population.items"
        if len(named) <= 5:
            assert raised.value.message.endswith(", ".join(map(repr, named)))


def test_identical_identifiers_only() -> None:
    with pytest.raises(InvalidInput, match="more than once: 'PO-1'"):
        select(ItemPopulation(("PO-1",) * 4), 1, seed="quillbrook-same")
    single = select(ItemPopulation(("PO-1",)), 1, seed="quillbrook-one")
    assert single.items == ("PO-1",)
    assert single.population_fingerprint == _fingerprint_by_hand(["PO-1"])


def test_list_order_without_packing(monkeypatch: pytest.MonkeyPatch) -> None:
    # Words are packed with a rank and an index into 64 bits while at least _LEAST_ROOM bits
    # remain for the word, which holds below about 16 million ties; past that the tied
    # identifiers are sorted by pairs instead. Requiring more room than 64 bits forces that way.
    monkeypatch.setattr(selection_order, "_LEAST_ROOM", 65)
    for items in islice(_awkward_lists(), 0, None, 4):
        expected = sorted(items, key=lambda s: s.encode("utf-8"))
        assert _canonical_by_positions(items) == expected, items
    with pytest.raises(InvalidInput, match="more than once: 'PO-1', 'PO-2'"):
        select(ItemPopulation(("PO-2", "PO-1", "PO-2", "PO-3", "PO-1")), 1, seed="q-twice")
