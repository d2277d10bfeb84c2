"""Monetary-unit sampling with files: a ledger file in, a test sheet out, the sheet back.

Functions over a :class:`~sampling_client.api.SamplingClient`, for the multipart forms of
``/v1/monetary/selection`` (a population file) and ``/v1/monetary/evaluation`` (a
completed test sheet), and for the test sheet of a selection sent as JSON::

    with SamplingClient("http://127.0.0.1:8000") as client:
        picks = select_from_file(client, "receivables.csv", {
            "population": {"file": {"id_column": "invoice", "amount_column": "balance"}},
            "sample_size": 60, "seed": "ye-2026"})
        sheet = test_sheet_from_file(client, "receivables.csv", {...same request...})
        evaluation = evaluate_test_sheet(client, "completed.xlsx",
                                         {"tolerable_misstatement": "150000"})

Answers are the service's JSON (a dict), its Markdown or CSV (text) or its XLSX (bytes).
An upload is sent once: a connection failure is not retried, since the file would have to
be read again.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import requests

from sampling_client.api import (
    JSON,
    SamplingClient,
    ServiceUnavailable,
    Timeout,
    UnexpectedAnswer,
)

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
CSV = "text/csv"
SELECTION = "monetary-selection"
EVALUATION = "monetary-evaluation"


def upload(
    client: SamplingClient,
    operation: str,
    path: str | Path,
    request: Mapping[str, Any],
    accept: str = JSON,
    *,
    timeout: Timeout | None = None,
    request_id: str | None = None,
) -> requests.Response:
    """POST ``path`` as the ``file`` part and ``request`` as the JSON ``request`` part of a
    ``multipart/form-data`` body; the answer if it is 2xx, else the client's errors."""
    url = client.base_url + client.path_of(operation)
    part = json.dumps(dict(request), allow_nan=False, ensure_ascii=False)
    headers = client._headers(accept, request_id, has_body=False)
    file = Path(path)
    try:
        with file.open("rb") as stream:
            parts: dict[str, Any] = {
                "file": (file.name, stream, "application/octet-stream"),
                "request": (None, part, JSON),
            }
            response = client._session.post(
                url,
                files=parts,
                headers=headers,
                timeout=timeout if timeout is not None else client.timeout,
                allow_redirects=False,
            )
    except requests.RequestException as exc:
        raise ServiceUnavailable(
            f"POST {url} failed: {exc.__class__.__name__}", url=url, status=None, attempts=1
        ) from None
    return client._check(response, "POST", 1)


def _answer(response: requests.Response, accept: str) -> Any:
    got = response.headers.get("Content-Type", "").split(";")[0].strip().lower()
    if got != accept:
        raise UnexpectedAnswer(
            f"POST {response.url} answered {got or 'no Content-Type'}, not {accept}",
            url=response.url,
        )
    if accept == JSON:
        return response.json()
    if accept == XLSX:
        return response.content
    return response.content.decode("utf-8")


def select_from_file(
    client: SamplingClient, path: str | Path, request: Mapping[str, Any], accept: str = JSON,
    **kwargs: Any,
) -> Any:
    """``POST /v1/monetary/selection`` with a population file: JSON (a dict), ``text/csv``
    or ``text/markdown`` (text), or the XLSX test sheet (bytes)."""
    return _answer(upload(client, SELECTION, path, request, accept, **kwargs), accept)


def test_sheet_from_file(
    client: SamplingClient, path: str | Path, request: Mapping[str, Any], **kwargs: Any
) -> bytes:
    """The XLSX test sheet of a selection from a population file."""
    sheet: bytes = select_from_file(client, path, request, XLSX, **kwargs)
    return sheet


test_sheet_from_file.__test__ = False  # type: ignore[attr-defined]  # not a pytest test


def test_sheet(
    client: SamplingClient, request: Mapping[str, Any], *, timeout: Timeout | None = None,
    request_id: str | None = None,
) -> bytes:
    """The XLSX test sheet of a selection from a JSON list of ``{"id", "amount"}`` items."""
    response = client._send(
        "POST", client.path_of(SELECTION), request, XLSX, timeout, request_id
    )
    sheet: bytes = _answer(response, XLSX)
    return sheet


test_sheet.__test__ = False  # type: ignore[attr-defined]  # not a pytest test


def evaluate_test_sheet(
    client: SamplingClient, path: str | Path, request: Mapping[str, Any] | None = None,
    accept: str = JSON, **kwargs: Any,
) -> Any:
    """``POST /v1/monetary/evaluation`` with a completed test sheet: JSON (a dict),
    ``text/markdown`` (text) or the workbook with its evaluation added (XLSX bytes)."""
    return _answer(upload(client, EVALUATION, path, request or {}, accept, **kwargs), accept)
