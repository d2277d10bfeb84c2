"""Hostile input against every POST endpoint: each gets a quick 4xx problem+json.

``test_bad_input.py`` covers the sizing and evaluation endpoints in depth; this file
sends the same classes of hostile body to every operation in ``all_operations()`` and
adds what is particular to each request schema: every integer field set to 10**400,
every string field set to a million characters, a 100,000-element array in every field.
After each hostile request an ordinary request to the same application must succeed,
and the memory the request allocates stays bounded.
"""

from __future__ import annotations

import json
import resource
import time
from typing import Any

import pytest
from marshmallow import Schema, fields

from schemas.fields import StrictInteger, StrictString
from service.http import all_operations
from service.http.operations import Operation

# Hang guard for hostile input, not a speed target.
FAST_SECONDS = 5.0
# Generous bound on the growth of peak memory while one hostile request is answered.
MEMORY_BOUND = 256 * 1024 * 1024
# A refusal names the fault; it does not echo the hostile body back.
SHORT_ANSWER = 4_000

ORDINARY: dict[str, dict[str, Any]] = {
    "/v1/sample-size": {"tolerable_rate": 0.05},
    "/v1/evaluation": {"sample_size": 60, "deviations": 1},
    "/v1/estimation/sample-size": {"margin": 0.05},
    "/v1/plans/curve": {"sample_size": 60, "allowed_deviations": 1},
    "/v1/plans/periodic": {"frequency": "monthly", "tolerable_rate": 0.1},
    "/v1/selection": {"population": {"size": 1000}, "sample_size": 10, "seed": "hostile"},
    "/v1/monetary/sample-size": {"book_value": "2500000.00", "tolerable_misstatement": 125000},
    "/v1/monetary/selection": {"population": [{"id": "KV-1", "amount": "10.50"}],
                               "sample_size": 1, "seed": "hostile"},
    "/v1/monetary/evaluation": {"book_value": "600000.00", "sample_size": 60},
    "/v1/plans/staged": {"tolerable_rate": 0.05},
    "/v1/plans/staged/evaluation": {
        "stages": [{"cumulative_sample_size": 59, "accept_if_at_most": 0, "fail_if_at_least": 1}],
        "stage_reached": 1, "deviations": 0, "tolerable_rate": 0.05,
    },
    "/v1/plans/staged/curve": {
        "stages": [{"cumulative_sample_size": 59, "accept_if_at_most": 0, "fail_if_at_least": 1}],
        "points": 5,
    },
    "/v1/evaluation/strata": {"strata": [
        {"label": "A", "population_size": 100, "sample_size": 20, "deviations": 0}]},
    "/v1/evaluation/sequence": {"results": [False, True, False]},
    "/v1/batch": {
        "operations": [{"id": "a", "operation": "sample-size", "request": {"tolerable_rate": 0.05}}]
    },
}
# Endpoints that need an uploaded file take their hostile uploads in test_uploads.py.
OPERATIONS = [op for op in all_operations() if not op.file_required]
PATHS = [op.path for op in OPERATIONS]
# Covered for these two in test_bad_input.py; here for the others.
OTHER_PATHS = [p for p in PATHS if p not in {"/v1/sample-size", "/v1/evaluation"}]


def test_every_operation_has_an_ordinary_request() -> None:
    assert set(ORDINARY) == set(PATHS)


def _leaves(schema: Schema, prefix: str = "") -> list[tuple[str, fields.Field]]:
    """Every scalar or list field of a request schema, by dotted path."""
    found: list[tuple[str, fields.Field]] = []
    for attribute, field in schema.fields.items():
        name = field.data_key or attribute
        if isinstance(field, fields.Nested):
            found.extend(_leaves(field.schema, f"{prefix}{name}."))
        else:
            found.append((f"{prefix}{name}", field))
    return found


