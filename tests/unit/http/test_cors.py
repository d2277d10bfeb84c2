"""CORS: no header unless origins are configured; then only for those origins."""

from __future__ import annotations

import hashlib

from flask.testing import FlaskClient

from service import create_app
from service.settings import Settings

ORIGIN = "https://audit.example.com"
PREFLIGHT = {"Origin": ORIGIN, "Access-Control-Request-Method": "POST",
             "Access-Control-Request-Headers": "authorization, content-type"}


def test_no_cors_header_by_default(client: FlaskClient) -> None:
    response = client.post("/v1/sample-size", json={"tolerable_rate": 0.05},
                           headers={"Origin": ORIGIN})
    assert response.status_code == 200
    assert not [name for name, _ in response.headers.items() if name.startswith("Access-Control")]


def test_a_listed_origin_may_read_answers_and_the_request_id() -> None:
    client = create_app(Settings(cors_origins=(ORIGIN,))).test_client()
    response = client.post("/v1/sample-size", json={"tolerable_rate": 0.05},
                           headers={"Origin": ORIGIN})
    assert response.headers["Access-Control-Allow-Origin"] == ORIGIN
    assert response.headers["Access-Control-Expose-Headers"] == "X-Request-ID"
    assert "Origin" in response.headers["Vary"]
    assert "Access-Control-Allow-Credentials" not in response.headers


def test_an_unlisted_origin_gets_no_permission() -> None:
    client = create_app(Settings(cors_origins=(ORIGIN,))).test_client()
    response = client.post("/v1/sample-size", json={"tolerable_rate": 0.05},
                           headers={"Origin": "https://elsewhere.example.net"})
    assert response.status_code == 200
    assert "Access-Control-Allow-Origin" not in response.headers
    assert "Origin" in response.headers["Vary"]


def test_a_star_allows_any_origin_without_credentials() -> None:
    client = create_app(Settings(cors_origins=("*",))).test_client()
    response = client.get("/v1/health", headers={"Origin": "https://elsewhere.example.net"})
    assert response.headers["Access-Control-Allow-Origin"] == "*"


def test_a_preflight_is_answered_even_when_keys_are_required() -> None:
    digests = frozenset({hashlib.sha256(b"key").digest()})
    client = create_app(Settings(cors_origins=(ORIGIN,), api_keys=digests)).test_client()
    response = client.options("/v1/sample-size", headers=PREFLIGHT)
    assert response.status_code == 204  # the same empty answer on every path
    assert response.headers["Access-Control-Allow-Origin"] == ORIGIN
    assert "POST" in response.headers["Access-Control-Allow-Methods"]
    assert "Authorization" in response.headers["Access-Control-Allow-Headers"]
    assert response.headers["Access-Control-Max-Age"] == "600"
    # The request itself still needs the key, and its 401 is readable by the page.
    refused = client.post("/v1/sample-size", json={}, headers={"Origin": ORIGIN})
    assert refused.status_code == 401
    assert refused.headers["Access-Control-Allow-Origin"] == ORIGIN
