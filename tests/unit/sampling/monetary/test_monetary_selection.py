"""Selection of currency units: the specification re-performed independently."""

from __future__ import annotations

import hashlib
import hmac
import json
import struct
from fractions import Fraction
from pathlib import Path

import pytest

from service.sampling.errors import InvalidInput
from service.sampling.monetary.amounts import to_units
from service.sampling.monetary.selection import (
    ALGORITHM_ID,
    select_units,
    split_significant,
)

ROOT = Path(__file__).resolve().parents[4]

# A fictional ledger of receivables (Kestrel Valley Foods Ltd), amounts in cents.
LEDGER = (
    ("KV-1001", 1_250_000),
    ("KV-1002", 48_000),
    ("KV-1003", 312_550),
    ("KV-1004", 9_990),
    ("KV-1005", 77_025),
    ("KV-1006", 0),
    ("KV-1007", -15_000),
    ("KV-1008", 204_400),
    ("KV-1009", 5_600_000),
    ("KV-1010", 133_300),
)


def words(seed: str):  # type: ignore[no-untyped-def]
    """The keyed stream, written out from the specification (HMAC-SHA256 counter, RFC 2104)."""
    block = 0
    while True:
        digest = hmac.new(seed.encode(), block.to_bytes(8, "big"), hashlib.sha256).digest()
        yield from struct.unpack(">4Q", digest)
        block += 1


def uniform(stream, m: int) -> int:  # type: ignore[no-untyped-def]
    limit = 2**64 - 2**64 % m
    for x in stream:
        if x < limit:
            return int(x % m)
    raise AssertionError


def rest_of(ledger: tuple[tuple[str, int], ...], n: int) -> tuple[list[tuple[str, int]], int]:
    positive = sorted(item for item in ledger if item[1] > 0)
    _, rest, left = split_significant(positive, n)
    return rest, left


def owner(rest: list[tuple[str, int]], unit: int) -> str:
    cumulative = 0
    for identifier, amount in rest:
        cumulative += amount
        if unit < cumulative:
            return identifier
    raise AssertionError


