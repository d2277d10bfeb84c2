"""Over HTTP, a plan beyond the cap on allowed deviations is a 422 naming expected_rate."""

from __future__ import annotations

import json
from typing import Any


def test_plan_over_the_deviation_cap_is_refused(client: Any) -> None:
    # The plan 21,054 items / 10,407 deviations is checked in
    # tests/unit/sampling/test_deviation_cap.py with scipy.stats.binom.
    response = client.post("/v1/sample-size", json={
        "tolerable_rate": 0.5, "expected_rate": 0.4943, "confidence": 0.95})
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    problem = json.loads(response.get_data(as_text=True))
    message = " ".join(problem["errors"]["expected_rate"])
    assert "10,000 deviations" in message and "21,054 items allowing 10,407" in message
