"""Python client and command line of the attribute sampling service.

>>> from sampling_client import SamplingClient, RequestRejected
>>> with SamplingClient("http://127.0.0.1:8000") as client:     # doctest: +SKIP
...     plan = client.sample_size(tolerable_rate=0.05, expected_rate=0.01)

:mod:`sampling_client.api` holds the client and its errors; :mod:`sampling_client.cli`
the ``attribute-sampling`` command.
"""

from sampling_client.api import (
    CSV,
    DEFAULT_URL,
    JSON,
    MARKDOWN,
    MAX_BATCH_OPERATIONS,
    SVG,
    XLSX,
    AuthenticationFailed,
    RequestRejected,
    SamplingClient,
    ServiceError,
    ServiceUnavailable,
    UnexpectedAnswer,
)
from sampling_client.multipart import FileUpload
from sampling_client.retrying import RetryPolicy

__all__ = [
    "CSV",
    "DEFAULT_URL",
    "JSON",
    "MARKDOWN",
    "MAX_BATCH_OPERATIONS",
    "SVG",
    "XLSX",
    "AuthenticationFailed",
    "FileUpload",
    "RequestRejected",
    "RetryPolicy",
    "SamplingClient",
    "ServiceError",
    "ServiceUnavailable",
    "UnexpectedAnswer",
]
