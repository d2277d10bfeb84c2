"""Fixtures of the client tests: the Flask app as the transport of a requests session."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import requests

from service import create_app
from service.settings import Settings
from tests.unit.client.fakes import AppAdapter


@pytest.fixture
def adapter() -> AppAdapter:
    return AppAdapter(create_app(Settings()))


@pytest.fixture
def app_session(adapter: AppAdapter) -> Iterator[requests.Session]:
    session = requests.Session()
    session.mount("http://", adapter)
    yield session
    session.close()
