"""Shared fixtures: the application, with default or small limits, and its test clients."""

from __future__ import annotations

import pytest
from flask import Flask
from flask.testing import FlaskClient

from service import create_app
from service.settings import Settings

# Small enough that an ordinary request with a long label goes over it.
SMALL_BODY_LIMIT = 256


@pytest.fixture
def app() -> Flask:
    """The application with the default settings (not those of the environment)."""
    return create_app(Settings())


@pytest.fixture
def client(app: Flask) -> FlaskClient:
    return app.test_client()


@pytest.fixture
def small_body_app() -> Flask:
    """The application accepting request bodies of at most SMALL_BODY_LIMIT bytes."""
    return create_app(Settings(max_body_bytes=SMALL_BODY_LIMIT))


@pytest.fixture
def small_body_client(small_body_app: Flask) -> FlaskClient:
    return small_body_app.test_client()
