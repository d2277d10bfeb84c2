"""The retry policy: bounded exponential backoff and the Retry-After header."""

from __future__ import annotations

from datetime import UTC, datetime

import pytest

from sampling_client.retrying import RetryPolicy, retry_after_seconds


def test_the_delay_doubles_up_to_the_bound() -> None:
    policy = RetryPolicy(retries=6, backoff=0.25, max_backoff=1.5)
    assert [policy.delay(a) for a in range(5)] == [0.25, 0.5, 1.0, 1.5, 1.5]


def test_a_503_without_retry_after_waits_the_backoff() -> None:
    assert RetryPolicy(backoff=0.2).wait_after_503(1, None) == 0.4


def test_retry_after_is_honoured_and_never_shortened() -> None:
    policy = RetryPolicy(backoff=0.2, max_retry_after=10)
    assert policy.wait_after_503(0, "3") == 3.0
    assert policy.wait_after_503(0, "0") == 0.2  # at least the backoff, so no hot loop
    assert policy.wait_after_503(0, "10") == 10.0


def test_retry_after_beyond_the_cap_gives_up() -> None:
    assert RetryPolicy(max_retry_after=10).wait_after_503(0, "11") is None


def test_an_unreadable_retry_after_falls_back_to_the_backoff() -> None:
    assert RetryPolicy(backoff=0.2).wait_after_503(0, "in a while") == 0.2


def test_retry_after_as_an_http_date() -> None:
    # RFC 9110 §10.2.3: an HTTP-date, always in GMT.
    now = datetime(2026, 12, 1, 12, 0, 0, tzinfo=UTC)
    assert retry_after_seconds("Tue, 01 Dec 2026 12:00:05 GMT", now=now) == 5.0
    assert retry_after_seconds("Tue, 01 Dec 2026 11:59:00 GMT", now=now) == 0.0


@pytest.mark.parametrize("value", ["-1", "1.5", "", "9999999999"])
def test_retry_after_that_is_not_a_count_of_seconds_is_unreadable(value: str) -> None:
    assert retry_after_seconds(value) is None


@pytest.mark.parametrize(("kwargs", "error"), [
    ({"retries": -1}, ValueError), ({"retries": 1.5}, TypeError), ({"retries": True}, TypeError),
    ({"backoff": -0.1}, ValueError), ({"max_retry_after": float("nan")}, ValueError),
])
def test_a_policy_out_of_range_is_refused(kwargs: dict[str, float], error: type) -> None:
    with pytest.raises(error):
        RetryPolicy(**kwargs)  # type: ignore[arg-type]
