"""Optional API keys: off by default; when configured, a bearer key on every endpoint but
health, readiness and the contract, with one 401 answer for every kind of refusal."""

from __future__ import annotations

import hashlib

import pytest
from flask.testing import FlaskClient

from service import create_app
from service.settings import Settings
from service.web.access_keys import digest, main, new_key

KEY = "northwind-month-end-7f3a"
OTHER_KEY = "northwind-ticketing-91c2"
SIZING = {"tolerable_rate": 0.05}


@pytest.fixture
def locked() -> FlaskClient:
    digests = frozenset({hashlib.sha256(KEY.encode()).digest(),
                         hashlib.sha256(OTHER_KEY.encode()).digest()})
    return create_app(Settings(api_keys=digests)).test_client()


def _bearer(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def test_without_keys_configured_no_key_is_needed(client: FlaskClient) -> None:
    assert client.post("/v1/sample-size", json=SIZING).status_code == 200
    assert client.get("/metrics").status_code == 200


@pytest.mark.parametrize("key", [KEY, OTHER_KEY])
def test_each_configured_key_is_accepted(locked: FlaskClient, key: str) -> None:
    response = locked.post("/v1/sample-size", json=SIZING, headers=_bearer(key))
    assert response.status_code == 200
    # AICPA Audit Guide: Audit Sampling, table A-1 (recalled from memory): 59 items.
    assert response.json["sample_size"] == 59
    assert locked.get("/metrics", headers=_bearer(key)).status_code == 200


@pytest.mark.parametrize(
    ("headers", "error"),
    [
        ({}, None),
        ({"Authorization": ""}, None),
        ({"Authorization": "Bearer"}, None),
        ({"Authorization": "Bearer   "}, None),
        ({"Authorization": f"Basic {KEY}"}, None),
        ({"Authorization": KEY}, None),
        ({"Authorization": "Bearer wrong-key"}, "invalid_token"),
        ({"Authorization": f"Bearer {KEY}x"}, "invalid_token"),
        ({"Authorization": f"Bearer {KEY[:-1]}"}, "invalid_token"),
        ({"Authorization": "Bearer " + hashlib.sha256(KEY.encode()).hexdigest()}, "invalid_token"),
    ],
)
def test_a_missing_or_wrong_key_is_a_401_problem(
    locked: FlaskClient, headers: dict[str, str], error: str | None
) -> None:
    response = locked.post("/v1/sample-size", json=SIZING, headers=headers)
    assert response.status_code == 401
    assert response.mimetype == "application/problem+json"
    challenge = response.headers["WWW-Authenticate"]
    assert challenge.startswith('Bearer realm="attribute-sampling"')
    assert ("invalid_token" in challenge) == (error is not None)
    problem = response.json
    assert problem["status"] == 401 and problem["type"] == "/problems/unauthorized"
    assert problem["request_id"] == response.headers["X-Request-ID"]
    # Nothing about the configured keys is given back.
    assert KEY not in response.get_data(as_text=True)
    assert OTHER_KEY not in response.get_data(as_text=True)


def test_wrong_keys_all_get_the_same_answer(locked: FlaskClient) -> None:
    bodies = set()
    for key in ["a", KEY + "x", OTHER_KEY[:-1], "northwind"]:
        problem = locked.post("/v1/evaluation", json={}, headers=_bearer(key)).json
        bodies.add((problem["title"], problem["detail"]))
    assert len(bodies) == 1


@pytest.mark.parametrize("path", ["/v1/health", "/v1/ready", "/openapi.yaml"])
def test_health_readiness_and_the_contract_stay_open(locked: FlaskClient, path: str) -> None:
    assert locked.get(path).status_code == 200


@pytest.mark.parametrize(
    ("method", "path"),
    [("GET", "/metrics"), ("POST", "/v1/batch"), ("POST", "/v1/selection"),
     ("GET", "/v1/no-such-path"), ("GET", "/v1/sample-size")],
)
def test_everything_else_is_closed_before_routing(
    locked: FlaskClient, method: str, path: str
) -> None:
    # An unknown path or a wrong method answers 401 too: without a key a caller learns
    # nothing about which paths exist.
    assert locked.open(path, method=method, json={}).status_code == 401


def test_invalid_input_with_a_good_key_is_still_named(locked: FlaskClient) -> None:
    response = locked.post("/v1/sample-size", json={"tolerable_rate": 2}, headers=_bearer(KEY))
    assert response.status_code == 422
    assert "tolerable_rate" in response.json["errors"]


def test_the_key_tool_makes_keys_whose_digest_the_settings_accept(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    assert main(["new"]) == 0
    key_line, digest_line = capsys.readouterr().out.splitlines()
    key = key_line.split()[-1]
    assert len(key) == 43 and digest_line.split()[-1] == digest(key)
    settings = Settings.from_environ({"SAMPLING_API_KEYS": digest(key)})
    client = create_app(settings).test_client()
    assert client.post("/v1/sample-size", json=SIZING, headers=_bearer(key)).status_code == 200
    assert new_key() != new_key()
    assert main(["nonsense"]) == 2
