"""POST /v1/selection through the Flask test client.

The scenarios are invented: Fictional Co's 2026 third-quarter disbursements (numbered 1..4200),
Harrow Lane Supplies' sales invoices 10001-10500 and 20001-20350 with voided numbers, Quillbrook
Ltd's purchase orders, and Northwind Trading's purchase orders PO-10001 onwards.

The pinned items are the published test vectors of the selection algorithm (README, "Worked
example", and tests/unit/sampling/test_selection.py, where each is re-derived by an independent
implementation of the written specification); here they check that each form of the request
reaches the core unchanged.
"""

from __future__ import annotations

import csv
import io
import json
import math
import random
import re
from collections.abc import Iterator
from fractions import Fraction
from typing import Any

import pytest
from flask.testing import FlaskClient

from service import create_app
from service.sampling.wording import CAUTION
from service.settings import Settings

PATH = "/v1/selection"
SMALL_LIMIT = 10

FICTIONAL = {"population": {"size": 4200}, "sample_size": 60, "seed": "fictional-co-2026-q3"}
FICTIONAL_FIRST_TEN = [2750, 608, 188, 3072, 3793, 2360, 3089, 3710, 1779, 3183]
FICTIONAL_POPULATION_FINGERPRINT = (
    "fc020e5b18ef9bb7769ec9c8280fa7261cfcd54e96292962983a6e869651544f"
)
FICTIONAL_SELECTION_FINGERPRINT = "784ca6f6727c456f17a90134d2323c6473b04b9343dc6c03fc5bd5ae506d6984"

HARROW = {
    "population": {
        "ranges": [{"first": 20001, "last": 20350}, {"first": 10001, "last": 10500}],
        "exclude": [10017, 10233, 20100, 20101, 10500],
    },
    "sample_size": 25,
    "seed": "harrow-lane-ap-2026-h1",
}
HARROW_FIRST_TEN = [20081, 10131, 10284, 10157, 20223, 10084, 20196, 10159, 10429, 20112]

