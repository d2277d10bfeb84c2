"""Hostile probes: lone surrogates, content codings, log injection, OPTIONS and caps.

Each answered 500, 200 or a misleading status before; each now gets a problem+json
naming what is wrong, or is harmless.
"""

from __future__ import annotations

import gzip
import hashlib
import json
from typing import Any

import pytest
from flask.testing import FlaskClient

from service import create_app
from service.settings import Settings

PROBLEM = "application/problem+json"
# A JSON escape spelling a lone high surrogate: valid JSON text, not a character.
LONE = "\\ud800"


def _post_raw(client: FlaskClient, path: str, raw: str, accept: str = "application/json") -> Any:
    return client.post(
        path, data=raw.encode("ascii"),
        headers={"Content-Type": "application/json", "Accept": accept},
    )


@pytest.mark.parametrize(
    ("path", "raw", "field", "accept"),
    [
        ("/v1/sample-size",
         '{"tolerable_rate": 0.05, "population": {"size": 100, "label": "Q3' + LONE + '"}}',
         "population.label", "application/json"),
        ("/v1/evaluation",
         '{"sample_size": 60, "deviations": 1, "population": {"size": 100, "label": "'
         + LONE + '"}}',
         "population.label", "application/json"),
        ("/v1/sample-size",
         '{"tolerable_rate": 0.05, "population": {"size": 100, "label": "Q3' + LONE + '"}}',
         "population.label", "text/markdown"),
        ("/v1/sample-size",
         '{"attributes": [{"name": "' + LONE + '", "tolerable_rate": 0.05}]}',
         "attributes[0].name", "application/json"),
        ("/v1/evaluation/strata",
         '{"strata": [{"label": "' + LONE + '", "population_size": 100, "sample_size": 10, '
         '"deviations": 0}], "tolerable_rate": 0.05}',
         "strata[0].label", "application/json"),
        ("/v1/sample-size", '{"tolerable_rate' + LONE + '": 0.05}', "body", "application/json"),
        ("/v1/batch",
         '{"operations": [{"id": "a' + LONE + '", "operation": "sample-size", '
         '"request": {"tolerable_rate": 0.05}}]}',
         "operations[0].id", "application/json"),
        ("/v1/batch",
         '{"operations": [{"id": "a", "operation": "sample' + LONE + '", '
         '"request": {"tolerable_rate": 0.05}}]}',
         "operations[0].operation", "text/markdown"),
    ],
)
def test_a_lone_surrogate_is_refused_naming_its_field(
    client: FlaskClient, path: str, raw: str, field: str, accept: str
) -> None:
    response = _post_raw(client, path, raw, accept)
    assert response.status_code == 422
    assert response.mimetype == PROBLEM
    problem = response.get_json()
    assert list(problem["errors"]) == [field]
    assert "UTF-8" in problem["errors"][field][0]


def test_a_lone_surrogate_in_one_batch_item_fails_only_that_item(client: FlaskClient) -> None:
    raw = (
        '{"operations": ['
        '{"id": "bad", "operation": "sample-size", "request": {"tolerable_rate": 0.05, '
        '"population": {"size": 100, "label": "' + LONE + '"}}},'
        '{"id": "good", "operation": "sample-size", "request": {"tolerable_rate": 0.05}}]}'
    )
    for accept in ("application/json", "text/markdown"):
        response = _post_raw(client, "/v1/batch", raw, accept)
        assert response.status_code == 200
    results = _post_raw(client, "/v1/batch", raw).get_json()["results"]
    assert [r["status"] for r in results] == [422, 200]
    assert list(results[0]["problem"]["errors"]) == ["operations[0].request.population.label"]


@pytest.mark.parametrize(
    ("body", "coding"),
    [
        # mtime=0: the same bytes in every process, so parallel test runs agree on the ids.
        (gzip.compress(b'{"tolerable_rate": 0.05}', mtime=0), "gzip"),
        (b'{"tolerable_rate": 0.05}', "gzip"),  # labelled but not compressed: was a 200
        (b'{"tolerable_rate": 0.05}', "br"),
        (b'{"tolerable_rate": 0.05}', "deflate, gzip"),
    ],
    ids=["gzip", "labelled-gzip", "br", "deflate-then-gzip"],
)
def test_a_body_with_a_content_coding_is_refused_415(
    client: FlaskClient, body: bytes, coding: str
) -> None:
    response = client.post("/v1/sample-size", data=body, headers={
        "Content-Type": "application/json", "Content-Encoding": coding})
    assert response.status_code == 415
    assert response.mimetype == PROBLEM
    assert response.headers["Accept-Encoding"] == "identity"
    assert list(response.get_json()["errors"]) == ["Content-Encoding"]


def test_the_identity_coding_is_accepted(client: FlaskClient) -> None:
    response = client.post("/v1/sample-size", data=b'{"tolerable_rate": 0.05}', headers={
        "Content-Type": "application/json", "Content-Encoding": "identity"})
    assert response.status_code == 200


def test_the_estimation_population_cap_is_in_the_schema(client: FlaskClient) -> None:
    from service.web.openapi import build_yaml

    response = client.post("/v1/estimation/sample-size",
                           json={"margin": 0.05, "population": {"size": 10**11 + 1}})
    assert response.status_code == 422
    assert "100000000000" in response.get_json()["errors"]["population.size"][0]
    assert "maximum: 100000000000" in build_yaml()


KEY = "probe-key-0123456789"


@pytest.fixture
def keyed() -> FlaskClient:
    return create_app(Settings(api_keys=frozenset({hashlib.sha256(KEY.encode()).digest()}))
                      ).test_client()


@pytest.mark.parametrize("preflight", [False, True])
def test_options_without_a_key_does_not_tell_which_paths_exist(
    keyed: FlaskClient, preflight: bool
) -> None:
    headers = {"Origin": "https://audit.example.com", "Access-Control-Request-Method": "POST"}
    answers = [
        keyed.options(path, headers=headers if preflight else {})
        for path in ("/v1/sample-size", "/v1/no-such-endpoint", "/v2/anything")
    ]
    def shape(response: Any) -> tuple[Any, ...]:
        body = response.get_json(silent=True) or {}
        kept = {k: v for k, v in body.items() if k not in ("instance", "request_id")}
        headers = sorted(k for k, _ in response.headers.items() if k != "X-Request-ID")
        return response.status_code, json.dumps(kept), tuple(headers)

    assert len({shape(r) for r in answers}) == 1
    assert answers[0].status_code == (204 if preflight else 401)


def test_options_with_the_key_still_lists_the_methods(keyed: FlaskClient) -> None:
    response = keyed.options("/v1/sample-size", headers={"Authorization": f"Bearer {KEY}"})
    assert response.status_code == 200
    assert "POST" in response.headers["Allow"]


@pytest.mark.parametrize(
    "path",
    [
        "/v1/x%0A%7B%22forged%22:true%7D",
        "/v1/x%0D%0Ay",
        "/v1/x%E2%80%A8y%C2%85z%1B[31m%7F",
        "/v1/x%FF%ED%A0%80",
    ],
)
def test_one_ascii_log_line_per_request_whatever_the_path(
    client: FlaskClient, capsys: pytest.CaptureFixture[str], path: str
) -> None:
    capsys.readouterr()
    client.get(path)
    logged = capsys.readouterr().err
    lines = logged.splitlines()
    assert len(lines) == 1 and logged.endswith("\n")
    assert lines[0].isascii()
    assert all(ch >= " " for ch in lines[0])
    record = json.loads(lines[0])
    assert record["path"].startswith("/v1/x") and "forged" not in record