def _with(body: dict[str, Any], path: str, value: Any) -> dict[str, Any]:
    """A copy of ``body`` with the field at the dotted ``path`` set to ``value``."""
    result = json.loads(json.dumps(body))
    if path.startswith("population.file."):
        # The file form of the population, otherwise valid, so that only the field fails.
        result["population"] = {"file": {"id_column": "doc_no"}}
    *parents, last = path.split(".")
    target = result
    for parent in parents:
        target = target.setdefault(parent, {})
        if parent == "population":
            # One form of population at a time for the selection endpoint.
            target.pop("size", None) if last in {"ranges", "items", "exclude"} else None
    if last == "exclude":
        target["ranges"] = [{"first": 1, "last": 1000}]
    target[last] = value
    return result


def _cases(kind: type[fields.Field], list_entries: bool) -> list[Any]:
    cases = []
    for op in OPERATIONS:
        for path, field in _leaves(op.request()):
            inner = getattr(field, "inner", None)
            if isinstance(field, kind) or (list_entries and isinstance(inner, kind)):
                cases.append(pytest.param(op.path, path, isinstance(inner, kind),
                                          id=f"{op.path}:{path}"))
    return cases


def _problem(response: Any, path: str) -> dict[str, Any]:
    assert 400 <= response.status_code < 500, response.get_data(as_text=True)[:500]
    assert response.mimetype == "application/problem+json"
    assert len(response.get_data()) < SHORT_ANSWER
    body = json.loads(response.get_data(as_text=True))
    assert body["status"] == response.status_code
    assert body["instance"] == path
    assert body["title"] and body["detail"]
    return body


