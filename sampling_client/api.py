"""A Python client for the attribute sampling service, over HTTP with requests.

>>> from sampling_client import SamplingClient
>>> client = SamplingClient("http://127.0.0.1:8000")          # doctest: +SKIP
>>> client.sample_size(tolerable_rate=0.05, expected_rate=0.01)["sample_size"]  # doctest: +SKIP
93

A population file or a completed test sheet goes with its request as
``multipart/form-data``, streamed from disk as it is sent (:mod:`sampling_client.multipart`):
``client.population_profile("ledger.csv", population={"file": {"id_column": "doc_no"}})``,
:meth:`SamplingClient.selection_from_file`, :meth:`SamplingClient.test_sheet_evaluation` and
the others, or :meth:`SamplingClient.call_file` for any operation that reads a file.

Every call has a timeout. A call is tried again only when the connection could not be
made or the service answered ``503`` (see :mod:`sampling_client.retrying`); every endpoint
is a stateless computation whose answer depends only on the request, so sending a POST
twice is safe: it cannot create, change or double anything.

Errors share one base class, :class:`ServiceError`:

- :class:`RequestRejected`: the service refused the request (a 4xx answer); it carries
  the problem details (RFC 9457): ``status``, ``title``, ``detail``, the ``errors`` by
  field and the ``request_id``;
- :class:`AuthenticationFailed`, a kind of :class:`RequestRejected`: 401 or 403, the API
  key is missing or not accepted;
- :class:`ServiceUnavailable`: no answer (connection refused, timed out), a 503 that
  outlasted the retries, or any other 5xx;
- :class:`UnexpectedAnswer`: an answer that is not what the service sends (not JSON, a
  redirect), usually because the URL points at something else.

One client holds one HTTP session (connections are reused); use one client per thread.
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Callable, Mapping, Sequence
from importlib import metadata
from typing import Any
from urllib.parse import urlsplit

import requests

from sampling_client.multipart import FileChanged, FileUpload
from sampling_client.retrying import RetryPolicy

DEFAULT_URL = "http://127.0.0.1:8000"

JSON = "application/json"
MARKDOWN = "text/markdown"
CSV = "text/csv"
SVG = "image/svg+xml"
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"

#: The path of each operation, by its operationId in the service's OpenAPI document.
#: An operation not listed here is looked up in ``GET /openapi.yaml`` on first use.
OPERATION_PATHS = {
    "sample-size": "/v1/sample-size",
    "evaluation": "/v1/evaluation",
    "selection": "/v1/selection",
    "estimation-sample-size": "/v1/estimation/sample-size",
    "plan-curve": "/v1/plans/curve",
    "monetary-sample-size": "/v1/monetary/sample-size",
    "monetary-selection": "/v1/monetary/selection",
    "monetary-evaluation": "/v1/monetary/evaluation",
    "population-profile": "/v1/populations/profile",
    "population-stratified-selection": "/v1/populations/stratified-selection",
    "plan-periodic": "/v1/plans/periodic",
    "staged-plan": "/v1/plans/staged",
    "staged-evaluation": "/v1/plans/staged/evaluation",
    "staged-curve": "/v1/plans/staged/curve",
    "strata-evaluation": "/v1/evaluation/strata",
    "sequence-evaluation": "/v1/evaluation/sequence",
    "batch": "/v1/batch",
}

#: Most operations the service takes in one batch by default (SAMPLING_MAX_BATCH_OPERATIONS);
#: :meth:`SamplingClient.batch` sends longer lists in chunks of this many.
MAX_BATCH_OPERATIONS = 1000

try:
    VERSION = metadata.version("attribute-sampling-service")
except metadata.PackageNotFoundError:  # a source tree that was never installed
    VERSION = "0.0.0+source"
USER_AGENT = f"attribute-sampling-client/{VERSION}"

Timeout = float | tuple[float, float]
Body = Mapping[str, Any] | None
#: A file to upload: its path.
FilePath = str | os.PathLike[str]


# --------------------------------------------------------------------------- errors


class ServiceError(Exception):
    """Base of every error the client raises for an answer, or the lack of one."""

    def __init__(self, message: str, *, url: str) -> None:
        super().__init__(message)
        self.url = url


class RequestRejected(ServiceError):
    """The service refused the request (HTTP 4xx), with its problem details.

    ``errors`` maps each offending field, as a dotted path such as ``population.size``,
    to what is wrong with it; it is empty when the problem is not about a field.
    """

    def __init__(
        self,
        *,
        url: str,
        method: str,
        status: int,
        title: str,
        detail: str,
        errors: Mapping[str, list[str]] | None = None,
        request_id: str | None = None,
        problem: Mapping[str, Any] | None = None,
    ) -> None:
        self.url, self.method, self.status = url, method, status
        self.title, self.detail = title, detail
        self.errors: dict[str, list[str]] = {k: list(v) for k, v in (errors or {}).items()}
        self.request_id = request_id
        self.problem: dict[str, Any] = dict(problem or {})
        super().__init__(self._message(), url=url)

    def _message(self) -> str:
        head = f"{self.method} {self.url} was refused (HTTP {self.status} {self.title})"
        if self.errors:
            reasons = "; ".join(f"{field}: {' '.join(msgs)}" for field, msgs in self.errors.items())
        else:
            reasons = self.detail
        return f"{head}: {reasons}" if reasons else head


class AuthenticationFailed(RequestRejected):
    """The service wants an API key it was not given, or refused the one given (401, 403).

    ``challenge`` is the ``WWW-Authenticate`` header of the answer, if any.
    """

    def __init__(self, *, challenge: str | None, key_sent: bool, **kwargs: Any) -> None:
        self.challenge, self.key_sent = challenge, key_sent
        super().__init__(**kwargs)

    def _message(self) -> str:
        if self.status == 401 and not self.key_sent:
            why = "it needs an API key and none was given"
        elif self.status == 401:
            why = "it did not accept the API key given"
        else:
            why = "the API key given is not allowed to do this"
        return f"{self.method} {self.url} was refused (HTTP {self.status} {self.title}): {why}"


class ServiceUnavailable(ServiceError):
    """No usable answer: no connection, no answer in time, a lasting 503, or another 5xx.

    ``status`` is the HTTP status, or None when no answer came; ``attempts`` is how many
    times the request was sent.
    """

    def __init__(self, message: str, *, url: str, status: int | None, attempts: int) -> None:
        super().__init__(message, url=url)
        self.status, self.attempts = status, attempts


class UnexpectedAnswer(ServiceError):
    """An answer the service does not give: not JSON where JSON was asked for, a redirect."""


# --------------------------------------------------------------------------- client


def _check_base_url(base_url: str) -> str:
    parts = urlsplit(base_url)
    if parts.scheme not in ("http", "https") or not parts.netloc:
        raise ValueError(
            f"base_url must be an http:// or https:// address such as {DEFAULT_URL}; "
            f"got {base_url!r}"
        )
    if parts.query or parts.fragment:
        raise ValueError(f"base_url must not have a query or fragment; got {base_url!r}")
    return base_url.rstrip("/")


def _check_timeout(timeout: Timeout) -> Timeout:
    values = timeout if isinstance(timeout, tuple) else (timeout,)
    for value in values:
        if isinstance(value, bool) or not isinstance(value, int | float) or not value > 0:
            raise ValueError(f"timeout must be a positive number of seconds; got {timeout!r}")
    return timeout


def _check_api_key(api_key: str | None) -> str | None:
    if api_key is None:
        return None
    if not isinstance(api_key, str) or not api_key:
        raise ValueError("api_key must be a non-empty string, or None for no key")
    if any(c.isspace() or not c.isprintable() for c in api_key):
        # A header value cannot hold them, and a pasted key with a line break is a mistake.
        raise ValueError("api_key must not contain spaces, line breaks or control characters")
    return api_key


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not JSON")


def _media_type(response: requests.Response) -> str:
    return response.headers.get("Content-Type", "").split(";")[0].strip().lower()


def _is_json(media_type: str) -> bool:
    return media_type == JSON or (media_type.startswith("application/") and
                                  media_type.endswith("+json"))


def _file_changed(exc: BaseException) -> FileChanged | None:
    """The :class:`FileChanged` behind a connection error, if the upload raised one (requests
    and urllib3 wrap what the body raised while it was sent)."""
    seen: BaseException | None = exc
    for _ in range(10):
        if seen is None:
            return None
        if isinstance(seen, FileChanged):
            return seen
        inner = [a for a in getattr(seen, "args", ()) if isinstance(a, BaseException)]
        seen = seen.__cause__ or seen.__context__ or (inner[-1] if inner else None)
    return None


def _connection_reason(exc: requests.RequestException, timeout: Timeout) -> str:
    """A few plain words for why no connection was made."""
    if isinstance(exc, requests.ConnectTimeout):
        connect = timeout[0] if isinstance(timeout, tuple) else timeout
        return f"no connection within {connect:g} s"
    text = str(exc)
    if "Connection refused" in text:
        return "connection refused"
    if "Name or service not known" in text or "nodename nor servname" in text or (
        "getaddrinfo failed" in text or "Temporary failure in name resolution" in text
    ):
        return "host name not found"
    if "Connection reset" in text or "RemoteDisconnected" in text:
        return "connection closed before an answer"
    return "connection failed: " + text[:200]


class SamplingClient:
    """Client of one attribute sampling service at ``base_url``.

    Parameters
    ----------
    base_url : str
        The service's address, such as ``http://127.0.0.1:8000`` (a path prefix is kept).
    api_key : str, optional
        Sent as ``Authorization: Bearer <key>`` on every call when given.
    timeout : float or (float, float)
        Seconds to wait for the connection and for each read of the answer; a pair gives
        the two apart. Every call uses it unless the call gives its own.
    retries : int
        Further tries after the first, on connection errors and 503 only.
    backoff : float
        Seconds before the first retry; doubled for each further one, at most
        ``max_backoff``.
    max_retry_after : float
        Longest ``Retry-After`` honoured; a 503 asking for longer is raised at once.
    session : requests.Session, optional
        The session to send with (for adapters or tests); the client closes only one it
        made itself.
    sleep : callable
        How to wait between tries (``time.sleep``; a test can record the waits instead).
    """

    def __init__(
        self,
        base_url: str = DEFAULT_URL,
        api_key: str | None = None,
        timeout: Timeout = 10.0,
        retries: int = 3,
        backoff: float = 0.2,
        *,
        max_backoff: float = 5.0,
        max_retry_after: float = 10.0,
        session: requests.Session | None = None,
        sleep: Callable[[float], None] = time.sleep,
    ) -> None:
        self.base_url = _check_base_url(base_url)
        self._api_key = _check_api_key(api_key)
        self.timeout = _check_timeout(timeout)
        self.retry = RetryPolicy(retries, backoff, max_backoff, max_retry_after)
        self._own_session = session is None
        self._session = session if session is not None else requests.Session()
        self._sleep = sleep
        self._spec_paths: dict[str, str] | None = None

    def __repr__(self) -> str:  # never shows the key
        keyed = ", with an API key" if self._api_key else ""
        return f"SamplingClient({self.base_url!r}{keyed})"

    def __enter__(self) -> SamplingClient:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def close(self) -> None:
        """Close the HTTP session, if the client made it."""
        if self._own_session:
            self._session.close()

    # ------------------------------------------------------------------ endpoints

    def sample_size(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/sample-size``: sample size and allowed deviations for a test of controls.

        The body is ``request`` updated with ``fields``:
        ``client.sample_size(tolerable_rate=0.05, population={"size": 4200})``.
        """
        return self.call("sample-size", {**(request or {}), **fields})

    def evaluation(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/evaluation``: upper deviation limit and conclusion for a finished test.

        With ``strata`` the answer is the evaluation in strata, as :meth:`strata_evaluation`
        gives it.
        """
        return self.call("evaluation", {**(request or {}), **fields})

    def selection(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/selection``: the sample items, reproducibly, as JSON."""
        return self.call("selection", {**(request or {}), **fields})

    def selection_csv(self, request: Body = None, /, **fields: Any) -> str:
        """``POST /v1/selection`` as CSV, exactly as the service writes it (BOM, CRLF)."""
        return self.call_text("selection", {**(request or {}), **fields}, CSV)

    def estimation_sample_size(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/estimation/sample-size``: sizes to estimate a rate within a margin."""
        return self.call("estimation-sample-size", {**(request or {}), **fields})

    def plan_curve(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/plans/curve``: the operating characteristic of a plan."""
        return self.call("plan-curve", {**(request or {}), **fields})

    def plan_curve_svg(self, request: Body = None, /, **fields: Any) -> str:
        """``POST /v1/plans/curve`` as an SVG chart."""
        return self.call_text("plan-curve", {**(request or {}), **fields}, SVG)

    def monetary_sample_size(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/monetary/sample-size``: sampling units and interval for a test of details.

        ``client.monetary_sample_size(book_value="2500000.00", tolerable_misstatement=125000)``.
        """
        return self.call("monetary-sample-size", {**(request or {}), **fields})

    def monetary_selection(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/monetary/selection``: currency units selected reproducibly, as JSON."""
        return self.call("monetary-selection", {**(request or {}), **fields})

    def monetary_selection_csv(self, request: Body = None, /, **fields: Any) -> str:
        """``POST /v1/monetary/selection`` as the CSV test sheet, as the service writes it."""
        return self.call_text("monetary-selection", {**(request or {}), **fields}, CSV)

    def monetary_evaluation(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/monetary/evaluation``: misstatement limits by method, side by side."""
        return self.call("monetary-evaluation", {**(request or {}), **fields})

    def plan_periodic(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/plans/periodic``: what the sample sizes of a periodic control prove."""
        return self.call("plan-periodic", {**(request or {}), **fields})

    def staged_plan(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/plans/staged``: a staged (stop-or-go) plan with its exact risks."""
        return self.call("staged-plan", {**(request or {}), **fields})

    def staged_evaluation(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/plans/staged/evaluation``: a finished staged test, evaluated."""
        return self.call("staged-evaluation", {**(request or {}), **fields})

    def staged_curve(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/plans/staged/curve``: acceptance and expected size against the rate."""
        return self.call("staged-curve", {**(request or {}), **fields})

    def staged_curve_svg(self, request: Body = None, /, **fields: Any) -> str:
        """``POST /v1/plans/staged/curve`` as an SVG chart."""
        return self.call_text("staged-curve", {**(request or {}), **fields}, SVG)

    def strata_evaluation(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/evaluation/strata``: strata evaluated, one limit for the whole."""
        return self.call("strata-evaluation", {**(request or {}), **fields})

    def sequence_evaluation(self, request: Body = None, /, **fields: Any) -> dict[str, Any]:
        """``POST /v1/evaluation/sequence``: limits valid at any stopping time."""
        return self.call("sequence-evaluation", {**(request or {}), **fields})

    # ------------------------------------------------------------------ files

    def population_profile(self, file: FilePath, request: Body = None, /,
                           **fields: Any) -> dict[str, Any]:
        """``POST /v1/populations/profile``: what the population file at ``file`` holds.

        ``client.population_profile("ledger.csv", population={"file": {"id_column":
        "doc_no", "amount_column": "amount"}}, control_total="56192.76")``.
        """
        return self.call_file("population-profile", file, {**(request or {}), **fields})

    def selection_from_file(self, file: FilePath, request: Body = None, /,
                            **fields: Any) -> dict[str, Any]:
        """``POST /v1/selection`` from the population file at ``file`` (described by
        ``population.file``): the items, with the selected records and a pull list."""
        return self.call_file("selection", file, {**(request or {}), **fields})

    def selection_from_file_as(self, accept: str, file: FilePath, request: Body = None, /,
                               **fields: Any) -> bytes:
        """The same selection as :data:`CSV`, or :data:`XLSX` (a test sheet when the
        request names ``attributes``): the file's bytes as the service wrote them."""
        return self.call_file_bytes("selection", file, {**(request or {}), **fields}, accept)

    def stratified_selection(self, file: FilePath, request: Body = None, /,
                             **fields: Any) -> dict[str, Any]:
        """``POST /v1/populations/stratified-selection``: stratum by stratum from ``file``."""
        return self.call_file("population-stratified-selection", file,
                              {**(request or {}), **fields})

    def test_sheet_evaluation(self, file: FilePath, request: Body = None, /,
                              **fields: Any) -> dict[str, Any]:
        """``POST /v1/evaluation`` of the completed test sheet at ``file``: one evaluation
        per attribute. ``client.test_sheet_evaluation("completed.xlsx", confidence=0.95,
        tolerable_rates={"three-way match": 0.05})``."""
        return self.call_file("evaluation", file, {**(request or {}), **fields})

    def test_sheet_evaluation_as(self, accept: str, file: FilePath, request: Body = None, /,
                                 **fields: Any) -> bytes:
        """The same evaluation as :data:`MARKDOWN`, or :data:`XLSX` (the workbook again with
        an Evaluation sheet added), as the service wrote it."""
        return self.call_file_bytes("evaluation", file, {**(request or {}), **fields}, accept)

    def monetary_selection_from_file(self, file: FilePath, request: Body = None, /,
                                     **fields: Any) -> dict[str, Any]:
        """``POST /v1/monetary/selection`` from the ledger file at ``file`` (described by
        ``population.file`` with ``id_column`` and ``amount_column``): the currency units
        selected, with each selected record."""
        return self.call_file("monetary-selection", file, {**(request or {}), **fields})

    def monetary_selection_from_file_as(self, accept: str, file: FilePath,
                                        request: Body = None, /, **fields: Any) -> bytes:
        """The same selection as :data:`CSV`, :data:`MARKDOWN`, or :data:`XLSX` (the
        monetary-unit test sheet), as the service wrote it."""
        return self.call_file_bytes("monetary-selection", file,
                                    {**(request or {}), **fields}, accept)

    def monetary_test_sheet(self, request: Body = None, /, **fields: Any) -> bytes:
        """The monetary-unit test sheet (XLSX) of a selection from a JSON list of
        ``{"id", "amount"}`` items."""
        return self.call_bytes("monetary-selection", {**(request or {}), **fields}, XLSX)

    def monetary_sheet_evaluation(self, file: FilePath, request: Body = None, /,
                                  **fields: Any) -> dict[str, Any]:
        """``POST /v1/monetary/evaluation`` of the completed monetary-unit test sheet at
        ``file``: ``client.monetary_sheet_evaluation("completed.xlsx",
        tolerable_misstatement="20000")``."""
        return self.call_file("monetary-evaluation", file, {**(request or {}), **fields})

    def monetary_sheet_evaluation_as(self, accept: str, file: FilePath, request: Body = None,
                                     /, **fields: Any) -> bytes:
        """The same evaluation as :data:`MARKDOWN`, or :data:`XLSX` (the workbook again with
        an Evaluation sheet added), as the service wrote it."""
        return self.call_file_bytes("monetary-evaluation", file,
                                    {**(request or {}), **fields}, accept)

    def batch(
        self,
        operations: Sequence[Mapping[str, Any]],
        *,
        chunk_size: int = MAX_BATCH_OPERATIONS,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> dict[str, Any]:
        """``POST /v1/batch``: ``{"results": [...]}``, one answer per operation, in order.

        Each operation is ``{"id": ..., "operation": ..., "request": {...}}``. More than
        ``chunk_size`` operations are sent as several batches of at most that many, one
        after the other, and their results joined; ids must then be unique across the
        whole list (the service checks them within one batch).
        """
        if isinstance(chunk_size, bool) or not isinstance(chunk_size, int) or chunk_size < 1:
            raise ValueError(f"chunk_size must be a whole number of at least 1; got {chunk_size!r}")
        items = list(operations)
        if len(items) <= chunk_size:
            return self.call("batch", {"operations": items}, timeout=timeout,
                             request_id=request_id)
        seen: dict[Any, int] = {}
        for index, item in enumerate(items):
            item_id = item.get("id") if isinstance(item, Mapping) else None
            if item_id in seen:
                raise ValueError(
                    f"operations[{index}] repeats the id {item_id!r} of operations[{seen[item_id]}]"
                )
            seen[item_id] = index
        results: list[Any] = []
        for start in range(0, len(items), chunk_size):
            answer = self.call("batch", {"operations": items[start:start + chunk_size]},
                               timeout=timeout, request_id=request_id)
            results.extend(answer["results"])
        return {"results": results}

    def health(self, *, timeout: Timeout | None = None) -> dict[str, Any]:
        """``GET /v1/health``: ``{"status": "ok", "version": ...}``."""
        return self._json(self._send("GET", "/v1/health", None, JSON, timeout, None), "GET")

    def ready(self, *, timeout: Timeout | None = None) -> dict[str, Any]:
        """``GET /v1/ready``: ``{"status": "ready"}``; still starting after the retries is a
        :class:`ServiceUnavailable`."""
        return self._json(self._send("GET", "/v1/ready", None, JSON, timeout, None), "GET")

    def markdown(self, operation: str, request: Mapping[str, Any], **kwargs: Any) -> str:
        """The ticket-ready Markdown block answering ``request`` (``Accept: text/markdown``)."""
        return self.call_text(operation, request, MARKDOWN, **kwargs)

    # ------------------------------------------------------------------ generic

    def call(
        self,
        operation: str,
        request: Mapping[str, Any],
        *,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> dict[str, Any]:
        """POST ``request`` to the operation named ``operation`` and return its JSON answer.

        ``operation`` is an operationId of the service's OpenAPI document, so an endpoint
        added to the service works here without new code. ``request_id`` is sent as
        ``X-Request-ID`` (the service logs it and repeats it in problem details).
        For the other media types an operation answers, see :meth:`call_text`.
        """
        return self._post_json(operation, request, timeout, request_id)

    def call_text(
        self,
        operation: str,
        request: Mapping[str, Any],
        accept: str,
        *,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> str:
        """POST ``request`` asking for ``accept`` (``text/markdown``, ``text/csv``, ...) and
        return the answer's text exactly as sent (UTF-8 decoded; a JSON answer too)."""
        return self._post_raw(operation, request, accept, timeout, request_id).decode("utf-8")

    def call_bytes(
        self,
        operation: str,
        request: Mapping[str, Any],
        accept: str,
        *,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> bytes:
        """POST ``request`` asking for ``accept`` (an XLSX workbook, say) and return the
        answer's bytes exactly."""
        return self._post_raw(operation, request, accept, timeout, request_id)

    def call_file(
        self,
        operation: str,
        file: FilePath,
        request: Mapping[str, Any],
        *,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> dict[str, Any]:
        """POST the file at ``file`` with ``request`` as ``multipart/form-data`` (the parts
        ``file`` and ``request``) and return the JSON answer.

        The file is streamed from disk as it is sent, never read whole into memory; it is
        read again from its start when the request is tried again. A file that cannot be
        read raises :class:`OSError` before anything is sent.
        """
        return self._post_json(operation, FileUpload(file, request), timeout, request_id)

    def call_file_bytes(
        self,
        operation: str,
        file: FilePath,
        request: Mapping[str, Any],
        accept: str,
        *,
        timeout: Timeout | None = None,
        request_id: str | None = None,
    ) -> bytes:
        """As :meth:`call_file`, asking for ``accept``; the answer's bytes exactly."""
        return self._post_raw(
            operation, FileUpload(file, request), accept, timeout, request_id
        )

    def _post_json(
        self,
        operation: str,
        body: Mapping[str, Any] | FileUpload,
        timeout: Timeout | None,
        request_id: str | None,
    ) -> dict[str, Any]:
        """POST ``body`` to ``operation`` and return its JSON answer."""
        return self._json(
            self._send("POST", self.path_of(operation), body, JSON, timeout, request_id),
            "POST",
        )

    def _post_raw(
        self,
        operation: str,
        body: Mapping[str, Any] | FileUpload,
        accept: str,
        timeout: Timeout | None,
        request_id: str | None,
    ) -> bytes:
        """POST ``body`` to ``operation`` asking for ``accept``; the answer's bytes exactly."""
        response = self._send(
            "POST", self.path_of(operation), body, accept, timeout, request_id
        )
        return self._expect(response, accept).content

    @staticmethod
    def _expect(response: requests.Response, accept: str) -> requests.Response:
        got = _media_type(response)
        if got != accept.lower():
            raise UnexpectedAnswer(
                f"POST {response.url} answered {got or 'no Content-Type'}, not {accept}",
                url=response.url,
            )
        return response

    def path_of(self, operation: str) -> str:
        """The path of ``operation``: from :data:`OPERATION_PATHS`, else from the spec."""
        if operation in OPERATION_PATHS:
            return OPERATION_PATHS[operation]
        if self._spec_paths is None:
            self._spec_paths = self._read_spec_paths()
        if operation not in self._spec_paths:
            known = ", ".join(sorted({*OPERATION_PATHS, *self._spec_paths}))
            raise ValueError(f"the service has no operation {operation!r}; it has {known}")
        return self._spec_paths[operation]

    def _read_spec_paths(self) -> dict[str, str]:
        import yaml  # only needed for operations newer than this client

        response = self._send("GET", "/openapi.yaml", None, "application/yaml", None, None)
        try:
            spec = yaml.safe_load(response.content.decode("utf-8"))
            return {
                op["operationId"]: path
                for path, item in spec["paths"].items()
                for verb, op in item.items()
                if verb == "post" and isinstance(op, dict) and "operationId" in op
            }
        except (yaml.YAMLError, UnicodeDecodeError, KeyError, TypeError, AttributeError):
            raise UnexpectedAnswer(
                f"GET {response.url} did not answer an OpenAPI document", url=response.url
            ) from None

    # ------------------------------------------------------------------ transport

    def _headers(self, accept: str, request_id: str | None,
                 content_type: str | None) -> dict[str, str]:
        headers = {"Accept": accept, "User-Agent": USER_AGENT}
        if content_type is not None:
            headers["Content-Type"] = content_type
        if self._api_key is not None:
            headers["Authorization"] = f"Bearer {self._api_key}"
        if request_id is not None:
            headers["X-Request-ID"] = request_id
        return headers

    def _send(
        self,
        method: str,
        path: str,
        body: Mapping[str, Any] | FileUpload | None,
        accept: str,
        timeout: Timeout | None,
        request_id: str | None,
    ) -> requests.Response:
        """Send with the retry policy; the final answer if it is 2xx, else raise.

        ``body`` is a JSON request, or a :class:`FileUpload` streamed as it is sent.
        """
        url = self.base_url + path
        wait = _check_timeout(timeout) if timeout is not None else self.timeout
        data: bytes | FileUpload | None = None
        content_type = None
        if isinstance(body, FileUpload):
            data, content_type = body, body.content_type
        elif body is not None:
            try:
                data = json.dumps(body, allow_nan=False, ensure_ascii=False).encode("utf-8")
            except ValueError:
                raise ValueError("the request holds NaN or Infinity, which JSON cannot carry") \
                    from None
            content_type = JSON
        headers = self._headers(accept, request_id, content_type)
        attempt = 0
        while True:
            try:
                response = self._session.request(
                    method, url, data=data, headers=headers, timeout=wait, allow_redirects=False
                )
            except requests.ConnectionError as exc:  # ConnectTimeout is one too
                changed = _file_changed(exc)
                if changed is not None:
                    raise changed from None  # the file's fault, not the connection's
                if attempt < self.retry.retries:
                    self._sleep(self.retry.delay(attempt))
                    attempt += 1
                    continue
                tries = f"{attempt + 1} {'try' if attempt == 0 else 'tries'}"
                raise ServiceUnavailable(
                    f"cannot reach the attribute sampling service at {self.base_url} "
                    f"({_connection_reason(exc, wait)}; {tries})",
                    url=url, status=None, attempts=attempt + 1,
                ) from None
            except requests.Timeout:
                # The request reached the service, which did not answer in time: a retry
                # would only repeat the same long computation.
                read = wait[1] if isinstance(wait, tuple) else wait
                raise ServiceUnavailable(
                    f"{method} {url} got no answer within {read:g} s; give a longer timeout "
                    "for large requests",
                    url=url, status=None, attempts=attempt + 1,
                ) from None
            if response.status_code == 503 and attempt < self.retry.retries:
                pause = self.retry.wait_after_503(attempt, response.headers.get("Retry-After"))
                if pause is not None:
                    response.close()
                    self._sleep(pause)
                    attempt += 1
                    continue
            return self._check(response, method, attempt + 1)

    def _check(self, response: requests.Response, method: str, attempts: int) -> requests.Response:
        status = response.status_code
        if 200 <= status < 300:
            return response
        url = response.url
        if 300 <= status < 400:
            where = response.headers.get("Location", "elsewhere")
            raise UnexpectedAnswer(
                f"{method} {url} answered HTTP {status}, a redirect to {where}; give the "
                "service's own address as the URL",
                url=url,
            )
        problem = self._problem(response)
        title = str(problem.get("title") or response.reason or "")
        detail = str(problem.get("detail") or "")
        if status >= 500:
            text = f"the service at {self.base_url} answered HTTP {status} {title}"
            if status == 503 and attempts > 1:
                text += f" after {attempts} tries"
            retry_after = response.headers.get("Retry-After")
            if status == 503 and retry_after:
                after = retry_after.strip()[:40]
                text += f" (it asks to try again after {after}{' s' if after.isdigit() else ''})"
            raise ServiceUnavailable(
                f"{text}: {detail}" if detail else text, url=url, status=status, attempts=attempts
            )
        errors = problem.get("errors")
        fields = {
            str(k): [str(m) for m in v] if isinstance(v, list) else [str(v)]
            for k, v in (errors.items() if isinstance(errors, dict) else ())
        }
        request_id = problem.get("request_id") or response.headers.get("X-Request-ID")
        common: dict[str, Any] = {
            "url": url, "method": method, "status": status, "title": title, "detail": detail,
            "errors": fields, "request_id": request_id, "problem": problem,
        }
        if status in (401, 403):
            raise AuthenticationFailed(
                challenge=response.headers.get("WWW-Authenticate"),
                key_sent=self._api_key is not None,
                **common,
            )
        raise RequestRejected(**common)

    @staticmethod
    def _problem(response: requests.Response) -> dict[str, Any]:
        """The problem details of an error answer, or what can be said without them."""
        if _is_json(_media_type(response)):
            try:
                body = json.loads(response.content.decode("utf-8"))
            except (ValueError, UnicodeDecodeError):
                body = None
            if isinstance(body, dict):
                return body
        text = response.content.decode("utf-8", "replace").strip()
        detail = f"the answer is not problem details ({_media_type(response) or 'no type'})"
        if text:
            detail += ": " + " ".join(text.split())[:200]
        return {"title": response.reason or "", "status": response.status_code, "detail": detail}

    @staticmethod
    def _json(response: requests.Response, method: str) -> dict[str, Any]:
        media_type = _media_type(response)
        if not _is_json(media_type):
            raise UnexpectedAnswer(
                f"{method} {response.url} answered "
                f"{media_type or 'no Content-Type'}, not JSON; is this the attribute sampling "
                "service?",
                url=response.url,
            )
        try:
            document = json.loads(response.content.decode("utf-8"),
                                  parse_constant=_refuse_constant)
        except (ValueError, UnicodeDecodeError):
            raise UnexpectedAnswer(
                f"{method} {response.url} answered malformed JSON",
                url=response.url,
            ) from None
        if not isinstance(document, dict):
            raise UnexpectedAnswer(
                f"{method} {response.url} answered JSON that is not an object",
                url=response.url,
            )
        return document