@pytest.mark.parametrize("method", ["fixed_interval", "cell", "random_units"])
def test_selection_follows_the_specification(method: str) -> None:
    n, seed = 6, "kestrel-2026-ar"
    chosen = select_units(LEDGER, n, seed=seed, method=method)
    rest, left = rest_of(LEDGER, n)
    total = sum(amount for _, amount in rest)
    stream = words(seed)
    if method == "fixed_interval":
        r = uniform(stream, total)
        units = [(r + k * total) // left for k in range(left)]
    elif method == "cell":
        units = [(k * total + uniform(stream, total)) // left for k in range(left)]
    else:
        units = sorted(uniform(stream, total) for _ in range(left))
    expected: dict[str, list[int]] = {}
    for unit in units:
        expected.setdefault(owner(rest, unit), []).append(unit + 1)
    assert {item.id: list(item.units) for item in chosen.items} == expected
    assert chosen.algorithm == ALGORITHM_ID
    assert chosen.units_drawn == left


def test_significant_items_are_taken_in_full_and_the_interval_recomputed() -> None:
    chosen = select_units(LEDGER, 6, seed="s")
    # By hand (units): the positive total is 7,635,265; round 1: J = 7,635,265 / 6 takes
    # KV-1009 only; round 2: J = (total - 5,600,000) / 5 takes
    # KV-1001; round 3: J = (rest) / 4 takes KV-1003 and KV-1008; round 4: J = 268,315 / 2
    # = 134,157.5 takes nothing (KV-1010 is 133,300).
    total = sum(a for _, a in LEDGER if a > 0)
    assert total == 7_635_265
    assert [i for i, _ in chosen.individually_significant] == [
        "KV-1009",
        "KV-1001",
        "KV-1003",
        "KV-1008",
    ]
    assert chosen.sampling_interval == Fraction(268_315, 2)
    assert chosen.units_drawn == 2
    assert all(amount < chosen.sampling_interval for _, amount in rest_of(LEDGER, 6)[0])


def test_zero_and_negative_amounts_are_excluded_and_reported() -> None:
    chosen = select_units(LEDGER, 4, seed="s")
    assert (chosen.excluded_count, chosen.excluded_total) == (2, -15_000)
    assert any("zero or negative" in w and "-150.00" in w for w in chosen.warnings)
    assert "KV-1006" not in {item.id for item in chosen.items}


@pytest.mark.parametrize("method", ["fixed_interval", "cell"])
def test_one_hit_in_each_interval(method: str) -> None:
    ledger = tuple((f"D{i:03d}", 1_000 + 37 * i) for i in range(200))
    chosen = select_units(ledger, 25, seed="cells", method=method)
    interval = chosen.sampling_interval
    hits = sorted(u - 1 for item in chosen.items for u in item.units)
    assert [int(Fraction(h) // interval) for h in hits] == list(range(25))


def test_the_selection_is_re_performable_and_order_free() -> None:
    first = select_units(LEDGER, 5, seed="again", method="cell")
    again = select_units(tuple(reversed(LEDGER)), 5, seed="again", method="cell")
    other = select_units(LEDGER, 5, seed="other", method="cell")
    assert first == again
    assert first.population_fingerprint == other.population_fingerprint
    assert first.selection_fingerprint != other.selection_fingerprint


def test_fingerprint_follows_the_specification() -> None:
    ordered = sorted(LEDGER)
    data = b"monetary-items\x00" + len(ordered).to_bytes(8, "big") + b"2\x00"
    data += b"".join(i.encode() + b"\x00" + str(a).encode() + b"\x00" for i, a in ordered)
    chosen = select_units(LEDGER, 3, seed="fp")
    assert chosen.population_fingerprint == hashlib.sha256(data).hexdigest()
    payload = (
        b"monetary-selection\x00"
        + ALGORITHM_ID.encode()
        + b"\x00"
        + hashlib.sha256(data).digest()
        + b"fixed_interval\x00"
        + (3).to_bytes(8, "big")
        + (2).to_bytes(8, "big")
        + b"fp"
    )
    assert chosen.selection_fingerprint == hashlib.sha256(payload).hexdigest()


@pytest.mark.parametrize(
    ("population", "n", "field"),
    [
        ((), 3, "population"),
        ((("A", 5), ("A", 7)), 1, "population"),
        ((("", 5),), 1, "population[0].id"),
        ((("A", 0), ("B", -1)), 1, "population"),
        ((("A", 5),), 0, "sample_size"),
    ],
)
def test_bad_populations_name_the_field(
    population: tuple[tuple[str, int], ...], n: int, field: str
) -> None:
    with pytest.raises(InvalidInput) as caught:
        select_units(population, n, seed="x")
    assert caught.value.field == field


def test_unknown_method_is_refused() -> None:
    with pytest.raises(InvalidInput, match="method"):
        select_units(LEDGER, 3, seed="x", method="systematic")


def test_the_published_test_vector() -> None:
    # README, "Test vector (monetary selection)": re-performed here from the written
    # specification with hmac and hashlib alone (words, uniform, owner above).
    example = json.loads((ROOT / "examples" / "kestrel-receivables.json").read_text())
    population = tuple(
        (item["id"], to_units(item["amount"], "amount")) for item in example["population"]
    )
    seed, n = example["seed"], example["sample_size"]
    rest, left = rest_of(population, n)
    total = sum(amount for _, amount in rest)
    r = uniform(words(seed), total)
    units = [(r + k * total) // left for k in range(left)]
    assert [u + 1 for u in units] == [265004, 1683064, 3101123, 4519183, 5937243]
    assert [owner(rest, u) for u in units] == [
        "KV-0003", "KV-0005", "KV-0014", "KV-0017", "KV-0020"]
    chosen = select_units(population, n, seed=seed, method=example["method"])
    assert [(i.id, i.units) for i in chosen.items] == [
        (owner(rest, u), (u + 1,)) for u in units]
    assert [i for i, _ in chosen.individually_significant] == ["KV-0009", "KV-0001", "KV-0012"]
    assert chosen.population_fingerprint == (
        "a6aa372d4cc51cb6ceef9172240bccf15c217d71ecbeddf8ec99ab5d580e17b1")
    assert chosen.selection_fingerprint == (
        "d1cd7d4483dd7f385157708c6d5eb64bb3592b430d5b9d9e471b8f882bbd6654")
