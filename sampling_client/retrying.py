"""When the client tries a request again, and how long it waits first.

Only two failures are worth another try: the connection could not be made (the service
is starting, restarting or briefly unreachable) and ``503 Service Unavailable`` (the
service said it cannot answer yet). Every other answer, a 500 included, is final: trying
again would get the same answer and double the load.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import UTC, datetime
from email.utils import parsedate_to_datetime

_SECONDS = re.compile(r"[0-9]{1,9}")


@dataclass(frozen=True)
class RetryPolicy:
    """Bounded exponential backoff: ``backoff × 2**attempt`` seconds, at most ``max_backoff``.

    ``retries`` is the number of further tries after the first, so a request is sent at
    most ``retries + 1`` times. A ``Retry-After`` header is honoured when it asks for at
    most ``max_retry_after`` seconds; one asking for longer ends the retries at once,
    since the client would otherwise either ignore it or appear to hang.

    >>> policy = RetryPolicy(retries=3, backoff=0.2, max_backoff=0.5)
    >>> [policy.delay(attempt) for attempt in range(3)]
    [0.2, 0.4, 0.5]
    """

    retries: int = 3
    backoff: float = 0.2
    max_backoff: float = 5.0
    max_retry_after: float = 10.0

    def __post_init__(self) -> None:
        if isinstance(self.retries, bool) or not isinstance(self.retries, int):
            raise TypeError(f"retries must be a whole number, not {self.retries!r}")
        if self.retries < 0:
            raise ValueError(f"retries must be at least 0, not {self.retries}")
        for name in ("backoff", "max_backoff", "max_retry_after"):
            value = getattr(self, name)
            if (not isinstance(value, int | float) or isinstance(value, bool)
                    or not math.isfinite(value) or value < 0):
                raise ValueError(f"{name} must be a number of seconds of at least 0, not {value!r}")

    def delay(self, attempt: int) -> float:
        """Seconds to wait before retry number ``attempt + 1`` (``attempt`` counts from 0)."""
        return float(min(self.backoff * 2**attempt, self.max_backoff))

    def wait_after_503(self, attempt: int, retry_after: str | None) -> float | None:
        """Seconds to wait after a 503, or None when ``Retry-After`` asks for too long."""
        asked = retry_after_seconds(retry_after)
        if asked is None:
            return self.delay(attempt)
        if asked > self.max_retry_after:
            return None
        return max(asked, self.delay(attempt))


def retry_after_seconds(value: str | None, now: datetime | None = None) -> float | None:
    """The wait a ``Retry-After`` header asks for (RFC 9110 §10.2.3), or None if unreadable.

    >>> retry_after_seconds("3"), retry_after_seconds("soon"), retry_after_seconds(None)
    (3.0, None, None)
    >>> retry_after_seconds("Wed, 21 Oct 2026 07:28:00 GMT",
    ...                     now=datetime(2026, 10, 21, 7, 27, 58, tzinfo=UTC))
    2.0
    """
    if value is None:
        return None
    text = value.strip()
    if _SECONDS.fullmatch(text):
        return float(text)
    try:
        when = parsedate_to_datetime(text)
    except (TypeError, ValueError):
        return None
    if when.tzinfo is None:  # an HTTP-date is always GMT; a zone-less one is read so
        when = when.replace(tzinfo=UTC)
    return max(0.0, (when - (now or datetime.now(UTC))).total_seconds())