QUILLBROOK_ORDERS = [
    *(f"PO-2026-{k:04d}" for k in range(1, 41)),
    "ÉCH-0001",
    "ÉCH-0002",
    "Ω-0003",
    "\U0001f4c4-0004",
    "po-2026-0001",
    "\uffff-0005",
]
QUILLBROOK = {
    "population": {"items": QUILLBROOK_ORDERS},
    "sample_size": 20,
    "seed": "quillbrook-po-2026",
}
QUILLBROOK_FIRST_TEN = [
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
QUILLBROOK_FIRST_POSITIONS = [44, 14, 24, 39, 38, 4, 9, 7, 41, 34]

NORTHWIND = [f"PO-{k}" for k in range(10001, 10301)]


@pytest.fixture(scope="module")
def api() -> Iterator[FlaskClient]:
    """One application for the module: building one costs more than most of these tests."""
    yield create_app(Settings()).test_client()


@pytest.fixture(scope="module")
def small_api() -> Iterator[FlaskClient]:
    """An application that accepts at most SMALL_LIMIT listed identifiers."""
    yield create_app(Settings(max_items=SMALL_LIMIT)).test_client()


def _select(client: FlaskClient, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(PATH, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    document = json.loads(response.get_data(as_text=True))
    assert isinstance(document, dict)
    return document


def _with(body: dict[str, Any], **changes: Any) -> dict[str, Any]:
    return {**body, **changes}


# --------------------------------------------------------------------------- reproducible


@pytest.mark.parametrize(
    ("body", "first_ten", "size"),
    [(FICTIONAL, FICTIONAL_FIRST_TEN, 4200), (HARROW, HARROW_FIRST_TEN, 845)],
    ids=["numbered", "ranges"],
)
def test_published_vectors(
    api: FlaskClient, body: dict[str, Any], first_ten: list[int], size: int
) -> None:
    document = _select(api, body)
    assert document["items"][:10] == first_ten
    assert len(document["items"]) == len(document["positions"]) == body["sample_size"]
    assert document["sample_size"] == body["sample_size"]
    assert document["population_size"] == size
    assert document["seed"] == body["seed"]
    assert document["seed_generated"] is False
    assert document["method"] == "random"
    assert document["algorithm"] == "sha256-counter-fisher-yates/v1"
    assert document["warnings"] == []
    assert "sampling_interval" not in document and "start" not in document


def test_published_vector_fingerprints(api: FlaskClient) -> None:
    document = _select(api, FICTIONAL)
    assert document["population_fingerprint"] == FICTIONAL_POPULATION_FINGERPRINT
    assert document["selection_fingerprint"] == FICTIONAL_SELECTION_FINGERPRINT
    assert document["positions"][:10] == FICTIONAL_FIRST_TEN  # item p sits at position p


def test_published_identifier_vector(api: FlaskClient) -> None:
    document = _select(api, QUILLBROOK)
    assert document["items"][:10] == QUILLBROOK_FIRST_TEN
    assert document["positions"][:10] == QUILLBROOK_FIRST_POSITIONS
    # positions count in code point order (RFC 3629, section 1: the same as UTF-8 byte order)
    canonical = sorted(QUILLBROOK_ORDERS, key=lambda s: s.encode("utf-8"))
    assert [canonical[p - 1] for p in document["positions"]] == document["items"]


@pytest.mark.parametrize("body", [FICTIONAL, HARROW, QUILLBROOK], ids=["size", "ranges", "items"])
def test_same_request_same_selection(api: FlaskClient, body: dict[str, Any]) -> None:
    assert _select(api, body) == _select(api, body)
    other = _select(api, _with(body, seed=body["seed"] + "-b"))
    assert other["items"] != _select(api, body)["items"]
    assert other["population_fingerprint"] == _select(api, body)["population_fingerprint"]


# --------------------------------------------------------------------------- extension, order


@pytest.mark.parametrize(
    ("body", "more"),
    [(FICTIONAL, 15), (HARROW, 10), (QUILLBROOK, 26)],
    ids=["size", "ranges", "items"],
)
def test_larger_sample_starts_with_the_smaller(
    api: FlaskClient, body: dict[str, Any], more: int
) -> None:
    n = body["sample_size"]
    first = _select(api, body)
    extended = _select(api, _with(body, sample_size=n + more))
    assert extended["items"][:n] == first["items"]
    assert extended["positions"][:n] == first["positions"]
    assert len(set(extended["items"])) == n + more
    assert extended["population_fingerprint"] == first["population_fingerprint"]
    assert extended["selection_fingerprint"] != first["selection_fingerprint"]


def test_order_of_the_identifiers_does_not_matter(api: FlaskClient) -> None:
    expected = _select(api, QUILLBROOK)
    rng = random.Random(20260930)
    for _ in range(3):
        shuffled = QUILLBROOK_ORDERS[:]
        rng.shuffle(shuffled)
        assert shuffled != QUILLBROOK_ORDERS
        body = _with(QUILLBROOK, population={"items": shuffled})
        assert _select(api, body) == expected


def test_order_of_ranges_and_exclusions_does_not_matter(api: FlaskClient) -> None:
    population = HARROW["population"]
    reordered = {
        "ranges": list(reversed(population["ranges"])),
        "exclude": sorted(population["exclude"], reverse=True),
    }
    assert _select(api, _with(HARROW, population=reordered)) == _select(api, HARROW)


# --------------------------------------------------------------------------- seed


def test_generated_seed_is_returned_and_reusable(api: FlaskClient) -> None:
    body = {"population": {"items": NORTHWIND}, "sample_size": 12}
    first = _select(api, body)
    assert first["seed_generated"] is True
    assert re.fullmatch(r"[0-9a-f]{32}", first["seed"])
    assert any("record it" in warning for warning in first["warnings"])
    assert "generated by the service" in first["summary"]
    again = _select(api, _with(body, seed=first["seed"]))
    assert again["seed_generated"] is False
    assert again["items"] == first["items"]
    assert again["selection_fingerprint"] == first["selection_fingerprint"]
    assert _select(api, body)["seed"] != first["seed"]


def test_seed_is_used_exactly_as_given(api: FlaskClient) -> None:
    spaced = _select(api, _with(FICTIONAL, seed=" fictional-co-2026-q3"))
    assert spaced["seed"] == " fictional-co-2026-q3"
    assert spaced["items"][:10] != FICTIONAL_FIRST_TEN
    longest = _select(api, _with(FICTIONAL, seed="ä" * 256))  # the limit counts characters
    assert longest["seed"] == "ä" * 256


# --------------------------------------------------------------------------- systematic


def test_systematic_reports_interval_and_start(api: FlaskClient) -> None:
    body = {
        "population": {"size": 4201},
        "sample_size": 60,
        "seed": "fictional-co-2026-q3-sys",
        "method": "systematic",
    }
    document = _select(api, body)
    # Published vector: r = 976, so interval 4201/60 and start 976/60.
    assert document["sampling_interval_exact"] == "4201/60"
    assert document["start_exact"] == "976/60"
    assert document["sampling_interval"] == float(Fraction(4201, 60))
    assert document["start"] == float(Fraction(976, 60))
    assert document["items"][:10] == [17, 87, 157, 227, 297, 367, 437, 507, 577, 647]
    # Selection k is floor((r + k*N) / n) + 1, written out from the definition.
    assert document["items"] == [math.floor((976 + k * 4201) / 60) + 1 for k in range(60)]
    assert "4201/60" in document["summary"] and "976/60" in document["summary"]
    assert any("cannot be extended" in warning for warning in document["warnings"])


def test_systematic_over_identifiers_warns_of_the_order(api: FlaskClient) -> None:
    document = _select(api, _with(QUILLBROOK, method="systematic", sample_size=9))
    canonical = sorted(QUILLBROOK_ORDERS, key=lambda s: s.encode("utf-8"))
    assert [canonical[p - 1] for p in document["positions"]] == document["items"]
    assert document["sampling_interval_exact"] == f"{len(QUILLBROOK_ORDERS)}/9"
    assert any("code point order" in warning for warning in document["warnings"])


# --------------------------------------------------------------------------- wording


@pytest.mark.parametrize(
    ("body", "phrase"),
    [
        (FICTIONAL, "60 of 4,200 numbered items"),
        (HARROW, "25 of 845 document numbers (2 ranges less 5 excluded numbers)"),
        (QUILLBROOK, "20 of 46 listed identifiers (in Unicode code point order)"),
    ],
    ids=["size", "ranges", "items"],
)
def test_summary_states_the_selection_and_ends_with_the_caution(
    api: FlaskClient, body: dict[str, Any], phrase: str
) -> None:
    document = _select(api, body)
    summary = document["summary"]
    assert phrase in summary
    assert json.dumps(body["seed"]) in summary
    assert document["selection_fingerprint"] in summary
    assert summary.endswith(CAUTION)


def test_whole_population_is_flagged(api: FlaskClient) -> None:
    document = _select(api, {"population": {"size": 7}, "sample_size": 7, "seed": "all"})
    assert sorted(document["items"]) == list(range(1, 8))
    assert "The sample is the whole population." in document["warnings"]


# --------------------------------------------------------------------------- CSV


FORMULA_LIKE = ["=SUM(A1:A9)", "+44 20 7946", "-12", "@risk", "\tPO-1", "\rPO-2"]
AWKWARD = ['PO "quoted", with comma', "PO\nwith line break", "ÉCH-0001", "PO-10001"]


def _csv_records(text: str) -> list[list[str]]:
    """The records section of the selection CSV: its column names, then the records."""
    rows = list(csv.reader(io.StringIO(text, newline="")))
    start = rows.index(["records in draw order"]) + 1
    end = rows.index([], start)
    return rows[start:end]


def _csv_body(response: Any) -> str:
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "text/csv; charset=utf-8"
    raw = response.get_data()
    assert raw.startswith(b"\xef\xbb\xbf")  # UTF-8 byte order mark
    text = raw.decode("utf-8")[1:]
    return text


def test_csv_lists_the_same_selection(api: FlaskClient) -> None:
    response = api.post(PATH, json=FICTIONAL, headers={"Accept": "text/csv"})
    text = _csv_body(response)
    assert "Accept" in response.headers["Vary"]
    records = text.split("\r\n")
    assert records[-1] == ""  # every record, the last too, ends with CRLF
    assert all("\n" not in record and "\r" not in record for record in records)
    rows = _csv_records(text)
    assert rows[0] == ["draw", "item", "position"]
    document = _select(api, FICTIONAL)
    assert rows[1:] == [
        [str(k), str(item), str(position)]
        for k, (item, position) in enumerate(
            zip(document["items"], document["positions"], strict=True), start=1
        )
    ]


def test_csv_quotes_and_guards_against_formulas(api: FlaskClient) -> None:
    identifiers = FORMULA_LIKE + AWKWARD
    body = {"population": {"items": identifiers}, "sample_size": len(identifiers), "seed": "q"}
    text = _csv_body(api.post(PATH, json=body, headers={"Accept": "text/csv"}))
    rows = _csv_records(text)[1:]
    document = _select(api, body)
    assert [int(row[0]) for row in rows] == list(range(1, len(identifiers) + 1))
    assert [int(row[2]) for row in rows] == document["positions"]
    for (_, cell, _), item in zip(rows, document["items"], strict=True):
        if item in FORMULA_LIKE:
            assert cell == "'" + item  # a leading quote: the spreadsheet shows text
        else:
            assert cell == item  # quoting (RFC 4180) carries commas, quotes and line breaks
    assert set(document["items"]) == set(identifiers)  # the JSON keeps identifiers exactly
    assert '"PO ""quoted"", with comma"' in text


def test_json_is_the_default_and_other_types_are_refused(api: FlaskClient) -> None:
    assert api.post(PATH, json=FICTIONAL).mimetype == "application/json"
    for accept in ("*/*", "text/csv, application/json"):  # a tie goes to JSON
        assert api.post(PATH, json=FICTIONAL, headers={"Accept": accept}).mimetype == (
            "application/json"
        )
    either = api.post(PATH, json=FICTIONAL, headers={"Accept": "text/csv;q=0.5, */*;q=0.1"})
    assert either.mimetype == "text/csv"
    response = api.post(PATH, json=FICTIONAL, headers={"Accept": "text/html"})
    assert response.status_code == 406
    assert response.headers["Content-Type"] == "application/problem+json"
    detail = response.get_json()["detail"]
    assert "application/json" in detail and "text/csv" in detail


# --------------------------------------------------------------------------- bad input


def _problem(response: Any, field: str) -> list[str]:
    """The 422 problem's messages for ``field``."""
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    problem = response.get_json()
    assert problem["type"] == "/problems/invalid-input"
    assert field in problem["errors"], problem["errors"]
    assert field in problem["detail"]
    messages: list[str] = problem["errors"][field]
    return messages


ABSENT = object()  # marks a key left out of the request


def _ranges(*pairs: tuple[Any, Any]) -> list[dict[str, Any]]:
    return [{"first": first, "last": last} for first, last in pairs]


BAD_INPUTS: list[tuple[str, dict[str, Any], str, list[str]]] = [
    (
        "overlapping ranges",
        {"population": {"ranges": _ranges((1, 100), (300, 400), (50, 60))}},
        "population.ranges[2]",
        ["ranges[0] (1..100)", "ranges[2] (50..60)", "overlap"],
    ),
    (
        "first after last",
        {"population": {"ranges": _ranges((1, 100), (500, 450))}},
        "population.ranges[1].first",
        ["500", "450"],
    ),
    (
        "excluded numbers outside the ranges",
        {"population": {"ranges": _ranges((1, 100)), "exclude": [5, 150, 101]}},
        "population.exclude",
        ["101", "150", "outside"],
    ),
    (
        "every number excluded",
        {"population": {"ranges": _ranges((1, 3)), "exclude": [1, 2, 3]}},
        "population.exclude",
        ["empty"],
    ),
    (
        "excluded number listed twice",
        {"population": {"ranges": _ranges((1, 100)), "exclude": [7, 7]}},
        "population.exclude",
        ["7", "more than once"],
    ),
    (
        "excluded number not a number",
        {"population": {"ranges": _ranges((1, 100)), "exclude": [7, "8"]}},
        "population.exclude[1]",
        ["whole number", "string"],
    ),
    (
        "range bound a string",
        {"population": {"ranges": [{"first": 1, "last": 9}, {"first": "10", "last": 20}]}},
        "population.ranges[1].first",
        ["whole number", "string"],
    ),
    (
        "range bound a fraction",
        {"population": {"ranges": _ranges((1, 9.5))}},
        "population.ranges[0].last",
        ["9.5"],
    ),
    (
        "range without last",
        {"population": {"ranges": [{"first": 1}]}},
        "population.ranges[0].last",
        ["required"],
    ),
    (
        "range with an unknown key",
        {"population": {"ranges": [{"first": 1, "last": 9, "step": 2}]}},
        "population.ranges[0].step",
        ["not a field"],
    ),
    (
        "range not an object",
        {"population": {"ranges": [[1, 9]]}},
        "population.ranges[0]",
        ["object", "array"],
    ),
    (
        "negative range bound",
        {"population": {"ranges": _ranges((-1, 9))}},
        "population.ranges[0].first",
        ["-1"],
    ),
    ("no ranges", {"population": {"ranges": []}}, "population.ranges", ["at least one"]),
    ("empty identifier list", {"population": {"items": []}}, "population.items", ["at least one"]),
    ("empty numbered population", {"population": {"size": 0}}, "population.size", ["at least 1"]),
    (
        "two population forms",
        {"population": {"size": 4200, "items": ["PO-1"]}},
        "population",
        ["exactly one of size, ranges, items or file", "size and items"],
    ),
    ("no population form", {"population": {}}, "population", ["exactly one", "none"]),
    ("population missing", {"population": ABSENT}, "population", ["Missing"]),
    ("population not an object", {"population": [4200]}, "population", ["JSON object"]),
    (
        "exclude without ranges",
        {"population": {"size": 4200, "exclude": [7]}},
        "population.exclude",
        ["ranges"],
    ),
    (
        "unknown population field",
        {"population": {"size": 4200, "label": "Q3"}},
        "population.label",
        ["not a field"],
    ),
    (
        "identifier not a string",
        {"population": {"items": ["PO-1", 2, "PO-3"]}},
        "population.items[1]",
        ["must be a string", "number"],
    ),
    (
        "identifiers not a list",
        {"population": {"items": "PO-1, PO-2"}},
        "population.items",
        ["array", "string"],
    ),
    (
        "duplicate identifiers",
        {"population": {"items": ["PO-2", "PO-1", "PO-2", "PO-3", "PO-3"]}},
        "population.items",
        ["more than once", "'PO-2'", "'PO-3'"],
    ),
    (
        "empty identifier",
        {"population": {"items": ["PO-1", ""]}},
        "population.items[1]",
        ["empty"],
    ),
    (
        "identifier with U+0000",
        {"population": {"items": ["PO-1", "PO\u00002"]}},
        "population.items[1]",
        ["U+0000"],
    ),
    (
        "identifier with a lone surrogate",
        {"population": {"items": ["PO-1", "PO-\ud800"]}},
        "population.items[1]",
        ["UTF-8"],
    ),
    (
        "sample larger than the population",
        {"sample_size": 4201},
        "sample_size",
        ["4201", "population size 4200"],
    ),
    ("sample size zero", {"sample_size": 0}, "sample_size", ["at least 1"]),
    ("sample size a string", {"sample_size": "60"}, "sample_size", ["whole number"]),
    ("seed not a string", {"seed": 20260930}, "seed", ["must be a string", "number"]),
    ("seed too long", {"seed": "x" * 257}, "seed", ["257", "256"]),
    ("seed empty", {"seed": ""}, "seed", ["empty"]),
    ("seed with a lone surrogate", {"seed": "q3-\udc00"}, "seed", ["UTF-8"]),
    ("unknown method", {"method": "haphazard"}, "method", ["random", "systematic"]),
    ("unknown field", {"label": "Q3"}, "label", ["not a field"]),
]


@pytest.mark.parametrize(
    ("changes", "field", "fragments"),
    [case[1:] for case in BAD_INPUTS],
    ids=[case[0] for case in BAD_INPUTS],
)
def test_bad_input_is_a_422_naming_the_field(
    api: FlaskClient, changes: dict[str, Any], field: str, fragments: list[str]
) -> None:
    body = {"population": {"size": 4200}, "sample_size": 1, "seed": "fictional-co-2026-q3"}
    body.update(changes)
    body = {key: value for key, value in body.items() if value is not ABSENT}
    messages = " ".join(_problem(api.post(PATH, json=body), field))
    for fragment in fragments:
        assert fragment in messages


def test_many_bad_identifiers_name_the_first_few_and_count_the_rest(api: FlaskClient) -> None:
    items: list[Any] = [f"PO-{k}" for k in range(100)]
    for k in (3, 10, 20, 30, 40, 50, 60):
        items[k] = k
    response = api.post(PATH, json={"population": {"items": items}, "sample_size": 1})
    problem = response.get_json()
    named = [f"population.items[{k}]" for k in (3, 10, 20, 30, 40)]
    assert all(field in problem["errors"] for field in named)
    assert "population.items[50]" not in problem["errors"]
    assert "7 identifiers" in " ".join(_problem(response, "population.items"))


def test_more_identifiers_than_the_limit(small_api: FlaskClient) -> None:
    at_limit = {"population": {"items": NORTHWIND[:SMALL_LIMIT]}, "sample_size": 2, "seed": "n"}
    assert _select(small_api, at_limit)["population_size"] == SMALL_LIMIT
    over = {"population": {"items": NORTHWIND[: SMALL_LIMIT + 1]}, "sample_size": 2, "seed": "n"}
    messages = " ".join(_problem(small_api.post(PATH, json=over), "population.items"))
    assert str(SMALL_LIMIT + 1) in messages and f"limit of {SMALL_LIMIT}" in messages
