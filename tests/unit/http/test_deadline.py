"""The per-request deadline: work still running past it is stopped and answered 503."""

from __future__ import annotations

import time

import pytest

from service import create_app
from service.settings import Settings
from service.web import deadline
from service.web.problems import Problem

# Exact sizing that computes for a few tenths of a second and costs well under the budget.
SLOW_ESTIMATION = {"margin": 0.003, "confidence": 0.95, "methods": ["exact"]}


def _spin(seconds: float) -> None:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        pass


def test_a_python_loop_past_the_deadline_is_stopped() -> None:
    started = time.monotonic()
    with pytest.raises(Problem) as caught, deadline.guard(0.05):
        _spin(5)
    assert caught.value.status == 503
    assert caught.value.headers["Retry-After"] == str(deadline.RETRY_AFTER)
    # Stopped near the deadline, not at the end of the loop (a hang guard, not a timing).
    assert time.monotonic() - started < 4


def test_work_that_ends_in_time_is_not_disturbed_later() -> None:
    with deadline.guard(0.05):
        pass
    # Were the exception left pending, it would surface in this loop.
    _spin(0.2)


def test_a_nested_guard_keeps_the_outer_deadline() -> None:
    with pytest.raises(Problem), deadline.guard(0.05), deadline.guard(60):
        _spin(5)


def test_a_slow_request_answers_503_problem_details_with_retry_after() -> None:
    client = create_app(Settings(request_deadline=0.02)).test_client()
    response = client.post("/v1/estimation/sample-size", json=SLOW_ESTIMATION)
    assert response.status_code == 503
    assert response.mimetype == "application/problem+json"
    assert response.headers["Retry-After"] == str(deadline.RETRY_AFTER)
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    problem = response.get_json()
    assert problem["type"] == deadline.DEADLINE_EXCEEDED
    assert "0.02 s" in problem["detail"]
    # The same thread answers the next request normally.
    assert client.post("/v1/sample-size", json={"tolerable_rate": 0.05}).status_code == 200


def test_a_batch_shares_one_deadline() -> None:
    client = create_app(Settings(request_deadline=0.02)).test_client()
    items = [{"id": str(i), "operation": "estimation-sample-size", "request": SLOW_ESTIMATION}
             for i in range(3)]
    response = client.post("/v1/batch", json={"operations": items})
    assert response.status_code == 503
    assert response.get_json()["type"] == deadline.DEADLINE_EXCEEDED


def test_the_default_deadline_lets_the_same_request_finish() -> None:
    client = create_app(Settings()).test_client()
    assert client.post("/v1/estimation/sample-size", json=SLOW_ESTIMATION).status_code == 200
