"""Fixtures of the client tests: the Flask app as the transport of a requests session."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
import requests

from sampling_client import cli
from sampling_client.api import SamplingClient
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


@pytest.fixture
def through_app(monkeypatch: pytest.MonkeyPatch,
                app_session: requests.Session) -> requests.Session:
    """Every client the command makes sends through the app in process."""

    def make(*args: Any, **kwargs: Any) -> SamplingClient:
        return SamplingClient(*args, session=app_session, **kwargs)

    monkeypatch.setattr(cli, "SamplingClient", make)
    return app_session