def _peak_rss() -> int:
    """Peak resident set size of this process, in bytes (Linux reports kibibytes)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _hostile(client: Any, path: str, data: bytes | str, content_type: str = "application/json"
             ) -> dict[str, Any]:
    """Send ``data``; check the answer is a quick, short 4xx problem, then an ordinary request."""
    before = _peak_rss()
    started = time.monotonic()
    response = client.post(path, data=data, content_type=content_type)
    elapsed = time.monotonic() - started
    body = _problem(response, path)
    assert elapsed < FAST_SECONDS
    # The process's peak resident size grows by no more than a generous bound.
    assert _peak_rss() - before < MEMORY_BOUND + 10 * len(data)
    ordinary = client.post(path, json=ORDINARY[path])
    assert ordinary.status_code == 200, ordinary.get_data(as_text=True)[:500]
    return body


def _json(body: Any) -> str:
    return json.dumps(body)


@pytest.mark.parametrize("path", PATHS)
def test_ordinary_request_succeeds(client: Any, path: str) -> None:
    assert client.post(path, json=ORDINARY[path]).status_code == 200


# --- size -----------------------------------------------------------------------------


def _op(path: str) -> Operation:
    return next(op for op in OPERATIONS if op.path == path)


@pytest.mark.parametrize("path", PATHS)
def test_ten_megabyte_body_is_refused(client: Any, path: str) -> None:
    # 10 MB is over the ordinary limit (413) but under the list-body limit of the selection
    # endpoint, where the junk must still be refused as malformed, not read as a request.
    data = b"\x01junk" * 2_000_000
    body = _hostile(client, path, data)
    expected = 400 if _op(path).takes_item_lists else 413
    assert body["status"] == expected


@pytest.mark.parametrize("path", PATHS)
def test_ten_megabyte_string_in_a_valid_body_is_refused(client: Any, path: str) -> None:
    padding = "p" * 10_000_000
    body = _hostile(client, path, _json({**ORDINARY[path], "note": padding}))
    if _op(path).takes_item_lists:
        assert body["status"] == 422 and "note" in body["errors"]
    else:
        assert body["status"] == 413


# --- structure ------------------------------------------------------------------------


@pytest.mark.parametrize("path", OTHER_PATHS)
@pytest.mark.parametrize("text", [
    pytest.param("[" * 10_000 + "]" * 10_000, id="arrays"),
    pytest.param('{"a":' * 10_000 + "1" + "}" * 10_000, id="objects"),
])
def test_deep_nesting_is_400(client: Any, path: str, text: str) -> None:
    body = _hostile(client, path, text)
    assert body["status"] == 400 and "nested" in body["detail"]


@pytest.mark.parametrize(("path", "field", "in_list"), _cases(fields.Field, False))
def test_hundred_thousand_element_array_in_every_field(
    client: Any, path: str, field: str, in_list: bool
) -> None:
    value = [0.05] * 100_000 if field != "population.ranges" else [[1, 2]] * 100_000
    body = _hostile(client, path, _json(_with(ORDINARY[path], field, value)))
    assert body["status"] == 422
    assert any(name == field or name.startswith(f"{field}[") for name in body["errors"]), body


@pytest.mark.parametrize("path", PATHS)
def test_deeply_nested_value_in_a_field(client: Any, path: str) -> None:
    text = _json(ORDINARY[path])[:-1] + ', "population": ' + "[" * 5_000 + "]" * 5_000 + "}"
    body = _hostile(client, path, text)
    assert body["status"] in (400, 422)


# --- values ---------------------------------------------------------------------------


@pytest.mark.parametrize(("path", "field", "in_list"), _cases(StrictInteger, True))
def test_integer_of_four_hundred_digits_in_every_integer_field(
    client: Any, path: str, field: str, in_list: bool
) -> None:
    huge = 10**400
    text = _json(_with(ORDINARY[path], field, [huge] if in_list else huge))
    body = _hostile(client, path, text)
    assert body["status"] == 422
    named = [name for name in body["errors"] if name.startswith(field)]
    assert named, body
    assert "at most" in " ".join(m for name in named for m in body["errors"][name])


@pytest.mark.parametrize(("path", "field", "in_list"), _cases(StrictString, True))
def test_million_character_string_in_every_string_field(
    client: Any, path: str, field: str, in_list: bool
) -> None:
    long = "s" * 1_000_000
    body = _hostile(client, path, _json(_with(ORDINARY[path], field, [long] if in_list else long)))
    assert body["status"] == 422
    assert any(name.startswith(field) for name in body["errors"]), body


@pytest.mark.parametrize(("path", "field", "in_list"), _cases(fields.Float, False))
@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity", "1e400"])
def test_non_finite_number_in_every_number_field(
    client: Any, path: str, field: str, in_list: bool, literal: str
) -> None:
    marker = "__number__"
    text = _json(_with(ORDINARY[path], field, marker)).replace(f'"{marker}"', literal)
    body = _hostile(client, path, text)
    assert body["status"] == 400 and literal.lstrip("-") in body["detail"]


# --- encoding and media type ----------------------------------------------------------


@pytest.mark.parametrize("path", OTHER_PATHS)
def test_invalid_utf8_is_400(client: Any, path: str) -> None:
    data = _json(ORDINARY[path]).encode()[:-1] + b', "x": "\xff\xfe"}'
    body = _hostile(client, path, data)
    assert body["status"] == 400 and "UTF-8" in body["detail"]


@pytest.mark.parametrize("path", OTHER_PATHS)
def test_duplicate_key_is_400(client: Any, path: str) -> None:
    first = next(iter(ORDINARY[path]))
    text = _json(ORDINARY[path])[:-1] + f', "{first}": 1}}'
    body = _hostile(client, path, text)
    assert body["status"] == 400 and repr(first) in body["detail"]


@pytest.mark.parametrize("path", OTHER_PATHS)
@pytest.mark.parametrize("content_type", [
    "text/plain", "application/xml", "application/x-www-form-urlencoded", "text/csv",
])
def test_body_not_sent_as_json_is_415(client: Any, path: str, content_type: str) -> None:
    body = _hostile(client, path, _json(ORDINARY[path]), content_type=content_type)
    assert body["status"] == 415 and content_type in body["detail"]
