"""The calls the load driver sends: one realistic request per endpoint, and the mixed set.

Every body lives in ``bench/load/bodies/`` so that wrk (through ``drive.lua``) and the
check made with requests beforehand send the very same bytes. The scenarios are those of
the README, for the fictional Northwind Trading: a test of purchase-order approvals over
4,200 orders, its evaluation, 60 of the 4,200 orders selected, an estimation sample,
the plan's curve, and a batch sizing ten controls of the year's programme.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import requests

BODIES = Path(__file__).resolve().parent / "bodies"
JSON = "application/json"
MARKDOWN = "text/markdown"
CHECK_SECONDS = 30.0


@dataclass(frozen=True)
class Call:
    """One kind of request: what is sent, and its share of a mixed run."""

    name: str
    method: str
    path: str
    accept: str = JSON
    body: str | None = None
    weight: int = 1

    @property
    def body_path(self) -> Path | None:
        return None if self.body is None else BODIES / self.body

    def spec(self) -> str:
        """The argument ``drive.lua`` reads: ``WEIGHT,METHOD,PATH,ACCEPT,BODY_FILE``."""
        body = "" if self.body_path is None else str(self.body_path)
        return f"{self.weight},{self.method},{self.path},{self.accept},{body}"


HEALTH = Call("health", "GET", "/v1/health")
SIZING = Call("sample-size", "POST", "/v1/sample-size", body="sample-size.json")
EVALUATION = Call("evaluation", "POST", "/v1/evaluation", body="evaluation.json")
SELECTION = Call("selection 60 of 4,200", "POST", "/v1/selection", body="selection.json")
ESTIMATION = Call("estimation sample-size", "POST", "/v1/estimation/sample-size",
                  body="estimation.json")
CURVE = Call("plans/curve", "POST", "/v1/plans/curve", body="curve.json")
BATCH = Call("batch of 10 controls", "POST", "/v1/batch", body="batch.json")
MARKDOWN_SIZING = Call("sample-size as Markdown", "POST", "/v1/sample-size",
                       accept=MARKDOWN, body="sample-size.json")

ENDPOINTS = [HEALTH, SIZING, EVALUATION, SELECTION, ESTIMATION, CURVE, BATCH, MARKDOWN_SIZING]
"""One run each, in this order; health first, as the ceiling the others are compared with."""

# A working day's traffic as we picture it: mostly sizing and evaluating single tests,
# then selections, the Markdown block pasted into a ticket, and the rarer heavier calls.
MIXED = [
    Call("sample-size", "POST", "/v1/sample-size", body="sample-size.json", weight=30),
    Call("evaluation", "POST", "/v1/evaluation", body="evaluation.json", weight=25),
    Call("selection", "POST", "/v1/selection", body="selection.json", weight=15),
    Call("markdown", "POST", "/v1/sample-size", accept=MARKDOWN, body="sample-size.json",
         weight=10),
    Call("curve", "POST", "/v1/plans/curve", body="curve.json", weight=8),
    Call("estimation", "POST", "/v1/estimation/sample-size", body="estimation.json", weight=7),
    Call("batch", "POST", "/v1/batch", body="batch.json", weight=5),
]


def mix_description(calls: list[Call]) -> str:
    total = sum(call.weight for call in calls)
    return ", ".join(f"{call.name} {100 * call.weight // total} %" for call in calls)


def check(url: str, call: Call) -> None:
    """Send ``call`` once with requests; raise ``SystemExit`` unless it is answered well.

    Well means: status 200, the media type asked for, and for a batch every item 200, so
    that a load run measures answers and not refusals.
    """
    body = None if call.body_path is None else call.body_path.read_bytes()
    headers = {"Accept": call.accept}
    if body is not None:
        headers["Content-Type"] = JSON
    response = requests.request(call.method, url + call.path, data=body, headers=headers,
                                timeout=CHECK_SECONDS)
    problem = None
    if response.status_code != 200:
        problem = f"status {response.status_code}: {response.text[:500]}"
    elif not response.headers.get("Content-Type", "").startswith(call.accept):
        problem = f"answered {response.headers.get('Content-Type')}, not {call.accept}"
    elif call.path == "/v1/batch":
        failed = [item["id"] for item in response.json()["results"] if item["status"] != 200]
        if failed:
            problem = f"batch items not answered 200: {', '.join(failed)}"
    if problem is not None:
        raise SystemExit(f"{call.method} {call.path} ({call.name}) is not a valid load "
                         f"request: {problem}")

